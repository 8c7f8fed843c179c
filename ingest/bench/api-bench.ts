// npm run bench:api — latency of the two heaviest reads on a seeded database:
//   the fleet summary (GET /api/fleet) with 10,000 estimators, and
//   one estimator's 24-hour series (86,400 samples down-sampled to ≤ 2,000 points).
// Targets: p95 under 100 ms and 200 ms on this machine. Prints the figures with the date
// and the core count, and writes them to ingest/bench/results/api-latest.{json,md}.
import { spawn } from 'node:child_process';
import fs from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import knexFactory from 'knex';
import { LocalPostgres, freePort } from '../../scripts/lib/postgres.mjs';
import { createRequire } from 'node:module';
import { signIn } from '../../test/support/api';
import { startService } from '../../test/support/service';

const root = path.resolve(__dirname, '../..');
const ESTIMATORS = Number(process.env.BENCH_ESTIMATORS ?? 10_000);
const SERIES_SAMPLES = 86_400;
const ROUNDS = Number(process.env.BENCH_ROUNDS ?? 60);

function runNode(args: string[], env: Record<string, string>): Promise<void> {
  return new Promise((resolve, reject) => {
    const child = spawn(process.execPath, ['--import', 'tsx', ...args], { cwd: root, env: { ...process.env, ...env }, stdio: 'inherit' });
    child.on('exit', (code) => (code === 0 ? resolve() : reject(new Error(`${args.join(' ')} exited ${code}`))));
  });
}

function percentile(sorted: number[], p: number): number {
  return sorted[Math.min(sorted.length - 1, Math.floor(p * sorted.length))];
}

async function time(label: string, rounds: number, fn: () => Promise<void>) {
  for (let i = 0; i < 3; i++) await fn(); // warm-up
  const ms: number[] = [];
  for (let i = 0; i < rounds; i++) {
    const t0 = performance.now();
    await fn();
    ms.push(performance.now() - t0);
  }
  ms.sort((a, b) => a - b);
  return { label, rounds, p50: percentile(ms, 0.5), p95: percentile(ms, 0.95), max: ms[ms.length - 1] };
}

