/**
 * Bytes per stored innovation sample for the current innovation_samples layout and a few
 * alternatives, filled the way the service fills it (unnest batches, every estimator
 * interleaved in time), on a throwaway PostgreSQL cluster. A size probe, not a speed one
 * (fsync is off here; the sizes do not depend on it).
 *
 *   npx tsx ingest/bench/storage-layouts.ts [estimators=2000] [samples per estimator=600]
 *
 * For each layout: table and index bytes per sample as filled, and the index after a
 * REINDEX (what compacting a closed day's partition would give).
 */
import fs from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import pg from 'pg';
import { LocalPostgres, freePort } from '../../scripts/lib/postgres.mjs';
import { requireFromProject } from '../../scripts/lib/project.mjs';

const E = Number(process.argv[2] ?? 2000);
const STEPS = Number(process.argv[3] ?? 600);
const STEPS_PER_BATCH = 2;

const withCusum = 'estimator_id, t, seq, nis, cusum_up, cusum_down, nu, w';
const withoutCusum = 'estimator_id, t, seq, nis, nu, w';
const layouts: { name: string; columns: string; key: string; cusum: boolean }[] = [
  { name: 'as migrated: key (estimator_id, t, seq)', columns: 'cusum', key: 'estimator_id, t, seq', cusum: true },
  { name: 'without cusum_up/cusum_down', columns: '', key: 'estimator_id, t, seq', cusum: false },
  { name: 'key (t, estimator_id, seq)', columns: 'cusum', key: 't, estimator_id, seq', cusum: true },
  { name: 'without cusum, key (t, estimator_id, seq)', columns: '', key: 't, estimator_id, seq', cusum: false },
];

async function main(): Promise<void> {
  const root = fs.mkdtempSync(path.join(os.tmpdir(), 'whitecap-layouts-pg-'));
  const cluster = new LocalPostgres({ root, port: await freePort(), database: 'layouts', settings: { fsync: 'off', synchronous_commit: 'off' }, log: () => undefined });
  try {
    cluster.init();
    await cluster.start();
    await cluster.ensureDatabase(requireFromProject);
    const db = new pg.Pool({ connectionString: cluster.url, max: 1 });
    const f32 = (a: number, b: number) => {
      const x = Buffer.alloc(8);
      x.writeFloatLE(a, 0);
      x.writeFloatLE(b, 4);
      return x;
    };
    console.log(`${E} estimators × ${STEPS} samples, inserted ${STEPS_PER_BATCH * E} per statement, interleaved in time`);
    for (const [i, l] of layouts.entries()) {
      const table = `layout_${i}`;
      await db.query(
        `create table ${table} (estimator_id integer not null, t timestamptz not null, seq bigint not null, nis real not null,
           ${l.cusum ? 'cusum_up real not null, cusum_down real not null,' : ''} nu bytea not null, w bytea not null, primary key (${l.key}))`,
      );
      const t0 = Date.UTC(2026, 11, 2) / 1000;
      for (let k = 0; k < STEPS; k += STEPS_PER_BATCH) {
        const cols = { e: [] as number[], t: [] as number[], seq: [] as number[], nis: [] as number[], up: [] as number[], down: [] as number[], nu: [] as Buffer[], w: [] as Buffer[] };
        for (let j = k; j < k + STEPS_PER_BATCH; j++) {
          for (let e = 1; e <= E; e++) {
            cols.e.push(e);
            cols.t.push(t0 + j * 0.1 + e * 1e-5);
            cols.seq.push(j + 1);
            cols.nis.push(Math.random() * 4);
            cols.up.push(Math.random());
            cols.down.push(Math.random());
            cols.nu.push(f32(Math.random(), Math.random()));
            cols.w.push(f32(Math.random(), Math.random()));
          }
        }
        await db.query(
          `insert into ${table} (${l.cusum ? withCusum : withoutCusum})
           select e, to_timestamp(t), seq, nis, ${l.cusum ? 'up, down, ' : ''}nu, w
             from unnest($1::int[], $2::float8[], $3::bigint[], $4::real[], $5::real[], $6::real[], $7::bytea[], $8::bytea[]) as u(e, t, seq, nis, up, down, nu, w)
           on conflict do nothing`,
          [cols.e, cols.t, cols.seq, cols.nis, cols.up, cols.down, cols.nu, cols.w],
        );
      }
      const r = (await db.query(`select count(*)::int as n, pg_total_relation_size('${table}') as total, pg_table_size('${table}') as tbl, pg_indexes_size('${table}') as idx from ${table}`)).rows[0];
      await db.query(`reindex table ${table}`);
      const packed = (await db.query(`select pg_indexes_size('${table}') as idx`)).rows[0];
      const per = (b: string | number) => (Number(b) / r.n).toFixed(1);
      console.log(
        `${l.name.padEnd(44)} ${per(r.total).padStart(6)} B/sample = table ${per(r.tbl)} + index ${per(r.idx)};` +
          ` index after REINDEX ${per(packed.idx)} → ${(Number(r.tbl) / r.n + Number(packed.idx) / r.n).toFixed(1)} B/sample`,
      );
    }
    await db.end();
  } finally {
    cluster.stop('immediate');
    fs.rmSync(root, { recursive: true, force: true });
  }
}

main().catch((err) => {
  console.error(err);
  process.exit(1);
});
