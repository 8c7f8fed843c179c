// What the end-to-end benchmarks (bench:ingest, bench:soak) share: a throwaway PostgreSQL
// cluster (migrated and seeded), synthetic tractors provisioned with device credentials,
// the real service as a child process on free ports, and the clean-up that stops all of
// it and removes the cluster, also on Ctrl-C or an error. Plus small formatting helpers.
import { execFileSync, fork, spawn, type ChildProcess } from 'node:child_process';
import { randomBytes } from 'node:crypto';
import fs from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import type pg from 'pg';
import { LocalPostgres, freePort } from '../../scripts/lib/postgres.mjs';
import { SERVICE_NODE_FLAGS, requireFromProject } from '../../scripts/lib/project.mjs';
import type { SimulatedUnit } from '../../simulators/src/saltmarsh-fleet';
import { hashDeviceSecret } from '../src/broker/device-auth';
import { unitPartition } from '../src/broker/topics';
import type { AckedRanges, FromWorker, ToWorker, WorkerConfig, WorkerCounts } from './bench-fleet';
import { treeCpuSeconds } from './proc-sampler';

export const root = path.resolve(__dirname, '../..');

// ---------------------------------------------------------------- helpers

export const log = (msg: string) => console.log(`[bench] ${msg}`);
export const sleep = (ms: number) => new Promise((r) => setTimeout(r, ms));
export const round = (x: number | null | undefined, digits = 1): number | null =>
  x === null || x === undefined || !Number.isFinite(x) ? null : Number(x.toFixed(digits));
export const fmtInt = (x: number | null | undefined) => (x === null || x === undefined ? 'n/a' : Math.round(x).toLocaleString('en-US'));
export const fmtMs = (x: number | null | undefined) => (x === null || x === undefined ? 'n/a' : x >= 100 ? `${Math.round(x)} ms` : `${x.toFixed(1)} ms`);
export const MB = 1024 * 1024;
/** The rules a noise fault should trip (silence and lost samples say something about delivery instead). */
export const CHECK_RULES = new Set(['nis-window', 'cusum-drift', 'whiteness', 'bias', 'nees-window']);

/** The commit measured, and whether the service's folders differ from it. */
export function gitCommit(): string | null {
  try {
    const head = execFileSync('git', ['rev-parse', '--short', 'HEAD'], { cwd: root, encoding: 'utf8', stdio: ['ignore', 'pipe', 'ignore'] }).trim();
    const dirty = execFileSync('git', ['status', '--porcelain', '--', 'ingest/src', 'ingest/main.ts', 'shared/src', 'migrations'], {
      cwd: root,
      encoding: 'utf8',
      stdio: ['ignore', 'pipe', 'ignore'],
    }).trim();
    return dirty ? `${head} with local changes` : head;
  } catch {
    return null;
  }
}

export function runNode(args: string[], env: Record<string, string>): Promise<string> {
  return new Promise((resolve, reject) => {
    const child = spawn(process.execPath, args, { cwd: root, env: { ...process.env, ...env }, stdio: ['ignore', 'pipe', 'pipe'] });
    let out = '';
    child.stdout.on('data', (d) => (out += d));
    child.stderr.on('data', (d) => (out += d));
    child.on('error', reject);
    child.on('exit', (code) => (code === 0 ? resolve(out.trim()) : reject(new Error(`node ${args.join(' ')} exited ${code}:\n${out}`))));
  });
}

export function waitForExit(child: ChildProcess, timeoutMs: number): Promise<boolean> {
  if (child.exitCode !== null || child.signalCode !== null) return Promise.resolve(true);
  return new Promise((resolve) => {
    const t = setTimeout(() => resolve(false), timeoutMs);
    child.once('exit', () => {
      clearTimeout(t);
      resolve(true);
    });
  });
}

/** Prometheus text → value of a series (name with its labels as written), summed over matching lines. */
export function metric(text: string, name: string, labels?: string): number {
  let sum = 0;
  for (const line of text.split('\n')) {
    if (line.startsWith('#')) continue;
    const sp = line.lastIndexOf(' ');
    const series = line.slice(0, sp);
    const bare = series.replace(/\{.*\}$/, '');
    if (bare !== name) continue;
    if (labels && !series.includes(labels)) continue;
    sum += Number(line.slice(sp + 1));
  }
  return sum;
}

