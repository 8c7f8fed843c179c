/**
 * The ingest benchmark, end to end: simulated units → MQTT → the service's checks →
 * PostgreSQL commit → PUBACK.
 *
 *   npm run bench:ingest                       2,000 tractors × 10 samples/s for 120 s
 *   npm run bench:ingest -- --quick            the same for 20 s
 *   npm run bench:ingest -- --units 10000 --rate 20000 --batch 2
 *   npm run bench:ingest -- --help
 *
 * On its own, from a clone with node_modules: a throwaway PostgreSQL cluster on a free
 * loopback port (normal durability: fsync, synchronous_commit and full_page_writes on),
 * migrated and seeded, N synthetic tractors provisioned with their own device
 * credentials; the real service (node --import tsx ingest/main.ts) as a child process on
 * free ports; publisher child processes (real Kalman filters, one MQTT connection per
 * unit, QoS 1). A noise ×3 fault starts on a few estimators at a known wall time. It
 * measures the sustained committed rate, publish-to-PUBACK latency (PUBACK follows the
 * commit), fault-to-alert latency, the CPU and memory of the service, PostgreSQL and the
 * publishers, and bytes on disk per stored sample; prints them and writes
 * ingest/bench/results/ingest-latest.{json,md}. Everything it started is stopped and the
 * cluster removed, also on Ctrl-C or an error.
 *
 * This machine's cores are shared by the service, PostgreSQL and the publishers: the
 * report gives each one's CPU so a missed target can be put where it belongs.
 */
import { fork } from 'node:child_process';
import { randomBytes } from 'node:crypto';
import fs from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import pg from 'pg';
import { syntheticTractors } from '../../simulators/src/saltmarsh-fleet';
import { benchSecretFor, type FromWorker, type ToWorker, type WorkerConfig, type WorkerCounts } from './bench-fleet';
import {
  CHECK_RULES,
  MB,
  benchPostgresSettings,
  cleanupNow,
  countLogMessages,
  countStoredOfAcknowledged,
  fmtInt,
  sumWorkerCounts,
  fmtMs,
  gitCommit,
  installCleanup,
  log,
  metric,
  postmasterPidOf,
  provisionSyntheticTractors,
  root,
  round,
  sleep,
  stack,
  startBenchPostgres,
  startBenchService,
  stopBenchPostgres,
  waitForExit,
  numberOption as num,
  resultsName,
} from './bench-stack';
import { summarizeProfile, type ProfileSummary } from './cpuprofile-summary';
import { LatencyHistogram } from './latency-histogram';
import { childCpuByKind, cpuSplit, machineCpuSeconds, postgresKind, rssBytes, treeCpuSeconds } from './proc-sampler';

const resultsDir = path.join(__dirname, 'results');

// ---------------------------------------------------------------- options

interface Options {
  rate: number;
  units: number;
  batch: number;
  durationS: number;
  warmupS: number;
  rampS: number | null;
  publishers: number;
  faultUnits: number;
  faultFactor: number;
  faultAtS: number | null;
  reference: boolean;
  profile: boolean;
  pgStatements: boolean;
  maxInFlightPerUnit: number;
  serviceEnv: Record<string, string>;
  nodeFlags: string[];
  pgSettings: Record<string, string>;
  write: boolean;
  quick: boolean;
  waitQuietS: number;
  quietPct: number;
  nice: number;
  name: string;
}

const HELP = `npm run bench:ingest -- [options]

  --rate N            samples per second, the whole fleet (default 20000)
  --units N           synthetic tractors, one estimator and one MQTT connection each (default 2000)
  --batch N           samples per MQTT message, 1 = the single form (default 1)
  --duration S        seconds of publishing (default 120)
  --quick             20 s of publishing, to try things
  --warmup S          seconds left out of the sustained-rate figure (default 10; 5 with --quick)
  --ramp S            the rate climbs from a tenth to the full rate over S s (default: the warm-up;
                      0 = every unit at the full rate from the first second, a cold start)
  --publishers N      publisher processes (default 2)
  --fault-units N     estimators whose measurement noise grows (default 5)
  --fault-factor F    noise standard deviation ×F (default 3)
  --fault-at S        seconds into the run the fault starts (default 30 % of the duration)
  --reference         publish e and P with each sample (NEES); off by default (field units do not have them)
  --profile           run the service with --cpu-prof and summarise where its CPU went
  --no-pg-statements  do not load pg_stat_statements (on by default: where PostgreSQL's time goes)
  --max-in-flight N   messages a unit may have awaiting PUBACK before it holds back (default 1000)
  --node-flag FLAG    an extra Node.js flag for the service (repeatable), e.g. --trace-gc; its
                      output is kept in .output/bench/ingest-service.log
  --service-env K=V   an extra environment variable for the service (repeatable), e.g. WHITECAP_MAX_BATCH_SAMPLES=10000
  --pg K=V            an extra PostgreSQL setting (repeatable)
  --wait-quiet S      on a shared machine: wait up to S s for other processes to use less than
                      --quiet-below % CPU (default 20; 100 % = one core) before publishing
  --nice N            run PostgreSQL, the service and the publishers at this scheduling priority
                      (-20 … 19; below 0 needs root): on a machine other work shares, a negative
                      value measures what the product does when it gets the CPU (default 0)
  --name NAME         write ingest/bench/results/ingest-NAME.{json,md} (default: latest)
  --no-write          do not write ingest/bench/results/ingest-latest.*
`;

