/**
 * npm run bench:workbench — the designer's workbench against its targets:
 * - a retune study of a 4-state, 2-measurement design (the demo's tractor-position,
 *   revision 2) over 100,000 field samples completes in under 2 s (POST /api/studies,
 *   end to end: read, decode, estimate, design, margins, save);
 * - the residual export streams 1,000,000 samples at no less than 200,000 rows/s, with
 *   the service's memory flat while it does.
 * A throwaway PostgreSQL cluster (fsync on), the real service as a child process, and
 * samples from the simulator's Kalman filters written straight into the database.
 * Prints the figures with the date and the core count; keeps them in
 * ingest/bench/results/workbench-latest.{json,md}.
 *
 *   npm run bench:workbench [-- --rows 1000000 --study-samples 100000]
 */
import { spawn, type ChildProcess } from 'node:child_process';
import fs from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import pg from 'pg';
import { LocalPostgres, freePort } from '../../scripts/lib/postgres.mjs';
import { SERVICE_NODE_FLAGS, requireFromProject } from '../../scripts/lib/project.mjs';
import { PlantFilter } from '../../simulators/src/plant-filter';
import { plantDesign } from '../../simulators/src/plant-models';
import { rssBytes } from './proc-sampler';

const root = path.resolve(__dirname, '../..');
const arg = (name: string, fallback: number) => {
  const i = process.argv.indexOf(name);
  return i >= 0 ? Number(process.argv[i + 1]) : fallback;
};
const ROWS = arg('--rows', 1_000_000);
const STUDY_SAMPLES = arg('--study-samples', 100_000);
const COHORT = ['tractor-33', 'tractor-34', 'tractor-35', 'tractor-36', 'tractor-37'];
const log = (m: string) => console.log(`[bench] ${m}`);

function runNode(args: string[], env: Record<string, string>): Promise<string> {
  return new Promise((resolve, reject) => {
    const c = spawn(process.execPath, args, { cwd: root, env: { ...process.env, ...env }, stdio: ['ignore', 'pipe', 'pipe'] });
    let out = '';
    c.stdout.on('data', (d) => (out += d));
    c.stderr.on('data', (d) => (out += d));
    c.on('exit', (code) => (code === 0 ? resolve(out.trim()) : reject(new Error(`${args.join(' ')} exited ${code}:\n${out}`))));
  });
}

/** Writes `count` samples of one estimator from a Kalman filter on the revision-2 design (plant on revision 1's noise). */
async function writeSamples(db: pg.Pool, estimatorId: number, count: number, seed: number, endMs: number): Promise<void> {
  const filter = new PlantFilter({ design: plantDesign('tractor-position', 2), seed, startTime: endMs - count * 1000 });
  const BATCH = 20_000;
  for (let done = 0; done < count; done += BATCH) {
    const n = Math.min(BATCH, count - done);
    const t: number[] = [];
    const seq: number[] = [];
    const nis: number[] = [];
    const nu: Buffer[] = [];
    for (let i = 0; i < n; i++) {
      const s = filter.next();
      const [a, b] = s.nu;
      const [[s11, s12], [, s22]] = s.S;
      const det = s11 * s22 - s12 * s12;
      t.push(s.t / 1000);
      seq.push(s.seq);
      nis.push((s22 * a * a - 2 * s12 * a * b + s11 * b * b) / det);
      const buf = Buffer.alloc(8);
      buf.writeFloatLE(a, 0);
      buf.writeFloatLE(b, 4);
      nu.push(buf);
    }
    await db.query(
      `insert into innovation_samples (estimator_id, t, seq, nis, cusum_up, cusum_down, nu, w)
       select $1, to_timestamp(t), s, n, 0, 0, v, v from unnest($2::float8[], $3::int[], $4::real[], $5::bytea[]) as u(t, s, n, v)`,
      [estimatorId, t, seq, nis, nu],
    );
  }
}