// ---------------------------------------------------------------- what gets cleaned up

/** Everything a benchmark started; cleanupNow() stops it. */
export const stack: { postgres: LocalPostgres | null; pgRoot: string | null; service: ChildProcess | null; workers: ChildProcess[] } = {
  postgres: null,
  pgRoot: null,
  service: null,
  workers: [],
};
let cleanedUp = false;

function alive(pid: number): boolean {
  try {
    process.kill(pid, 0);
    return true;
  } catch {
    return false;
  }
}

/** Stops everything we started, synchronously (also from 'exit' and signal handlers). */
export function cleanupNow(): void {
  if (cleanedUp) return;
  cleanedUp = true;
  for (const w of stack.workers) {
    if (w.exitCode === null && w.signalCode === null && w.pid) {
      try {
        process.kill(w.pid, 'SIGKILL');
      } catch {
        /* gone */
      }
    }
  }
  const service = stack.service;
  if (service && service.exitCode === null && service.signalCode === null && service.pid) {
    try {
      process.kill(service.pid, 'SIGKILL');
    } catch {
      /* gone */
    }
  }
  if (stack.postgres) {
    const cluster = stack.postgres;
    let postmaster: number | null = null;
    try {
      postmaster = Number(fs.readFileSync(path.join(cluster.dataDir, 'postmaster.pid'), 'utf8').split('\n')[0]) || null;
    } catch {
      /* not running */
    }
    try {
      cluster.stop('immediate');
    } catch (err) {
      console.error(`[bench] pg_ctl stop failed: ${(err as Error).message}`);
    }
    // Should pg_ctl not have done it: SIGQUIT is PostgreSQL's immediate shutdown.
    if (postmaster && alive(postmaster)) {
      try {
        process.kill(postmaster, 'SIGQUIT');
      } catch {
        /* gone */
      }
      const until = Date.now() + 5000;
      while (alive(postmaster) && Date.now() < until) Atomics.wait(new Int32Array(new SharedArrayBuffer(4)), 0, 0, 50);
    }
  }
  if (stack.pgRoot) fs.rmSync(stack.pgRoot, { recursive: true, force: true });
}

/** Ctrl-C, a termination signal or the process ending stops the service, the workers and PostgreSQL and removes the cluster. */
export function installCleanup(): void {
  for (const sig of ['SIGINT', 'SIGTERM', 'SIGHUP'] as const) {
    process.on(sig, () => {
      console.error(`\n[bench] ${sig}: stopping the service, the publishers and PostgreSQL, removing the cluster`);
      cleanupNow();
      process.exit(130);
    });
  }
  process.on('exit', cleanupNow);
}

// ---------------------------------------------------------------- PostgreSQL

/** The benchmarks' PostgreSQL settings: production durability, stated so the report says them. */
export function benchPostgresSettings(pgStatements: boolean, extra: Record<string, string> = {}): Record<string, string> {
  return {
    // durability as in production: these are PostgreSQL's defaults, stated so the report says them
    fsync: 'on',
    synchronous_commit: 'on',
    full_page_writes: 'on',
    wal_level: 'replica',
    // sizing (no effect on durability)
    shared_buffers: '256MB',
    max_wal_size: '2GB',
    checkpoint_timeout: '5min',
    max_connections: '100',
    ...(pgStatements ? { shared_preload_libraries: 'pg_stat_statements', 'pg_stat_statements.track': 'top' } : {}),
    ...extra,
  };
}

/**
 * A throwaway cluster on a free loopback port in a new temporary folder, migrated and
 * seeded with the demo data; registered for clean-up.
 */