function parseOptions(argv: string[]): Options {
  const o: Options = {
    rate: 20_000,
    units: 2000,
    batch: 1,
    durationS: 120,
    warmupS: 10,
    rampS: null,
    publishers: 2,
    faultUnits: 5,
    faultFactor: 3,
    faultAtS: null,
    reference: false,
    profile: false,
    pgStatements: true,
    maxInFlightPerUnit: 1000,
    serviceEnv: {},
    nodeFlags: [],
    pgSettings: {},
    write: true,
    quick: false,
    waitQuietS: 0,
    quietPct: 20,
    nice: 0,
    name: 'latest',
  };
  let warmupGiven = false;
  let durationGiven = false;
  const kv = (name: string, v: string | undefined): [string, string] => {
    const m = v ? /^([A-Za-z_][A-Za-z0-9_.]*)=(.*)$/.exec(v) : null;
    if (!m) throw new Error(`${name} needs KEY=VALUE, got ${v}`);
    return [m[1], m[2]];
  };
  for (let i = 0; i < argv.length; i++) {
    const a = argv[i];
    const next = () => argv[++i];
    switch (a) {
      case '--help':
      case '-h':
        console.log(HELP);
        process.exit(0);
        break;
      case '--rate':
        o.rate = num(a, next(), 1);
        break;
      case '--units':
        o.units = Math.round(num(a, next(), 1));
        break;
      case '--batch':
        o.batch = Math.round(num(a, next(), 1));
        if (o.batch > 1000) throw new Error('--batch is at most 1000 (the payload limit)');
        break;
      case '--duration':
        o.durationS = num(a, next(), 5);
        durationGiven = true;
        break;
      case '--quick':
        o.quick = true;
        break;
      case '--warmup':
        o.warmupS = num(a, next(), 0);
        warmupGiven = true;
        break;
      case '--ramp':
        o.rampS = num(a, next(), 0);
        break;
      case '--publishers':
        o.publishers = Math.round(num(a, next(), 1));
        break;
      case '--fault-units':
        o.faultUnits = Math.round(num(a, next(), 0));
        break;
      case '--fault-factor':
        o.faultFactor = num(a, next(), 0);
        break;
      case '--fault-at':
        o.faultAtS = num(a, next(), 0);
        break;
      case '--reference':
        o.reference = true;
        break;
      case '--profile':
        o.profile = true;
        break;
      case '--no-pg-statements':
        o.pgStatements = false;
        break;
      case '--max-in-flight':
        o.maxInFlightPerUnit = Math.round(num(a, next(), 1));
        break;
      case '--node-flag':
        o.nodeFlags.push(next());
        break;
      case '--service-env': {
        const [k, v] = kv(a, next());
        o.serviceEnv[k] = v;
        break;
      }
      case '--pg': {
        const [k, v] = kv(a, next());
        o.pgSettings[k] = v;
        break;
      }
      case '--wait-quiet':
        o.waitQuietS = num(a, next(), 0);
        break;
      case '--quiet-below':
        o.quietPct = num(a, next(), 0);
        break;
      case '--nice': {
        const v = Number(next());
        if (!Number.isInteger(v) || v < -20 || v > 19) throw new Error('--nice needs a whole number from -20 to 19');
        o.nice = v;
        break;
      }
      case '--name':
        o.name = resultsName(next());
        break;
      case '--no-write':
        o.write = false;
        break;
      default:
        throw new Error(`unknown option ${a} (see --help)`);
    }
  }
  if (o.quick) {
    if (!durationGiven) o.durationS = 20;
    if (!warmupGiven) o.warmupS = 5;
  }
  if (o.warmupS >= o.durationS) throw new Error('--warmup must be shorter than --duration');
  if (o.rampS === null) o.rampS = o.warmupS;
  o.publishers = Math.min(o.publishers, o.units);
  o.faultUnits = Math.min(o.faultUnits, o.units);
  return o;
}

// ---------------------------------------------------------------- what gets cleaned up

installCleanup();
const workers = stack.workers;

// ---------------------------------------------------------------- the run

interface ServiceProbe {
  tS: number;
  /** Samples waiting in the service's write queue. */
  writeQueue: number;
  /** The service's event-loop delay over the last interval (prom-client's monitorEventLoopDelay). */
  loopDelayP99Ms: number;
  loopDelayMaxMs: number;
}

interface Sample {
  tS: number;
  ackedSamples: number;
  publishedSamples: number;
  inFlight: number;
  serviceCpuPct: number | null;
  postgresCpuPct: number | null;
  publishersCpuPct: number | null;
  machineBusyPct: number | null;
  /** Machine busy minus the service, PostgreSQL and the publishers: other work on the machine, kernel threads, this benchmark. */
  otherPct: number | null;
  /** PUBACK latency of the messages acknowledged in about the last second (worst publisher). */
  ackP99Ms: number | null;
  ackMaxMs: number | null;
  serviceRssMB: number | null;
}