async function main(): Promise<void> {
  const pgRoot = fs.mkdtempSync(path.join(os.tmpdir(), 'whitecap-bench-api-'));
  const port = await freePort();
  const pg = new LocalPostgres({ root: pgRoot, port, database: 'whitecap_bench', log: () => undefined });
  let stopService: (() => Promise<unknown>) | null = null;
  try {
    pg.init();
    await pg.start();
    await pg.ensureDatabase(createRequire(path.join(root, 'package.json')));
    const env = { WHITECAP_DATABASE_URL: pg.url };
    await runNode(['ingest/cli/migrate.ts', 'latest'], env);
    await runNode(['ingest/cli/seed.ts'], env);

    const knex = knexFactory({ client: 'pg', connection: pg.url });
    console.log(`seeding ${ESTIMATORS.toLocaleString()} estimators and ${SERIES_SAMPLES.toLocaleString()} samples…`);
    const site = await knex('sites').first('id');
    const rev = await knex('design_revisions').where({ measurement_dim: 2 }).first('id');
    const now = Date.now();
    // Units and estimators beyond the demo, each with a status row, as the pipeline leaves them.
    await knex.raw(
      `insert into units (site_id, key, name, kind)
       select ?, 'bench-unit-' || lpad(g::text, 5, '0'), 'Bench unit ' || g, 'yard-tractor' from generate_series(1, ?) g`,
      [site.id, ESTIMATORS - 64],
    );
    await knex.raw(
      `insert into estimators (unit_id, key, design_revision_id, measurement_dim)
       select id, 'position', ?, 2 from units where key like 'bench-unit-%'`,
      [rev.id],
    );
    await knex.raw(
      `insert into estimator_status (estimator_id, verdict, verdict_since, last_sample_at, last_received_at, last_seq, samples_total, p_value, nis_ratio, "window")
       select e.id,
              (array['consistent','consistent','consistent','marginal','inconsistent'])[1 + (e.id % 5)],
              now() - interval '1 hour', now(), now(), 1000, 1000, (e.id % 997) / 997.0, 0.75 + (e.id % 10) / 20.0,
              jsonb_build_object('verdict', 'consistent', 'reasons', '[]'::jsonb, 'samples', 100, 'pValue', (e.id % 997) / 997.0, 'm', 2,
                'nis', jsonb_build_object('ready', true, 'average', 1.5 + (e.id % 10) / 10.0, 'expected', 2,
                  'averageBounds', jsonb_build_object('lower', 1.4, 'upper', 2.7), 'pValue', (e.id % 997) / 997.0,
                  'exceedanceRate', 0.01, 'expectedExceedanceRate', 0.01))
         from estimators e`,
    );
    await knex.raw(
      `insert into alerts (estimator_id, rule, severity, state, summary, evidence, opened_at, last_evidence_at)
       select id, 'nis-window', 'critical', 'open', 'bench', '{}'::jsonb, now(), now() from estimators where id % 50 = 0`,
    );
    // One estimator's last 24 hours at 1 sample/s.
    const target = await knex('estimators').where({ key: 'position' }).orderBy('id').first('id');
    const day = new Date(now - 86_400_000);
    const dayStart = new Date(Math.floor(day.getTime() / 86_400_000) * 86_400_000);
    for (let d = 0; d < 3; d++) {
      const from = new Date(dayStart.getTime() + d * 86_400_000);
      const to = new Date(from.getTime() + 86_400_000);
      const name = `innovation_samples_p${from.toISOString().slice(0, 10).replace(/-/g, '')}`;
      await knex.raw(`create table if not exists ${name} partition of innovation_samples for values from ('${from.toISOString()}') to ('${to.toISOString()}')`);
    }
    await knex.raw(
      `insert into innovation_samples (estimator_id, t, seq, nis, cusum_up, cusum_down, nu, w)
       select ?, to_timestamp(? / 1000.0 + g), g, -2 * ln(random()), random() * 5, random() * 5,
              decode(lpad(to_hex((random() * 2147483647)::int), 8, '0') || lpad(to_hex((random() * 2147483647)::int), 8, '0'), 'hex'),
              decode(lpad(to_hex((random() * 2147483647)::int), 8, '0') || lpad(to_hex((random() * 2147483647)::int), 8, '0'), 'hex')
         from generate_series(1, ?) g`,
      [target.id, now - 86_400_000, SERIES_SAMPLES],
    );
    // The minute rollups the pipeline keeps beside the samples.
    await knex.raw(
      `insert into estimator_rollups_minute (estimator_id, minute, samples, nis_sum, nis_min, nis_max, exceedances, cusum_up_max, cusum_down_max, verdict)
       select estimator_id, date_trunc('minute', t), count(*), sum(nis), min(nis), max(nis), count(*) filter (where nis > 15.2), max(cusum_up), max(cusum_down), 'consistent'
         from innovation_samples group by 1, 2`,
    );
    await knex.raw('analyze');
    await knex.destroy();

    const service = await startService({ ...env, WHITECAP_LOG_LEVEL: 'warn', WHITECAP_SIGN_IN_PER_MINUTE: '1000' }, 60_000);
    stopService = () => service.stop();
    const session = await signIn(service.url, 'viewer@saltmarsh.example', 'saltmarsh-viewer');
    const get = async (p: string) => {
      const res = await fetch(`${service.url}/api${p}`, { headers: { authorization: `Bearer ${session.accessToken}` } });
      if (res.status !== 200) throw new Error(`${p} answered ${res.status}: ${await res.text()}`);
      await res.arrayBuffer();
    };
    const from = new Date(now - 86_400_000).toISOString();
    const to = new Date(now + 1000).toISOString();
    const results = [
      await time(`GET /api/fleet (first page of 50, ${ESTIMATORS.toLocaleString()} estimators, sorted by verdict)`, ROUNDS, () => get('/fleet')),
      await time(`GET /api/fleet?sort=nisRatio&limit=500 (500 rows)`, ROUNDS, () => get('/fleet?sort=nisRatio&limit=500')),
      await time(`GET /api/estimators/:id/series (24 h, ${SERIES_SAMPLES.toLocaleString()} samples → ≤ 2,000 points)`, ROUNDS, () =>
        get(`/estimators/${target.id}/series?from=${from}&to=${to}&points=2000`),
      ),
    ];
    const header = `${new Date().toISOString()} · Node ${process.version} · ${os.cpus().length} cores (${os.cpus()[0]?.model.trim()})`;
    const lines = [
      '# API benchmark (`npm run bench:api`)',
      '',
      header,
      '',
      `Service, PostgreSQL (fsync on) and this client share the machine; ${ROUNDS} timed requests each after 3 warm-up requests, one at a time.`,
      '',
      '| request | p50 ms | p95 ms | max ms | target p95 |',
      '| --- | ---: | ---: | ---: | --- |',
      ...results.map((r, i) => `| ${r.label} | ${r.p50.toFixed(1)} | ${r.p95.toFixed(1)} | ${r.max.toFixed(1)} | ${i < 2 ? '< 100 ms' : '< 200 ms'} |`),
      '',
    ];
    console.log(lines.join('\n'));
    const out = path.join(root, 'ingest/bench/results');
    fs.mkdirSync(out, { recursive: true });
    fs.writeFileSync(path.join(out, 'api-latest.md'), lines.join('\n'));
    fs.writeFileSync(path.join(out, 'api-latest.json'), JSON.stringify({ header, estimators: ESTIMATORS, seriesSamples: SERIES_SAMPLES, results }, null, 2));
  } finally {
    if (stopService) await stopService();
    pg.stop('fast');
    fs.rmSync(pgRoot, { recursive: true, force: true });
  }
}

main().catch((err) => {
  console.error(err);
  process.exit(1);
});