export async function startBenchPostgres(settings: Record<string, string>): Promise<{ postgres: LocalPostgres; pgRoot: string; pgPort: number; dbUrl: string }> {
  const pgRoot = fs.mkdtempSync(path.join(os.tmpdir(), 'whitecap-bench-pg-'));
  stack.pgRoot = pgRoot;
  const pgPort = await freePort();
  const postgres = new LocalPostgres({ root: pgRoot, port: pgPort, database: 'whitecap', settings, log });
  stack.postgres = postgres;
  postgres.init();
  await postgres.start();
  await postgres.ensureDatabase(requireFromProject);
  const dbUrl = postgres.url;
  log(`throwaway PostgreSQL on 127.0.0.1:${pgPort} (${pgRoot})`);
  const dbEnv = { WHITECAP_DATABASE_URL: dbUrl };
  log(await runNode(['--import', 'tsx', 'ingest/cli/migrate.ts', 'latest'], dbEnv));
  log(await runNode(['--import', 'tsx', 'ingest/cli/seed.ts'], dbEnv));
  return { postgres, pgRoot, pgPort, dbUrl };
}

/** The postmaster's pid (from the cluster's postmaster.pid). */
export function postmasterPidOf(postgres: LocalPostgres): number {
  return Number(fs.readFileSync(path.join(postgres.dataDir, 'postmaster.pid'), 'utf8').split('\n')[0]);
}

/** Stops the cluster (fast shutdown) and removes its folder. */
export function stopBenchPostgres(): void {
  stack.postgres?.stop('fast');
  if (stack.pgRoot) fs.rmSync(stack.pgRoot, { recursive: true, force: true });
  stack.postgres = null;
  stack.pgRoot = null;
}

// ---------------------------------------------------------------- options

/** A numeric command-line option's value, at least `min`. */
export function numberOption(name: string, v: string | undefined, min: number): number {
  const n = Number(v);
  if (v === undefined || !Number.isFinite(n) || n < min) throw new Error(`${name} needs a number ≥ ${min}, got ${v}`);
  return n;
}

/** The --name of a results file: lower-case letters, digits and -. */
export function resultsName(v: string | undefined): string {
  if (!v || !/^[a-z0-9-]+$/.test(v)) throw new Error('--name needs lower-case letters, digits and -');
  return v;
}

// ---------------------------------------------------------------- the fleet

/**
 * The synthetic tractors as units of the demo's north yard, each with one position
 * estimator (design tractor-position revision 1) and a device credential.
 */
export async function provisionSyntheticTractors(
  db: pg.Pool,
  fleet: SimulatedUnit[],
  expectedIntervalMs: number,
  /** When the fleet is partitioned: each unit is given its partition, as provisioning does. */
  partitions?: number,
): Promise<void> {
  const began = performance.now();
  const site = (await db.query<{ id: number }>(`select id from sites where key = 'north-yard'`)).rows[0].id;
  const rev = (
    await db.query<{ id: number }>(
      `select r.id from design_revisions r join designs d on d.id = r.design_id where d.key = 'tractor-position' and r.revision = 1`,
    )
  ).rows[0].id;
  const client = await db.connect();
  try {
    await client.query('begin');
    for (let i = 0; i < fleet.length; i += 2000) {
      const part = fleet.slice(i, i + 2000);
      const units = await client.query<{ id: number; key: string }>(
        `insert into units (site_id, key, name, kind, partition)
         select $1, k, 'Synthetic ' || k, 'yard-tractor', p from unnest($2::text[], $3::int[]) as x(k, p) returning id, key`,
        [site, part.map((u) => u.key), part.map((u) => (partitions ? unitPartition(u.key, partitions) : 0))],
      );
      const ids = new Map(units.rows.map((r) => [r.key, r.id]));
      await client.query(
        `insert into estimators (unit_id, key, design_revision_id, measurement_dim, expected_interval_ms)
         select id, 'position', $1, 2, $2 from unnest($3::int[]) as id`,
        [rev, expectedIntervalMs, part.map((u) => ids.get(u.key))],
      );
      await client.query(
        `insert into device_credentials (unit_id, username, secret_hash)
         select * from unnest($1::int[], $2::text[], $3::text[])`,
        [part.map((u) => ids.get(u.key)), part.map((u) => u.key), part.map((u) => hashDeviceSecret(u.secret))],
      );
    }
    await client.query('commit');
  } finally {
    client.release();
  }
  log(`provisioned ${fmtInt(fleet.length)} units with an estimator (expected interval ${expectedIntervalMs} ms) and a device credential each in ${Math.round(performance.now() - began)} ms`);
}