async function main(): Promise<void> {
  const started = new Date();
  const pgRoot = fs.mkdtempSync(path.join(os.tmpdir(), 'whitecap-bench-wb-'));
  const cluster = new LocalPostgres({ root: pgRoot, port: await freePort(), database: 'whitecap', settings: { fsync: 'on', synchronous_commit: 'on', shared_buffers: '256MB' }, log: () => undefined });
  let service: ChildProcess | null = null;
  try {
    cluster.init();
    await cluster.start();
    await cluster.ensureDatabase(requireFromProject);
    const env = { WHITECAP_DATABASE_URL: cluster.url };
    await runNode(['--import', 'tsx', 'ingest/cli/migrate.ts', 'latest'], env);
    await runNode(['--import', 'tsx', 'ingest/cli/seed.ts'], env);
    const db = new pg.Pool({ connectionString: cluster.url, max: 2 });
    const ids = new Map<string, number>(
      (
        await db.query(`select u.key, e.id from estimators e join units u on u.id = e.unit_id where e.key = 'position' and u.key = any($1)`, [COHORT])
      ).rows.map((r) => [r.key as string, Number(r.id)]),
    );
    const endMs = Date.now() - 60_000;
    // Partitions for the days the samples span.
    for (let day = Math.floor((endMs - (ROWS + 86_400) * 1000) / 86_400_000); day <= Math.floor(endMs / 86_400_000) + 1; day++) {
      const from = new Date(day * 86_400_000).toISOString();
      const to = new Date((day + 1) * 86_400_000).toISOString();
      const name = `innovation_samples_p${from.slice(0, 10).replace(/-/g, '')}`;
      await db.query(`create table if not exists ${name} partition of innovation_samples for values from ('${from}') to ('${to}')`);
    }
    const exportId = ids.get(COHORT[0])!;
    const perStudyEstimator = Math.ceil(STUDY_SAMPLES / (COHORT.length - 1));
    const t0 = performance.now();
    await writeSamples(db, exportId, ROWS, 1, endMs);
    for (let i = 1; i < COHORT.length; i++) await writeSamples(db, ids.get(COHORT[i])!, perStudyEstimator, i + 1, endMs);
    await db.query('analyze innovation_samples');
    log(`wrote ${ROWS.toLocaleString('en')} + ${(perStudyEstimator * (COHORT.length - 1)).toLocaleString('en')} samples in ${((performance.now() - t0) / 1000).toFixed(1)} s`);

    const httpPort = await freePort();
    service = spawn(process.execPath, [...SERVICE_NODE_FLAGS, '--import', 'tsx', 'ingest/main.ts'], {
      cwd: root,
      env: { ...process.env, ...env, WHITECAP_HTTP_PORT: String(httpPort), WHITECAP_MQTT_PORT: String(await freePort()), WHITECAP_LOG_LEVEL: 'warn', WHITECAP_SMTP_PORT: String(await freePort()) },
      stdio: 'ignore',
    });
    const url = `http://127.0.0.1:${httpPort}`;
    for (let i = 0; ; i++) {
      try {
        if ((await fetch(`${url}/api/health`)).status < 600) break;
      } catch {
        /* not yet */
      }
      if (i > 300) throw new Error('the service did not start');
      await new Promise((r) => setTimeout(r, 100));
    }
    const signIn = (await (await fetch(`${url}/api/auth/sign-in`, { method: 'POST', headers: { 'content-type': 'application/json' }, body: JSON.stringify({ email: 'designer@saltmarsh.example', password: 'saltmarsh-designer' }) })).json()) as { accessToken: string };
    const auth = { authorization: `Bearer ${signIn.accessToken}` };

    // The study: the four other tractors, ~100,000 samples in all. First run warms the JIT; three timed.
    const from = new Date(endMs - (perStudyEstimator + 10) * 1000).toISOString();
    const to = new Date(endMs + 1000).toISOString();
    const studyIds = COHORT.slice(1).map((k) => ids.get(k)!);
    const studyTimes: number[] = [];
    let studySamples = 0;
    for (let run = 0; run < 4; run++) {
      const s = performance.now();
      const res = await fetch(`${url}/api/studies`, { method: 'POST', headers: { ...auth, 'content-type': 'application/json' }, body: JSON.stringify({ estimatorIds: studyIds, from, to, title: `bench ${run}` }) });
      const body = (await res.json()) as { samples: number };
      if (res.status !== 201) throw new Error(`study answered ${res.status}: ${JSON.stringify(body)}`);
      if (run > 0) studyTimes.push(performance.now() - s);
      studySamples = body.samples;
    }
    studyTimes.sort((a, b) => a - b);
    log(`study over ${studySamples.toLocaleString('en')} samples: ${studyTimes.map((t) => `${Math.round(t)} ms`).join(', ')}`);

    // The export: 1,000,000 rows of one estimator, CSV, read as fast as the client can; RSS sampled meanwhile.
    const exportFrom = new Date(endMs - (ROWS + 10) * 1000).toISOString();
    const rss: number[] = [];
    const sampler = setInterval(() => {
      const b = rssBytes(service!.pid!);
      if (b !== null) rss.push(b / 1048576);
    }, 250);
    const e0 = performance.now();
    const res = await fetch(`${url}/api/residuals?estimatorIds=${exportId}&from=${exportFrom}&to=${to}&format=csv`, { headers: auth });
    if (res.status !== 200 || !res.body) throw new Error(`export answered ${res.status}`);
    let bytes = 0;
    let newlines = 0;
    const reader = res.body.getReader();
    for (;;) {
      const { done, value } = await reader.read();
      if (done) break;
      bytes += value.length;
      for (let i = 0; i < value.length; i++) if (value[i] === 10) newlines++;
    }
    const exportMs = performance.now() - e0;
    clearInterval(sampler);
    const rows = newlines - 1; // the header line
    const rowsPerS = rows / (exportMs / 1000);
    log(`export: ${rows.toLocaleString('en')} rows, ${(bytes / 1048576).toFixed(1)} MB in ${(exportMs / 1000).toFixed(2)} s = ${Math.round(rowsPerS).toLocaleString('en')} rows/s; service RSS ${Math.round(Math.min(...rss))}–${Math.round(Math.max(...rss))} MB`);
    await db.end();

    const result = {
      date: started.toISOString(),
      machine: { cores: os.cpus().length, cpuModel: os.cpus()[0]?.model ?? 'unknown', memoryGB: Math.round(os.totalmem() / 1e8) / 10, node: process.version },
      study: { samples: studySamples, estimators: studyIds.length, design: 'tractor-position r2 (4 states, 2 measurements)', runsMs: studyTimes.map(Math.round), medianMs: Math.round(studyTimes[1]), target: '< 2000 ms', met: studyTimes[studyTimes.length - 1] < 2000 },
      export: { rows, bytes, seconds: Math.round(exportMs) / 1000, rowsPerS: Math.round(rowsPerS), rssMB: { min: Math.round(Math.min(...rss)), max: Math.round(Math.max(...rss)), samples: rss.length }, target: '≥ 200,000 rows/s, flat memory', met: rowsPerS >= 200_000 && rows === ROWS },
    };
    const md = [
      '# Workbench benchmark (`npm run bench:workbench`)',
      '',
      `${result.date} · Node ${result.machine.node} · ${result.machine.cores} cores (${result.machine.cpuModel}) · PostgreSQL with fsync on; service, database and client share the machine.`,
      '',
      '| figure | value | target |',
      '| --- | --- | --- |',
      `| retune study, ${result.study.design}, POST /api/studies end to end | ${result.study.samples.toLocaleString('en')} samples from ${result.study.estimators} estimators: ${result.study.runsMs.join(', ')} ms (median ${result.study.medianMs} ms; after one warm-up run) | < 2 s: ${result.study.met ? 'met' : '**missed**'} |`,
      `| residual export, CSV, one estimator | ${rows.toLocaleString('en')} rows (${(bytes / 1048576).toFixed(1)} MB) in ${result.export.seconds} s = **${result.export.rowsPerS.toLocaleString('en')} rows/s** | ≥ 200,000 rows/s: ${result.export.met ? 'met' : '**missed**'} |`,
      `| service memory during the export (RSS, every 250 ms) | ${result.export.rssMB.min}–${result.export.rssMB.max} MB over ${rss.length} readings | flat |`,
      '',
    ].join('\n');
    console.log(`\n${md}`);
    const dir = path.join(root, 'ingest/bench/results');
    fs.writeFileSync(path.join(dir, 'workbench-latest.json'), JSON.stringify(result, null, 2) + '\n');
    fs.writeFileSync(path.join(dir, 'workbench-latest.md'), md);
    log('wrote ingest/bench/results/workbench-latest.{json,md}');
  } finally {
    service?.kill('SIGTERM');
    if (service) await new Promise((r) => service!.once('exit', r));
    try {
      cluster.stop('fast');
    } catch {
      /* already down */
    }
    fs.rmSync(pgRoot, { recursive: true, force: true });
  }
}

main().catch((err) => {
  console.error(err);
  process.exit(1);
});