async function main(): Promise<void> {
  const o = parseOptions(process.argv.slice(2));
  const perEstimatorRate = o.rate / o.units;
  const faultAtS = o.faultAtS ?? Math.max(o.warmupS, Math.round(o.durationS * 0.3));
  const cores = os.cpus().length;
  const startedAt = new Date();
  log(`${startedAt.toISOString()}  node ${process.version}  ${cores} cores (${os.cpus()[0]?.model ?? '?'})  ${Math.round(os.totalmem() / MB / 1024)} GB`);
  log(
    `offered ${fmtInt(o.rate)} samples/s: ${fmtInt(o.units)} units × ${round(perEstimatorRate, 3)} samples/s, ` +
      `${o.batch} sample(s) per message, ${o.durationS} s (warm-up ${o.warmupS} s, ramp ${o.rampS} s), ${o.publishers} publisher processes`,
  );

  // -- PostgreSQL
  const pgSettings = benchPostgresSettings(o.pgStatements, o.pgSettings);
  const { postgres, pgRoot, dbUrl } = await startBenchPostgres(pgSettings);

  const setNice = (pid: number | undefined) => {
    if (o.nice === 0 || !pid) return;
    try {
      os.setPriority(pid, o.nice);
    } catch (err) {
      log(`could not set priority ${o.nice} on pid ${pid}: ${(err as Error).message}`);
    }
  };
  // Backends fork from the postmaster and inherit its priority.
  setNice(postmasterPidOf(postgres));
  setNice(process.pid);
  const db = new pg.Pool({ connectionString: dbUrl, max: 2 });
  const currentPostmasterPid = () => postmasterPidOf(postgres);
  if (o.pgStatements) await db.query('create extension if not exists pg_stat_statements');
  const pgVersion = (await db.query<{ server_version: string }>('show server_version')).rows[0].server_version;

  // -- provision the synthetic fleet
  const runKey = randomBytes(24).toString('base64url');
  const fleet = syntheticTractors(o.units, benchSecretFor(runKey));
  await provisionSyntheticTractors(db, fleet, Math.max(1, Math.round(1000 / perEstimatorRate)));

  // -- the service
  const profileDir = path.join(pgRoot, 'profile');
  const serviceLog = path.join(pgRoot, 'service.log');
  const started = await startBenchService({
    dbUrl,
    nodeFlags: [...o.nodeFlags, ...(o.profile ? ['--cpu-prof', `--cpu-prof-dir=${profileDir}`] : [])],
    serviceEnv: o.serviceEnv,
    logFile: serviceLog,
    onSpawn: setNice,
  });
  const { child: service, pid: servicePid, baseUrl, httpPort, mqttPort, logStream, upAtMs: serviceUpAtMs } = started;
  log(`service pid ${servicePid}: HTTP 127.0.0.1:${httpPort}, MQTT 127.0.0.1:${mqttPort}${o.profile ? ' (CPU profile on)' : ''}`);
  const metricsText = async () => (await fetch(`${baseUrl}/metrics`)).text();

  // -- publishers
  const faultUnits = Array.from({ length: o.faultUnits }, (_, k) => Math.floor(((k + 0.5) * o.units) / o.faultUnits));
  const latest: (WorkerCounts | null)[] = [];
  const publisherSystemCpu: number[] = [];
  const recentLatency: { p99: number | null; max: number | null }[] = [];
  const faultStarts = new Map<number, { unitKey: string; seq: number; tMs: number }>();
  const done: Extract<FromWorker, { type: 'done' }>[] = [];
  const connectedWaiters: Promise<void>[] = [];
  const doneWaiters: Promise<void>[] = [];
  const per = Math.ceil(o.units / o.publishers);
  for (let w = 0; w < o.publishers; w++) {
    const child = fork(path.join(__dirname, 'publisher-worker.ts'), [], {
      cwd: root,
      execArgv: ['--import', 'tsx'],
      stdio: ['ignore', 'inherit', 'inherit', 'ipc'],
    });
    workers.push(child);
    setNice(child.pid);
    latest.push(null);
    publisherSystemCpu.push(0);
    recentLatency.push({ p99: null, max: null });
    let onConnected!: () => void;
    let onDone!: () => void;
    let onFail!: (err: Error) => void;
    connectedWaiters.push(
      new Promise<void>((resolve, reject) => {
        onConnected = resolve;
        onFail = reject;
      }),
    );
    doneWaiters.push(new Promise<void>((resolve) => (onDone = resolve)));
    child.on('message', (m: FromWorker) => {
      if (m.type === 'connected') {
        log(`publisher ${w + 1} (pid ${child.pid}): ${fmtInt(m.units)} units connected in ${Math.round(m.ms)} ms`);
        onConnected();
      } else if (m.type === 'progress') {
        latest[w] = m.counts;
        publisherSystemCpu[w] = m.systemCpuSeconds;
        recentLatency[w] = { p99: m.recentP99Ms, max: m.recentMaxMs };
      } else if (m.type === 'fault') {
        faultStarts.set(m.unitIndex, { unitKey: m.unitKey, seq: m.seq, tMs: m.tMs });
      } else if (m.type === 'done') {
        latest[w] = m.counts;
        done.push(m);
        onDone();
      } else if (m.type === 'error') {
        onFail(new Error(`publisher ${w + 1}: ${m.message}`));
      }
    });
    child.on('exit', (code) => {
      onFail(new Error(`publisher ${w + 1} exited with ${code}`));
      onDone();
    });
    const config: WorkerConfig = {
      url: `mqtt://127.0.0.1:${mqttPort}`,
      runKey,
      totalUnits: o.units,
      from: w * per,
      to: Math.min(o.units, (w + 1) * per),
      rate: perEstimatorRate,
      rampS: o.rampS!,
      batch: o.batch,
      reference: o.reference,
      faultUnits,
      faultFactor: o.faultFactor,
      seed: 20261202,
      maxInFlightPerUnit: o.maxInFlightPerUnit,
      connectConcurrency: 50,
    };
    child.send({ type: 'config', config } satisfies ToWorker);
  }
  await Promise.all(connectedWaiters);
  // The publishers' CPU, from /proc (each with its tsx/esbuild helper); the last value once one has exited.
  const lastPublisherCpu = workers.map(() => 0);
  const publishersCpuNow = () =>
    workers.reduce((a, w, i) => {
      const v = w.pid ? treeCpuSeconds(w.pid) : null;
      if (v !== null) lastPublisherCpu[i] = v;
      return a + lastPublisherCpu[i];
    }, 0);

  // -- baselines
  await sleep(1000); // let the connection storm settle
  // CPU used by processes that are not ours (other work on a shared machine) over a few seconds.
  const otherLoadPct = async (ms: number): Promise<number> => {
    const pgPid = currentPostmasterPid();
    const a = { machine: machineCpuSeconds(), ours: (treeCpuSeconds(servicePid) ?? 0) + (treeCpuSeconds(pgPid) ?? 0) + publishersCpuNow(), self: process.cpuUsage() };
    await sleep(ms);
    const self = process.cpuUsage(a.self);
    const b = { machine: machineCpuSeconds(), ours: (treeCpuSeconds(servicePid) ?? 0) + (treeCpuSeconds(pgPid) ?? 0) + publishersCpuNow() };
    const busy = b.machine.busy - a.machine.busy - (b.ours - a.ours) - (self.user + self.system) / 1e6;
    return (busy / ((b.machine.total - a.machine.total) / cores)) * 100;
  };
  let backgroundPct = round(await otherLoadPct(2000))!;
  if (o.waitQuietS > 0 && backgroundPct > o.quietPct) {
    log(`other load on the machine: ${backgroundPct} %; waiting up to ${o.waitQuietS} s for it to fall below ${o.quietPct} % (--wait-quiet)`);
    const until = Date.now() + o.waitQuietS * 1000;
    while (backgroundPct > o.quietPct && Date.now() < until) backgroundPct = round(await otherLoadPct(3000))!;
  }
  log(`other load on the machine before publishing: ${backgroundPct} % (100 % = one core)`);
  const metricsBefore = await metricsText();
  const metricsBeforeAtMs = Date.now();
  if (o.pgStatements) await db.query('select pg_stat_statements_reset()');
  const walBefore = (await db.query<{ lsn: string }>('select pg_current_wal_lsn()::text as lsn')).rows[0].lsn;
  const bgBefore = (await db.query('select checkpoints_timed, checkpoints_req, buffers_checkpoint, buffers_backend from pg_stat_bgwriter')).rows[0];
  const postmasterPid = currentPostmasterPid();
  const pgKindsBefore = childCpuByKind(postmasterPid, postgresKind);

  const startAtMs = Date.now() + 1000;
  const faultAtMs = startAtMs + faultAtS * 1000;
  for (const w of workers) w.send({ type: 'go', startAtMs, faultAtMs, steadyAtMs: startAtMs + o.warmupS * 1000 } satisfies ToWorker);
  await sleep(Math.max(0, startAtMs - Date.now()));
  log(`publishing from ${new Date(startAtMs).toISOString()}; noise ×${o.faultFactor} on ${faultUnits.length} estimators from ${new Date(faultAtMs).toISOString()} (+${faultAtS} s)`);

  // -- sampling
  const series: Sample[] = [];
  const probes: ServiceProbe[] = [];
  const rssValues: number[] = [];
  let tick = 0;
  const prev = {
    atMs: Date.now(),
    service: treeCpuSeconds(servicePid) ?? 0,
    postgres: treeCpuSeconds(postmasterPid) ?? 0,
    publishers: publishersCpuNow(),
    machine: machineCpuSeconds(),
    self: process.cpuUsage(),
  };
  const first = { ...prev };
  const splitFirst = cpuSplit(servicePid) ?? { user: 0, system: 0 };
  const publishersSystemFirst = publisherSystemCpu.reduce((a, b) => a + b, 0);
  const rssStart = rssBytes(servicePid);
  const sum = (f: (c: WorkerCounts) => number) => latest.reduce((a, c) => a + (c ? f(c) : 0), 0);
  const printEvery = o.quick ? 5 : 10;
  log('   t    acked/s   in flight   PUBACK p99   service CPU   PostgreSQL CPU   publishers CPU   other CPU   service RSS');
  let lastPrinted = { tS: 0, acked: 0 };
  let worstP99SincePrint = 0;
  const endAtMs = startAtMs + o.durationS * 1000;
  while (Date.now() < endAtMs) {
    await sleep(Math.min(1000, endAtMs - Date.now()));
    const now = Date.now();
    const dt = (now - prev.atMs) / 1000;
    const svc = treeCpuSeconds(servicePid);
    if (svc === null) throw new Error(`the service exited during the run:\n${fs.readFileSync(serviceLog, 'utf8').slice(-3000)}`);
    const pgc = treeCpuSeconds(postmasterPid) ?? prev.postgres;
    const pub = publishersCpuNow();
    const mach = machineCpuSeconds();
    const rss = rssBytes(servicePid);
    if (rss !== null) rssValues.push(rss);
    const s: Sample = {
      tS: round((now - startAtMs) / 1000, 1)!,
      ackedSamples: sum((c) => c.ackedSamples),
      publishedSamples: sum((c) => c.publishedSamples),
      inFlight: sum((c) => c.inFlightMessages),
      serviceCpuPct: round(((svc - prev.service) / dt) * 100),
      postgresCpuPct: round(((pgc - prev.postgres) / dt) * 100),
      publishersCpuPct: round(((pub - prev.publishers) / dt) * 100),
      machineBusyPct: round(((mach.busy - prev.machine.busy) / (mach.total - prev.machine.total)) * 100 * cores),
      serviceRssMB: rss === null ? null : round(rss / MB),
      otherPct: null,
      ackP99Ms: round(Math.max(...recentLatency.map((l) => l.p99 ?? 0)), 0),
      ackMaxMs: round(Math.max(...recentLatency.map((l) => l.max ?? 0)), 0),
    };
    s.otherPct = round((s.machineBusyPct ?? 0) - (s.serviceCpuPct ?? 0) - (s.postgresCpuPct ?? 0) - (s.publishersCpuPct ?? 0));
    series.push(s);
    if (++tick % 5 === 0) {
      try {
        const text = await metricsText();
        probes.push({
          tS: s.tS,
          writeQueue: metric(text, 'whitecap_write_queue_samples'),
          loopDelayP99Ms: round(metric(text, 'whitecap_process_nodejs_eventloop_lag_p99_seconds') * 1000, 1)!,
          loopDelayMaxMs: round(metric(text, 'whitecap_process_nodejs_eventloop_lag_max_seconds') * 1000, 1)!,
        });
      } catch {
        /* the service is too busy to answer: the figures say so elsewhere */
      }
    }
    Object.assign(prev, { atMs: now, service: svc, postgres: pgc, publishers: pub, machine: mach });
    worstP99SincePrint = Math.max(worstP99SincePrint, s.ackP99Ms ?? 0);
    if (s.tS - lastPrinted.tS >= printEvery - 0.01 || now >= endAtMs) {
      const rate = (s.ackedSamples - lastPrinted.acked) / (s.tS - lastPrinted.tS);
      log(
        `${String(Math.round(s.tS)).padStart(4)} s ${fmtInt(rate).padStart(9)} ${fmtInt(s.inFlight).padStart(11)} ${fmtMs(worstP99SincePrint).padStart(12)} ` +
          `${String(s.serviceCpuPct).padStart(11)} % ${String(s.postgresCpuPct).padStart(14)} % ${String(s.publishersCpuPct).padStart(14)} % ` +
          `${String(s.otherPct).padStart(9)} % ${String(s.serviceRssMB).padStart(10)} MB`,
      );
      lastPrinted = { tS: s.tS, acked: s.ackedSamples };
      worstP99SincePrint = 0;
    }
  }
  const publishEndedMs = Date.now();
  const cpuAtEnd = {
    service: treeCpuSeconds(servicePid) ?? prev.service,
    postgres: treeCpuSeconds(postmasterPid) ?? prev.postgres,
    publishers: publishersCpuNow(),
    machine: machineCpuSeconds(),
    self: process.cpuUsage(first.self),
  };
  const pgKindsAfter = childCpuByKind(postmasterPid, postgresKind);
  const splitEnd = cpuSplit(servicePid) ?? splitFirst;
  const publishersSystemEnd = publisherSystemCpu.reduce((a, b) => a + b, 0);
  const rssEnd = rssBytes(servicePid);

  // -- stop publishing, wait for every PUBACK
  log('stopping the publishers; waiting for every PUBACK…');
  for (const w of workers) w.send({ type: 'stop', drainMs: 120_000 } satisfies ToWorker);
  await Promise.all(doneWaiters);
  const drainedAtMs = Date.now();
  const cpuAtDrained = { service: treeCpuSeconds(servicePid) ?? cpuAtEnd.service, postgres: treeCpuSeconds(postmasterPid) ?? cpuAtEnd.postgres };
  if (done.length !== workers.length) throw new Error('a publisher ended without its report');
  await sleep(1000);

  // -- what the service and the database say
  const metricsAfter = await metricsText();
  const metricsSpanS = (Date.now() - metricsBeforeAtMs) / 1000;
  // PostgreSQL's statements of the run, read before this benchmark's own counting queries.
  const statements = o.pgStatements
    ? (
        await db.query<{ query: string; calls: string; total_ms: number; mean_ms: number; rows: string }>(
          `select regexp_replace(query, '\\s+', ' ', 'g') as query, calls, total_exec_time as total_ms, mean_exec_time as mean_ms, rows
             from pg_stat_statements where dbid = (select oid from pg_database where datname = current_database())
            order by total_exec_time desc limit 10`,
        )
      ).rows.map((r) => ({ query: r.query.slice(0, 110), calls: Number(r.calls), totalMs: round(r.total_ms, 0), meanMs: round(r.mean_ms, 3), rows: Number(r.rows) }))
    : [];
  const walAfter = (await db.query<{ lsn: string }>('select pg_current_wal_lsn()::text as lsn')).rows[0].lsn;
  const walBytes = Number((await db.query<{ d: string }>('select pg_wal_lsn_diff($1, $2)::bigint as d', [walAfter, walBefore])).rows[0].d);
  const bgAfter = (await db.query('select checkpoints_timed, checkpoints_req, buffers_checkpoint, buffers_backend from pg_stat_bgwriter')).rows[0];
  const rows = Number((await db.query<{ n: string }>('select count(*) as n from innovation_samples')).rows[0].n);
  // Every acknowledged sample, by unit and sequence number, must be a stored row.
  const matched = await countStoredOfAcknowledged(db, done.flatMap((d) => d.acked));
  const quarantined = Number((await db.query<{ n: string }>('select count(*) as n from quarantine')).rows[0].n);
  const parts = (
    await db.query<{ name: string; total: string; tbl: string; idx: string; rows: string }>(
      `select c.relname as name, pg_total_relation_size(c.oid) as total, pg_table_size(c.oid) as tbl, pg_indexes_size(c.oid) as idx,
              c.reltuples as rows
         from pg_inherits i join pg_class c on c.oid = i.inhrelid join pg_class p on p.oid = i.inhparent
        where p.relname = 'innovation_samples' order by 1`,
    )
  ).rows;
  const bytes = parts.reduce((a, p) => ({ total: a.total + Number(p.total), table: a.table + Number(p.tbl), index: a.index + Number(p.idx) }), {
    total: 0,
    table: 0,
    index: 0,
  });
  const otherTables = (
    await db.query<{ name: string; total: string; live: string; dead: string; upd: string; hot: string }>(
      `select relname as name, pg_total_relation_size(relid) as total, n_live_tup as live, n_dead_tup as dead, n_tup_upd as upd, n_tup_hot_upd as hot
         from pg_stat_user_tables where relname in ('estimator_rollups_minute', 'estimator_status', 'estimator_checkpoints', 'alerts', 'alert_events', 'quarantine')
        order by 1`,
    )
  ).rows.map((r) => ({ table: r.name, bytes: Number(r.total), liveRows: Number(r.live), deadRows: Number(r.dead), updates: Number(r.upd), hotUpdates: Number(r.hot) }));
  const alertRows = (
    await db.query<{ unit: string; rule: string; opened_at: Date; at_seq: string | null }>(
      `select u.key as unit, a.rule, a.opened_at, (ev.data->>'atSeq')::bigint as at_seq
         from alerts a
         join estimators e on e.id = a.estimator_id
         join units u on u.id = e.unit_id
         left join alert_events ev on ev.alert_id = a.id and ev.kind = 'opened'
        order by a.opened_at`,
    )
  ).rows;

  // -- stop the service (gracefully: its profile is written on exit)
  service.kill('SIGTERM');
  const serviceStopped = await waitForExit(service, 30_000);
  if (!serviceStopped) service.kill('SIGKILL');
  logStream.end();
  let profile: ProfileSummary | null = null;
  if (o.profile && fs.existsSync(profileDir)) {
    const file = fs.readdirSync(profileDir).find((f) => f.endsWith('.cpuprofile'));
    if (file) {
      profile = summarizeProfile(path.join(profileDir, file), 25);
      // kept out of the repository (.output/ is ignored): open it in Chrome DevTools or re-read it with cpuprofile-summary.ts
      const keepDir = path.join(root, '.output', 'bench');
      fs.mkdirSync(keepDir, { recursive: true });
      fs.copyFileSync(path.join(profileDir, file), path.join(keepDir, 'ingest-service.cpuprofile'));
      log(`service CPU profile: ${path.relative(root, path.join(keepDir, 'ingest-service.cpuprofile'))}`);
    }
  }
  const serviceLogText = fs.existsSync(serviceLog) ? fs.readFileSync(serviceLog, 'utf8') : '';
  if (o.nodeFlags.length > 0 && serviceLogText) {
    const keepDir = path.join(root, '.output', 'bench');
    fs.mkdirSync(keepDir, { recursive: true });
    fs.writeFileSync(path.join(keepDir, 'ingest-service.log'), serviceLogText);
    log(`service output (${o.nodeFlags.join(' ')}): .output/bench/ingest-service.log`);
  }
  const logLines = serviceLogText.split('\n').filter(Boolean);
  const logMessages = countLogMessages(logLines);
  await db.end();

  // ---------------------------------------------------------------- figures
  const totals = sumWorkerCounts(done.map((d) => d.counts));
  const p2a = new LatencyHistogram();
  const steadyP2a = new LatencyHistogram();
  const s2a = new LatencyHistogram();
  for (const d of done) {
    p2a.merge(d.publishToAck);
    steadyP2a.merge(d.steadyPublishToAck);
    s2a.merge(d.sampleToAck);
  }
  const runS = (publishEndedMs - startAtMs) / 1000;
  const atOrAfter = (tS: number) => series.find((s) => s.tS >= tS) ?? series[0];
  const steadyFrom = atOrAfter(o.warmupS);
  const steadyTo = series[series.length - 1];
  const steadyRate = (steadyTo.ackedSamples - steadyFrom.ackedSamples) / (steadyTo.tS - steadyFrom.tS);
  let worst10s: number | null = null;
  for (let i = 0; i < series.length; i++) {
    if (series[i].tS < o.warmupS) continue;
    const j = series.findIndex((s) => s.tS >= series[i].tS + 10);
    if (j < 0) break;
    const r = (series[j].ackedSamples - series[i].ackedSamples) / (series[j].tS - series[i].tS);
    worst10s = worst10s === null ? r : Math.min(worst10s, r);
  }
  const overallRate = totals.ackedSamples / ((drainedAtMs - startAtMs) / 1000);
  // What the publishers offered over the same window as the sustained rate (after the warm-up).
  const offeredDuringRun = (steadyTo.publishedSamples - steadyFrom.publishedSamples) / (steadyTo.tS - steadyFrom.tS);
  const cpuPct = (sec: number) => round((sec / runS) * 100);
  const serviceCpu = cpuAtEnd.service - first.service;
  const postgresCpu = cpuAtEnd.postgres - first.postgres;
  const publishersCpu = cpuAtEnd.publishers - first.publishers;
  const machineBusy = cpuAtEnd.machine.busy - first.machine.busy;
  const selfCpu = (cpuAtEnd.self.user + cpuAtEnd.self.system) / 1e6;
  const pgKinds = [...pgKindsAfter.entries()]
    .map(([kind, s]) => ({ kind, cpuPct: cpuPct(s - (pgKindsBefore.get(kind) ?? 0)) }))
    .filter((k) => (k.cpuPct ?? 0) > 0.05)
    .sort((a, b) => (b.cpuPct ?? 0) - (a.cpuPct ?? 0));
  const rssMean = rssValues.reduce((a, b) => a + b, 0) / Math.max(1, rssValues.length);
  const steadyRss = series.filter((s) => s.tS >= o.warmupS && s.serviceRssMB !== null);
  const rssSlope = (() => {
    if (steadyRss.length < 3) return null;
    const n = steadyRss.length;
    const mx = steadyRss.reduce((a, s) => a + s.tS, 0) / n;
    const my = steadyRss.reduce((a, s) => a + s.serviceRssMB!, 0) / n;
    const num = steadyRss.reduce((a, s) => a + (s.tS - mx) * (s.serviceRssMB! - my), 0);
    const den = steadyRss.reduce((a, s) => a + (s.tS - mx) ** 2, 0);
    return den > 0 ? (num / den) * 60 : null;
  })();

  const m = (name: string, labels?: string) => metric(metricsAfter, name, labels) - metric(metricsBefore, name, labels);
  const batches = m('whitecap_write_batch_samples_count');
  const serviceMetrics = {
    messagesIn: m('whitecap_messages_in_total'),
    samplesStored: m('whitecap_samples_stored_total'),
    commits: batches,
    meanSamplesPerCommit: batches ? round(m('whitecap_write_batch_samples_sum') / batches, 0) : null,
    meanCommitMs: batches ? round((m('whitecap_write_batch_seconds_sum') / batches) * 1000, 1) : null,
    commitBusyShare: round(m('whitecap_write_batch_seconds_sum') / metricsSpanS, 2),
    meanCheckUsPerMessage: m('whitecap_check_seconds_count') ? round((m('whitecap_check_seconds_sum') / m('whitecap_check_seconds_count')) * 1e6, 1) : null,
    heldBackpressure: m('whitecap_publish_held_total'),
    messageCommitMeanMs: m('whitecap_message_commit_seconds_count') ? round((m('whitecap_message_commit_seconds_sum') / m('whitecap_message_commit_seconds_count')) * 1000, 1) : null,
    messageCommitWithin: Object.fromEntries(
      ['0.25', '0.5', '1'].map((le) => [le, m('whitecap_message_commit_seconds_count') ? round(m('whitecap_message_commit_seconds_bucket', `le="${le}"`) / m('whitecap_message_commit_seconds_count'), 4) : null]),
    ),
    commitPhasesMs: Object.fromEntries(
      ['prepare', 'connect', 'store', 'alerts', 'commit'].map((p) => [
        p,
        batches ? round((m('whitecap_write_phase_seconds_total', `phase="${p}"`) / batches) * 1000, 1) : null,
      ]),
    ),
    quarantined: m('whitecap_quarantined_total'),
    duplicates: m('whitecap_samples_duplicate_total'),
    alertsOpened: m('whitecap_alerts_opened_total'),
    gcSeconds: round(m('whitecap_process_nodejs_gc_duration_seconds_sum'), 1),
    gcSharePct: round((m('whitecap_process_nodejs_gc_duration_seconds_sum') / metricsSpanS) * 100, 1),
    maxWriteQueue: probes.length ? Math.max(...probes.map((p) => p.writeQueue)) : null,
    loopDelayP99MaxMs: probes.length ? Math.max(...probes.map((p) => p.loopDelayP99Ms)) : null,
    loopDelayMaxMs: probes.length ? Math.max(...probes.map((p) => p.loopDelayMaxMs)) : null,
    note: 'whitecap_check_seconds (meanCheckUsPerMessage) runs from the start of handle() and so includes waiting behind the other messages of the same burst, not only this message\'s checks',
  };

  // fault → alert
  const faultKeys = new Map([...faultStarts.values()].map((f) => [f.unitKey, f]));
  const faultAlerts = [...faultStarts.values()]
    .sort((a, b) => a.unitKey.localeCompare(b.unitKey))
    .map((f) => {
      const a = alertRows.find((r) => r.unit === f.unitKey && CHECK_RULES.has(r.rule) && r.opened_at.getTime() >= f.tMs - 1);
      return {
        unit: f.unitKey,
        faultFirstSeq: f.seq,
        faultFirstSampleAt: new Date(f.tMs).toISOString(),
        rule: a?.rule ?? null,
        openedAt: a ? a.opened_at.toISOString() : null,
        latencyMs: a ? a.opened_at.getTime() - f.tMs : null,
        samplesAfterFault: a && a.at_seq !== null ? Number(a.at_seq) - f.seq + 1 : null,
      };
    });
  const alertLatencies = faultAlerts.map((a) => a.latencyMs).filter((x): x is number => x !== null).sort((a, b) => a - b);
  const otherAlerts = new Map<string, number>();
  for (const r of alertRows) {
    const f = faultKeys.get(r.unit);
    if (f && CHECK_RULES.has(r.rule) && r.opened_at.getTime() >= f.tMs - 1) continue;
    otherAlerts.set(r.rule, (otherAlerts.get(r.rule) ?? 0) + 1);
  }

  const lost = totals.ackedSamples - matched;
  const nothingLost = lost === 0 && quarantined === 0;
  const bytesPerSample = rows ? bytes.total / rows : null;
  // Judged over the same window as the sustained rate: messages published after the warm-up.
  const p99 = steadyP2a.quantile(0.99);
  const targets = {
    sustainedRate: { target: '≥ 20,000 samples/s for 120 s', value: round(steadyRate, 0), met: steadyRate >= 20_000 && o.durationS >= 120 && nothingLost },
    nothingLost: { target: 'acknowledged = stored', value: nothingLost, met: nothingLost },
    p99PublishToCommit: { target: '< 1 s (after the warm-up)', value: round(p99, 1), met: p99 !== null && p99 < 1000 },
    bytesPerSample: { target: '≤ 120 bytes', value: round(bytesPerSample, 1), met: bytesPerSample !== null && bytesPerSample <= 120 },
  };

  const result = {
    date: startedAt.toISOString(),
    commit: gitCommit(),
    machine: { node: process.version, cores, cpuModel: os.cpus()[0]?.model ?? null, memoryGB: round(os.totalmem() / MB / 1024, 1), platform: `${os.type()} ${os.release()}` },
    postgres: { version: pgVersion, settings: pgSettings },
    options: {
      offeredSamplesPerS: o.rate,
      units: o.units,
      estimators: o.units,
      samplesPerSPerEstimator: round(perEstimatorRate, 3),
      samplesPerMessage: o.batch,
      durationS: o.durationS,
      warmupS: o.warmupS,
      rampS: o.rampS,
      publishers: o.publishers,
      reference: o.reference,
      serviceEnv: o.serviceEnv,
      profile: o.profile,
      nice: o.nice,
    },
    throughput: {
      offeredSamplesPerS: round(offeredDuringRun, 0),
      sustainedSamplesPerS: round(steadyRate, 0),
      worst10sSamplesPerS: round(worst10s, 0),
      overallSamplesPerS: round(overallRate, 0),
      publishedSamples: totals.publishedSamples,
      ackedSamples: totals.ackedSamples,
      storedRows: rows,
      lost,
      storedNotAcknowledged: rows - matched,
      unacknowledgedMessages: totals.publishedMessages - totals.ackedMessages,
      publishedMessages: totals.publishedMessages,
      ackedMessages: totals.ackedMessages,
      quarantined,
      skippedByPublishers: totals.skippedSamples,
      unitWindowFullTicks: totals.windowFullTicks,
      disconnects: totals.disconnects,
      clientErrors: totals.errors,
      clientErrorKinds: done.reduce<Record<string, number>>((a, d) => {
        for (const [k, v] of Object.entries(d.errorKinds)) a[k] = (a[k] ?? 0) + v;
        return a;
      }, {}),
      drainS: round((drainedAtMs - publishEndedMs) / 1000, 1),
      nothingLost,
    },
    latency: {
      publishToCommit: roundAll(p2a.summary()),
      steadyPublishToCommit: roundAll(steadyP2a.summary()),
      sampleToCommit: roundAll(s2a.summary()),
      note: 'publishToCommit: publish() to PUBACK per message (the service sends the PUBACK after the commit). sampleToCommit: the oldest sample of a message from its scheduled time to PUBACK (includes a unit holding back, and batch filling when --batch > 1).',
    },
    alerts: {
      faultAtS,
      faultFactor: o.faultFactor,
      faulted: faultAlerts,
      latencyMs: { min: alertLatencies[0] ?? null, median: alertLatencies.length ? alertLatencies[Math.floor(alertLatencies.length / 2)] : null, max: alertLatencies.at(-1) ?? null },
      detected: alertLatencies.length,
      otherAlerts: Object.fromEntries(otherAlerts),
    },
    cpu: {
      note: '100 % = one core; the machine has ' + cores * 100 + ' %',
      servicePct: cpuPct(serviceCpu),
      serviceUserPct: cpuPct(splitEnd.user - splitFirst.user),
      serviceSystemPct: cpuPct(splitEnd.system - splitFirst.system),
      postgresPct: cpuPct(postgresCpu),
      postgresByProcess: pgKinds,
      publishersPct: cpuPct(publishersCpu),
      publishersSystemPct: cpuPct(publishersSystemEnd - publishersSystemFirst),
      benchmarkItselfPct: cpuPct(selfCpu),
      machineBusyPct: cpuPct(machineBusy),
      otherPct: cpuPct(machineBusy - serviceCpu - postgresCpu - publishersCpu - selfCpu),
      otherBeforePublishingPct: backgroundPct,
      // per sample: from the start to the last PUBACK, over every acknowledged sample
      serviceCpuUsPerSample: round(((cpuAtDrained.service - first.service) / Math.max(1, totals.ackedSamples)) * 1e6, 1),
      postgresCpuUsPerSample: round(((cpuAtDrained.postgres - first.postgres) / Math.max(1, totals.ackedSamples)) * 1e6, 1),
      publishersCpuUsPerSample: round((publishersCpu / Math.max(1, totals.ackedSamples)) * 1e6, 1),
      publisherLoopDelayP99Ms: round(Math.max(...done.map((d) => d.loopDelay.p99Ms)), 1),
    },
    memory: {
      serviceRssStartMB: round((rssStart ?? 0) / MB),
      serviceRssEndMB: round((rssEnd ?? 0) / MB),
      serviceRssMeanMB: round(rssMean / MB),
      serviceRssMaxMB: round(Math.max(...rssValues) / MB),
      serviceRssSlopeMBPerMin: round(rssSlope, 2),
    },
    storage: {
      rows,
      partitions: parts.length,
      bytesTotal: bytes.total,
      bytesTable: bytes.table,
      bytesIndexes: bytes.index,
      bytesPerSample: round(bytesPerSample, 1),
      tableBytesPerSample: rows ? round(bytes.table / rows, 1) : null,
      indexBytesPerSample: rows ? round(bytes.index / rows, 1) : null,
      walBytesPerSample: totals.ackedSamples ? round(walBytes / totals.ackedSamples, 1) : null,
      walMB: round(walBytes / MB, 1),
      checkpoints: { timed: Number(bgAfter.checkpoints_timed) - Number(bgBefore.checkpoints_timed), requested: Number(bgAfter.checkpoints_req) - Number(bgBefore.checkpoints_req) },
      otherTables,
    },
    service: { metrics: serviceMetrics, logLines: logLines.length, logMessages: Object.fromEntries([...logMessages.entries()].slice(0, 10)), stoppedCleanly: serviceStopped },
    postgresStatements: statements,
    serviceProfile: profile ? { busyS: round(profile.busyMs / 1000, 1), areas: profile.areas.slice(0, 15).map((a) => ({ ...a, ms: round(a.ms, 0), shareOfBusy: round(a.shareOfBusy * 100, 1) })), functions: profile.functions.map((f) => ({ ...f, ms: round(f.ms, 0), shareOfBusy: round(f.shareOfBusy * 100, 1) })) } : null,
    targets,
    series,
    seriesNote: 'tS: seconds since publishing began; the service became healthy at serviceUpAtS (its timers, e.g. the estimator checkpoint every WHITECAP_CHECKPOINT_EVERY_MS, count from about then). ackP99Ms: PUBACK p99 of the messages acknowledged in the second before.',
    serviceUpAtS: round((serviceUpAtMs - startAtMs) / 1000, 1),
    serviceProbes: probes,
  };

  const md = markdown(result);
  console.log('\n' + md);
  if (o.write) {
    fs.mkdirSync(resultsDir, { recursive: true });
    fs.writeFileSync(path.join(resultsDir, `ingest-${o.name}.json`), JSON.stringify(result, null, 2) + '\n');
    fs.writeFileSync(path.join(resultsDir, `ingest-${o.name}.md`), md);
    log(`wrote ${path.relative(root, path.join(resultsDir, `ingest-${o.name}.json`))} and ingest-${o.name}.md`);
  }

  // -- PostgreSQL down, cluster removed
  stopBenchPostgres();
  log('stopped the service, the publishers and PostgreSQL; removed the cluster');
}