/** How many of the acknowledged samples (by unit key and sequence number) are stored rows. */
export async function countStoredOfAcknowledged(db: pg.Pool, acked: AckedRanges[]): Promise<number> {
  const ranges = acked.flatMap((a) => a.ranges.map(([lo, hi]) => ({ unit: a.unitKey, lo, hi })));
  return Number(
    (
      await db.query<{ n: string }>(
        `with acked as (
           select e.id as estimator_id, generate_series(x.lo, x.hi) as seq
             from unnest($1::text[], $2::bigint[], $3::bigint[]) as x(unit_key, lo, hi)
             join units u on u.key = x.unit_key
             join estimators e on e.unit_id = u.id and e.key = 'position')
         select count(*) as n from acked join innovation_samples s using (estimator_id, seq)`,
        [ranges.map((r) => r.unit), ranges.map((r) => r.lo), ranges.map((r) => r.hi)],
      )
    ).rows[0].n,
  );
}

// ---------------------------------------------------------------- the service

export interface BenchService {
  child: ChildProcess;
  pid: number;
  baseUrl: string;
  httpPort: number;
  mqttPort: number;
  /** When /api/health first answered 200. */
  upAtMs: number;
  logStream: fs.WriteStream;
}

/**
 * The real service (node --import tsx ingest/main.ts) on free loopback ports, its output
 * in logFile; resolves once /api/health answers 200 (within 60 s). Registered for clean-up.
 */
export async function startBenchService(o: {
  dbUrl: string;
  /** Node flags after SERVICE_NODE_FLAGS. */
  nodeFlags: string[];
  serviceEnv: Record<string, string>;
  logFile: string;
  /** Called right after the spawn (e.g. to set its scheduling priority). */
  onSpawn?: (pid: number) => void;
}): Promise<BenchService> {
  const httpPort = await freePort();
  const mqttPort = await freePort();
  const logStream = fs.createWriteStream(o.logFile);
  const service = spawn(process.execPath, [...SERVICE_NODE_FLAGS, ...o.nodeFlags, '--import', 'tsx', 'ingest/main.ts'], {
    cwd: root,
    env: {
      ...process.env,
      WHITECAP_DATABASE_URL: o.dbUrl,
      WHITECAP_HTTP_HOST: '127.0.0.1',
      WHITECAP_HTTP_PORT: String(httpPort),
      WHITECAP_MQTT_HOST: '127.0.0.1',
      WHITECAP_MQTT_PORT: String(mqttPort),
      WHITECAP_LOG_LEVEL: 'warn',
      WHITECAP_JWT_SECRET: randomBytes(32).toString('base64url'),
      ...o.serviceEnv,
    },
    stdio: ['ignore', 'pipe', 'pipe'],
  });
  stack.service = service;
  service.stdout!.pipe(logStream, { end: false });
  service.stderr!.pipe(logStream, { end: false });
  const pid = service.pid!;
  o.onSpawn?.(pid);
  const baseUrl = `http://127.0.0.1:${httpPort}`;
  const deadline = Date.now() + 60_000;
  while (true) {
    if (service.exitCode !== null) throw new Error(`the service exited with ${service.exitCode}:\n${fs.readFileSync(o.logFile, 'utf8')}`);
    try {
      const res = await fetch(`${baseUrl}/api/health`);
      if (res.status === 200) break;
    } catch {
      /* not up yet */
    }
    if (Date.now() > deadline) throw new Error(`the service did not become healthy within 60 s:\n${fs.readFileSync(o.logFile, 'utf8')}`);
    await sleep(200);
  }
  return { child: service, pid, baseUrl, httpPort, mqttPort, upAtMs: Date.now(), logStream };
}

/** The service's log lines counted by level, message and error ("warn: … (error)"); a line that is not JSON counts by its first 120 characters. */
export function countLogMessages(lines: readonly string[]): Map<string, number> {
  const counts = new Map<string, number>();
  for (const line of lines) {
    let key = line.slice(0, 120);
    try {
      const j = JSON.parse(line) as { level?: number; msg?: string; err?: string | { message?: string } };
      const err = typeof j.err === 'string' ? j.err : j.err?.message;
      key = `${j.level === 40 ? 'warn' : j.level === 50 ? 'error' : j.level === 60 ? 'fatal' : `level ${j.level}`}: ${j.msg}${err ? ` (${err.slice(0, 80)})` : ''}`;
    } catch {
      /* not JSON */
    }
    counts.set(key, (counts.get(key) ?? 0) + 1);
  }
  return counts;
}

/** The publisher processes' counts added up. */
export function sumWorkerCounts(counts: readonly WorkerCounts[]): WorkerCounts {
  const total: WorkerCounts = { publishedMessages: 0, ackedMessages: 0, publishedSamples: 0, ackedSamples: 0, inFlightMessages: 0, skippedSamples: 0, windowFullTicks: 0, disconnects: 0, errors: 0 };
  for (const c of counts) for (const k of Object.keys(total) as (keyof WorkerCounts)[]) total[k] += c[k];
  return total;
}

export interface Publishers {
  children: ChildProcess[];
  /** Each publisher's latest counts (null before its first report). */
  latest: (WorkerCounts | null)[];
  /** The publishers' final reports, in the order they came. */
  done: Extract<FromWorker, { type: 'done' }>[];
  /** Settles when every publisher has connected its units; rejects on the first failure. */
  connected: Promise<void>;
  /** Settles when every publisher has reported and ended (or exited). */
  finished: Promise<void>;
  /** The first failure (an error message, or an exit before the final report). */
  failure(): Error | null;
  /** The publishers' CPU seconds from /proc; a publisher that has exited keeps its last value. */
  cpuSeconds(): number;
}

/**
 * Forks one publisher-worker.ts per config, sends each its config and registers them for
 * clean-up. `onMessage` sees every message too (progress, faults) for the benchmark's own figures.
 */
export function forkPublishers(configs: WorkerConfig[], onMessage: (index: number, m: FromWorker) => void = () => undefined): Publishers {
  const children: ChildProcess[] = [];
  const latest: (WorkerCounts | null)[] = [];
  const done: Extract<FromWorker, { type: 'done' }>[] = [];
  const connectedWaiters: Promise<void>[] = [];
  const finishedWaiters: Promise<void>[] = [];
  const lastCpu = configs.map(() => 0);
  let failure: Error | null = null;
  configs.forEach((config, w) => {
    const child = fork(path.join(__dirname, 'publisher-worker.ts'), [], { cwd: root, execArgv: ['--import', 'tsx'], stdio: ['ignore', 'inherit', 'inherit', 'ipc'] });
    children.push(child);
    stack.workers.push(child);
    latest.push(null);
    let onConnected!: () => void;
    let onFail!: (err: Error) => void;
    let onDone!: () => void;
    connectedWaiters.push(
      new Promise<void>((resolve, reject) => {
        onConnected = resolve;
        onFail = (err) => {
          failure ??= err;
          reject(err);
        };
      }),
    );
    // A failure after the connection would be an unhandled rejection of the settled promise otherwise.
    connectedWaiters[w].catch(() => undefined);
    finishedWaiters.push(new Promise<void>((resolve) => (onDone = resolve)));
    let reported = false;
    child.on('message', (m: FromWorker) => {
      if (m.type === 'connected') onConnected();
      else if (m.type === 'progress') latest[w] = m.counts;
      else if (m.type === 'done') {
        reported = true;
        latest[w] = m.counts;
        done.push(m);
        onDone();
      } else if (m.type === 'error') onFail(new Error(`publisher ${w + 1}: ${m.message}`));
      onMessage(w, m);
    });
    child.on('exit', (code) => {
      if (!reported) onFail(new Error(`publisher ${w + 1} exited with ${code} before its report`));
      onDone();
    });
    child.send({ type: 'config', config } satisfies ToWorker);
  });
  return {
    children,
    latest,
    done,
    connected: Promise.all(connectedWaiters).then(() => undefined),
    finished: Promise.all(finishedWaiters).then(() => undefined),
    failure: () => failure,
    cpuSeconds: () =>
      children.reduce((a, c, i) => {
        const v = c.pid ? treeCpuSeconds(c.pid) : null;
        if (v !== null) lastCpu[i] = v;
        return a + lastCpu[i];
      }, 0),
  };
}