function roundAll<T extends Record<string, number | null>>(o: T): T {
  return Object.fromEntries(Object.entries(o).map(([k, v]) => [k, k === 'count' ? v : round(v, 1)])) as T;
}

// ---------------------------------------------------------------- the markdown report

// eslint-disable-next-line @typescript-eslint/no-explicit-any
function markdown(r: any): string {
  const yes = (b: boolean) => (b ? 'met' : '**missed**');
  const t = r.throughput;
  const l = r.latency;
  const c = r.cpu;
  const s = r.storage;
  const a = r.alerts;
  const lines: string[] = [];
  lines.push(`# Ingest benchmark (\`npm run bench:ingest\`)`);
  lines.push('');
  lines.push(
    `${r.date} · ${r.commit ? `commit ${r.commit} · ` : ''}Node ${r.machine.node} · ${r.machine.cores} cores (${r.machine.cpuModel}) · ${r.machine.memoryGB} GB · PostgreSQL ${r.postgres.version}`,
  );
  lines.push('');
  lines.push(
    `Load: ${fmtInt(r.options.units)} synthetic tractors (one estimator, one MQTT connection each) × ${r.options.samplesPerSPerEstimator} samples/s = ` +
      `${fmtInt(r.options.offeredSamplesPerS)} samples/s offered, ${r.options.samplesPerMessage} sample(s) per message, QoS 1, ${r.options.durationS} s ` +
      `(first ${r.options.warmupS} s left out of the sustained rate${r.options.rampS ? `; the rate climbs from a tenth over the first ${r.options.rampS} s` : '; full rate from the first second'}), ${r.options.publishers} publisher processes` +
      (r.options.reference ? ', with e and P' : ', without e and P') +
      (Object.keys(r.options.serviceEnv).length ? `; service env ${JSON.stringify(r.options.serviceEnv)}` : '') +
      (r.options.nice ? `; PostgreSQL, the service and the publishers at scheduling priority ${r.options.nice} (--nice)` : '') +
      '.',
  );
  lines.push('');
  lines.push(
    `PostgreSQL: ${Object.entries(r.postgres.settings)
      .map(([k, v]) => `${k}=${v}`)
      .join(', ')}. All of it (service, PostgreSQL, publishers) shares this machine's ${r.machine.cores} cores.`,
  );
  lines.push('');
  lines.push('| figure | value | target |');
  lines.push('| --- | --- | --- |');
  lines.push(`| sustained, published → checked → committed | **${fmtInt(t.sustainedSamplesPerS)} samples/s** (worst 10 s: ${fmtInt(t.worst10sSamplesPerS)}; offered in the same window ${fmtInt(t.offeredSamplesPerS)}) | ≥ 20,000 for 120 s: ${yes(r.targets.sustainedRate.met)} |`);
  lines.push(`| acknowledged = stored | ${fmtInt(t.ackedSamples)} samples acknowledged, ${fmtInt(t.storedRows)} rows stored, ${fmtInt(t.lost)} acknowledged but missing, ${fmtInt(t.quarantined)} quarantined; ${fmtInt(t.ackedMessages)} of ${fmtInt(t.publishedMessages)} messages acknowledged${t.unacknowledgedMessages ? ` (${fmtInt(t.unacknowledgedMessages)} failed: the unit must resend them; ${fmtInt(t.storedNotAcknowledged)} rows stored without a PUBACK)` : ''} | nothing lost: ${yes(r.targets.nothingLost.met)} |`);
  lines.push(`| publish → commit (PUBACK), per message, after the warm-up | p50 ${fmtMs(l.steadyPublishToCommit.p50Ms)}, p90 ${fmtMs(l.steadyPublishToCommit.p90Ms)}, **p99 ${fmtMs(l.steadyPublishToCommit.p99Ms)}**, p99.9 ${fmtMs(l.steadyPublishToCommit.p999Ms)}, max ${fmtMs(l.steadyPublishToCommit.maxMs)} | p99 < 1 s: ${yes(r.targets.p99PublishToCommit.met)} |`);
  lines.push(`| publish → commit, whole run (warm-up and ramp included) | p50 ${fmtMs(l.publishToCommit.p50Ms)}, p90 ${fmtMs(l.publishToCommit.p90Ms)}, p99 ${fmtMs(l.publishToCommit.p99Ms)}, p99.9 ${fmtMs(l.publishToCommit.p999Ms)}, max ${fmtMs(l.publishToCommit.maxMs)} | |`);
  lines.push(`| sample time → commit (oldest sample of a message) | p50 ${fmtMs(l.sampleToCommit.p50Ms)}, p99 ${fmtMs(l.sampleToCommit.p99Ms)}, max ${fmtMs(l.sampleToCommit.maxMs)} | |`);
  lines.push(
    `| fault → alert (noise ×${a.faultFactor} from +${a.faultAtS} s on ${a.faulted.length} estimators) | ${a.detected}/${a.faulted.length} alerted; median ${a.latencyMs.median === null ? 'n/a' : (a.latencyMs.median / 1000).toFixed(1) + ' s'} (${a.latencyMs.min === null ? 'n/a' : (a.latencyMs.min / 1000).toFixed(1)}–${a.latencyMs.max === null ? 'n/a' : (a.latencyMs.max / 1000).toFixed(1)} s); samples after the fault: ${a.faulted.map((f: { samplesAfterFault: number | null }) => f.samplesAfterFault ?? 'n/a').join(', ')}; rules: ${[...new Set(a.faulted.map((f: { rule: string | null }) => f.rule ?? 'none'))].join(', ')} | |`,
  );
  lines.push(`| other alerts (healthy estimators, or not from the checks) | ${Object.keys(a.otherAlerts).length ? Object.entries(a.otherAlerts).map(([k, v]) => `${k}: ${v}`).join(', ') : 'none'} | |`);
  lines.push(`| service CPU | ${c.servicePct} % (user ${c.serviceUserPct} %, system ${c.serviceSystemPct} %; ${c.serviceCpuUsPerSample} µs per sample) | |`);
  lines.push(`| PostgreSQL CPU | ${c.postgresPct} % (${c.postgresCpuUsPerSample} µs per sample): ${c.postgresByProcess.slice(0, 4).map((k: { kind: string; cpuPct: number }) => `${k.kind} ${k.cpuPct} %`).join(', ')} | |`);
  lines.push(`| publishers CPU | ${c.publishersPct} % (system ${c.publishersSystemPct} %; ${c.publishersCpuUsPerSample} µs per sample; event-loop delay p99 ${c.publisherLoopDelayP99Ms} ms) | |`);
  lines.push(`| machine busy | ${c.machineBusyPct} % of ${r.machine.cores * 100} % (benchmark itself ${c.benchmarkItselfPct} %; other processes and kernel threads ${c.otherPct} %, ${c.otherBeforePublishingPct} % before publishing began) | |`);
  lines.push(`| service memory (RSS) | start ${r.memory.serviceRssStartMB} MB, end ${r.memory.serviceRssEndMB} MB, mean ${r.memory.serviceRssMeanMB} MB, max ${r.memory.serviceRssMaxMB} MB; slope after warm-up ${r.memory.serviceRssSlopeMBPerMin} MB/min | |`);
  lines.push(`| bytes on disk per stored sample | **${s.bytesPerSample} B** (table ${s.tableBytesPerSample} B + indexes ${s.indexBytesPerSample} B; ${fmtInt(s.rows)} rows in ${s.partitions} partition(s)) | ≤ 120 B: ${yes(r.targets.bytesPerSample.met)} |`);
  lines.push(`| WAL per sample | ${s.walBytesPerSample} B (${s.walMB} MB; checkpoints: ${s.checkpoints.timed} timed, ${s.checkpoints.requested} requested) | |`);
  const sm = r.service.metrics;
  lines.push(`| service's commits | ${fmtInt(sm.commits)} commits, mean ${fmtInt(sm.meanSamplesPerCommit)} samples and ${sm.meanCommitMs} ms each (writer busy ${Math.round((sm.commitBusyShare ?? 0) * 100)} % of the time); held back (write queue full) ${fmtInt(sm.heldBackpressure)}; write queue max ${fmtInt(sm.maxWriteQueue)} samples | |`);
  const pct = (x: number | null | undefined) => (x === null || x === undefined ? '—' : `${round(x * 100, 2)} %`);
  lines.push(`| arrival at the broker → commit, as the service sees it | mean ${sm.messageCommitMeanMs} ms; within 250 ms ${pct(sm.messageCommitWithin['0.25'])}, 500 ms ${pct(sm.messageCommitWithin['0.5'])}, 1 s ${pct(sm.messageCommitWithin['1'])} | |`);
  lines.push(`| a commit's time by phase (mean ms) | ${Object.entries(sm.commitPhasesMs).map(([p, v]) => `${p} ${v}`).join(', ')} | |`);
  lines.push(`| service event loop | delay p99 up to ${sm.loopDelayP99MaxMs} ms, max ${sm.loopDelayMaxMs} ms (5-s intervals); GC ${sm.gcSeconds} s (${sm.gcSharePct} % of the run) | |`);
  lines.push(`| publishers | ${fmtInt(t.skippedByPublishers)} samples skipped, ${fmtInt(t.unitWindowFullTicks)} unit-ticks held back (in-flight window full), ${fmtInt(t.disconnects)} disconnects, ${fmtInt(t.clientErrors)} client errors${Object.keys(t.clientErrorKinds).length ? ` (${Object.entries(t.clientErrorKinds).map(([k, v]) => `${k}: ${fmtInt(v as number)}`).join('; ')})` : ''}; drain ${t.drainS} s | |`);
  lines.push('');
  if (r.postgresStatements.length) {
    lines.push('PostgreSQL statements by total time (pg_stat_statements, during the run):');
    lines.push('');
    lines.push('| total ms | calls | mean ms | rows | statement |');
    lines.push('| ---: | ---: | ---: | ---: | --- |');
    for (const q of r.postgresStatements.slice(0, 8)) lines.push(`| ${fmtInt(q.totalMs)} | ${fmtInt(q.calls)} | ${q.meanMs} | ${fmtInt(q.rows)} | \`${q.query.replace(/\|/g, '\\|')}\` |`);
    lines.push('');
  }
  if (r.serviceProfile) {
    lines.push(`Service CPU profile (--profile; self time, share of ${r.serviceProfile.busyS} s busy):`);
    lines.push('');
    lines.push('| share | area |');
    lines.push('| ---: | --- |');
    for (const x of r.serviceProfile.areas.slice(0, 12)) lines.push(`| ${x.shareOfBusy} % | ${x.area} |`);
    lines.push('');
  }
  return lines.join('\n') + '\n';
}

main().catch((err) => {
  console.error(`[bench] failed: ${(err as Error).stack ?? err}`);
  cleanupNow();
  process.exit(1);
});
