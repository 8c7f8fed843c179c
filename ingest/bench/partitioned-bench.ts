/**
 * `npm run bench:partitioned`: what one partitioned ingest worker takes behind an external
 * broker (docs/scaling.md). Debian's mosquitto on loopback, a throwaway PostgreSQL, W
 * workers (the real service with WHITECAP_PARTITIONED=true) sharing P partitions, and
 * synthetic tractors publishing QoS 1 batches under their partitions' topics.
 *
 * mosquitto acknowledges a unit's message when it has it, not when Whitecap has stored
 * it, so the units' PUBACKs say nothing of the workers. The workers take each
 * partition's messages one at a time (a message is acknowledged to mosquitto only once
 * committed), so with more offered than they can take, mosquitto queues the rest: the
 * committed rate is then the workers' capacity. The benchmark offers a fixed load, reads
 * each worker's committed samples every second, stops the units, waits until the
 * workers have drained mosquitto's queue, and checks that every sample mosquitto
 * acknowledged is stored exactly once.
 */
import { randomBytes } from 'node:crypto';
import fs from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import pg from 'pg';
import { syntheticTractors } from '../../simulators/src/saltmarsh-fleet';
import { ensureMosquitto } from '../../scripts/lib/project.mjs';
import { Mosquitto } from '../../test/support/mosquitto';
import { benchSecretFor, type ToWorker, type WorkerConfig, type WorkerCounts } from './bench-fleet';
import {
  MB,
  benchPostgresSettings,
  cleanupNow,
  countLogMessages,
  countStoredOfAcknowledged,
  fmtInt,
  forkPublishers,
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
  sumWorkerCounts,
  waitForExit,
  type BenchService,
  numberOption as num,
  resultsName,
} from './bench-stack';
import { machineCpuSeconds, rssBytes, treeCpuSeconds } from './proc-sampler';

interface Options {
  workers: number;
  partitions: number;
  units: number;
  rate: number;
  batch: number;
  durationS: number;
  warmupS: number;
  publishers: number;
  name: string;
  write: boolean;
}

const HELP = `npm run bench:partitioned -- [options]

  --workers W       partitioned ingest workers (default 1)
  --partitions P    partitions of the fleet; each is one MQTT session with mosquitto (default 16)
  --units N         synthetic tractors, one estimator and one MQTT connection each (default 2000)
  --rate R          samples per second per estimator (default 10)
  --batch B         samples per message (default 10, the message docs/scaling.md plans with)
  --duration S      seconds of load (default 120)
  --warmup S        seconds left out of the sustained rate (default 30)
  --publishers N    publisher processes (default 2)
  --name NAME       write ingest/bench/results/partitioned-NAME.{json,md} (default: latest)
  --no-write        do not write the results files

Offer more than the workers can take (the default offers 20,000 samples/s in 2,000
messages/s) and the committed rate is their capacity; mosquitto holds the rest until
the workers have drained it after the load.`;

function parseOptions(argv: string[]): Options {
  const o: Options = { workers: 1, partitions: 16, units: 2000, rate: 10, batch: 10, durationS: 120, warmupS: 30, publishers: 2, name: 'latest', write: true };
  for (let i = 0; i < argv.length; i++) {
    const a = argv[i];
    const next = () => argv[++i];
    switch (a) {
      case '--help':
      case '-h':
        console.log(HELP);
        process.exit(0);
        break;
      case '--workers':
        o.workers = Math.round(num(a, next(), 1));
        break;
      case '--partitions':
        o.partitions = Math.round(num(a, next(), 1));
        break;
      case '--units':
        o.units = Math.round(num(a, next(), 1));
        break;
      case '--rate':
        o.rate = num(a, next(), 0.01);
        break;
      case '--batch':
        o.batch = Math.round(num(a, next(), 1));
        break;
      case '--duration':
        o.durationS = num(a, next(), 10);
        break;
      case '--warmup':
        o.warmupS = num(a, next(), 0);
        break;
      case '--publishers':
        o.publishers = Math.round(num(a, next(), 1));
        break;
      case '--name':
        o.name = resultsName(next());
        break;
      case '--no-write':
        o.write = false;
        break;
      default:
        throw new Error(`unknown option ${a}\n\n${HELP}`);
    }
  }
  if (o.warmupS >= o.durationS) throw new Error('--warmup must be shorter than the run');
  return o;
}

interface WorkerView {
  name: string;
  svc: BenchService;
  stored: number;
  claimed: number[];
}

interface Second {
  tS: number;
  publishedSamples: number;
  ackedByBroker: number;
  storedByWorker: number[];
  workerCpuPct: number[];
  brokerCpuPct: number | null;
  postgresCpuPct: number | null;
  publishersCpuPct: number | null;
  machineBusyPct: number | null;
  workerRssMB: (number | null)[];
}

async function main(): Promise<void> {
  installCleanup();
  const o = parseOptions(process.argv.slice(2));
  const cores = os.cpus().length;
  const startedAt = new Date();
  const offered = o.units * o.rate;
  log(`${startedAt.toISOString()}  node ${process.version}  ${cores} cores (${os.cpus()[0]?.model ?? '?'})`);
  log(`${o.workers} worker(s), ${o.partitions} partitions; offered ${fmtInt(offered)} samples/s (${fmtInt(o.units)} units × ${o.rate}/s, ${o.batch} a message = ${fmtInt(offered / o.batch)} messages/s) for ${o.durationS} s`);

  ensureMosquitto(log);
  const pgSettings = benchPostgresSettings(false);
  const { postgres, dbUrl } = await startBenchPostgres(pgSettings);
  const db = new pg.Pool({ connectionString: dbUrl, max: 2 });
  const pgVersion = (await db.query<{ server_version: string }>('show server_version')).rows[0].server_version;
  const runKey = randomBytes(24).toString('base64url');
  const fleet = syntheticTractors(o.units, benchSecretFor(runKey));
  await provisionSyntheticTractors(db, fleet, Math.max(1, Math.round((1000 * o.batch) / o.rate)), o.partitions);

  const broker = await Mosquitto.start('bench-partitioned');
  const cleanupBroker = () => void broker.destroy();
  process.once('exit', cleanupBroker);
  log(`mosquitto on ${broker.url} (pid ${broker.pid})`);

  // -- the workers, one after another so that each takes its fair share as it joins
  const prefix = `bench-${randomBytes(3).toString('hex')}-`;
  // The workers' logs outlive the run (mosquitto's folder does not).
  const logDir = fs.mkdtempSync(path.join(os.tmpdir(), 'whitecap-partitioned-logs-'));
  const views: WorkerView[] = [];
  for (let w = 0; w < o.workers; w++) {
    const name = `worker-${w + 1}`;
    const svc = await startBenchService({
      dbUrl,
      nodeFlags: [],
      serviceEnv: {
        WHITECAP_EXTERNAL_MQTT_URL: broker.url,
        WHITECAP_PARTITIONED: 'true',
        WHITECAP_PARTITIONS: String(o.partitions),
        WHITECAP_PARTITION_CLIENT_PREFIX: prefix,
        WHITECAP_WORKER_ID: name,
        WHITECAP_NOTIFICATIONS: 'false',
      },
      logFile: path.join(logDir, `${name}.log`),
    });
    stack.workers.push(svc.child);
    views.push({ name, svc, stored: 0, claimed: [] });
    log(`${name}: pid ${svc.pid}, HTTP ${svc.baseUrl}`);
  }
  const health = async (v: WorkerView) => {
    const body = (await (await fetch(`${v.svc.baseUrl}/api/health`, { signal: AbortSignal.timeout(5000) })).json()) as { partitions?: { claimed: number[] } };
    v.claimed = body.partitions?.claimed ?? [];
  };
  const shareDeadline = Date.now() + 60_000;
  while (true) {
    await Promise.all(views.map(health));
    const held = views.reduce((a, v) => a + v.claimed.length, 0);
    const fair = Math.ceil(o.partitions / o.workers);
    if (held === o.partitions && views.every((v) => v.claimed.length <= fair)) break;
    if (Date.now() > shareDeadline) throw new Error(`the workers did not share the ${o.partitions} partitions within 60 s: ${views.map((v) => `${v.name} ${v.claimed.length}`).join(', ')}`);
    await sleep(250);
  }
  log(`partitions held: ${views.map((v) => `${v.name} ${v.claimed.length}`).join(', ')}`);
  const storedNow = async (v: WorkerView) => {
    try {
      v.stored = metric(await (await fetch(`${v.svc.baseUrl}/metrics`, { signal: AbortSignal.timeout(5000) })).text(), 'whitecap_samples_stored_total');
    } catch {
      /* too busy to answer: the last value stands */
    }
    return v.stored;
  };

  // -- publishers
  const per = Math.ceil(o.units / o.publishers);
  const configs: WorkerConfig[] = Array.from({ length: o.publishers }, (_, p) => ({
    url: broker.url,
    runKey,
    totalUnits: o.units,
    from: p * per,
    to: Math.min(o.units, (p + 1) * per),
    rate: o.rate,
    rampS: 0,
    batch: o.batch,
    reference: false,
    faultUnits: [],
    faultFactor: 1,
    seed: 20261202,
    maxInFlightPerUnit: 20,
    connectConcurrency: 50,
    partitions: o.partitions,
  }));
  const pubs = forkPublishers(configs);
  const publishers = pubs.children;
  const latest = pubs.latest;
  const done = pubs.done;
  await pubs.connected;
  log(`${o.publishers} publisher processes: ${fmtInt(o.units)} units connected to mosquitto`);
  const publishersCpu = () => pubs.cpuSeconds();
  const postmasterPid = postmasterPidOf(postgres);
  const brokerPid = broker.pid!;

  // -- the load
  const startAtMs = Date.now() + 1000;
  for (const c of publishers) c.send({ type: 'go', startAtMs, faultAtMs: startAtMs + 1e9, steadyAtMs: startAtMs + o.warmupS * 1000 } satisfies ToWorker);
  await sleep(startAtMs - Date.now());
  await Promise.all(views.map(storedNow));
  const storedAtStart = views.map((v) => v.stored);
  const seconds: Second[] = [];
  let prev = {
    atMs: Date.now(),
    workers: views.map((v) => treeCpuSeconds(v.svc.pid) ?? 0),
    broker: treeCpuSeconds(brokerPid) ?? 0,
    postgres: treeCpuSeconds(postmasterPid) ?? 0,
    publishers: publishersCpu(),
    machine: machineCpuSeconds(),
  };
  const first = prev;
  let steadyFrom: { tS: number; stored: number[]; cpu: typeof prev } | null = null;
  log('    t   published/s  committed/s (per worker)                 backlog in mosquitto   CPU % workers / mosquitto / PostgreSQL / publishers');
  const endAtMs = startAtMs + o.durationS * 1000;
  let lastPrint = { tS: 0, stored: 0, published: 0 };
  while (Date.now() < endAtMs) {
    await sleep(Math.min(1000 - ((Date.now() - startAtMs) % 1000), endAtMs - Date.now()));
    const stored = await Promise.all(views.map(storedNow));
    const now = Date.now();
    const dt = (now - prev.atMs) / 1000;
    const c = {
      atMs: now,
      workers: views.map((v, i) => treeCpuSeconds(v.svc.pid) ?? prev.workers[i]),
      broker: treeCpuSeconds(brokerPid) ?? prev.broker,
      postgres: treeCpuSeconds(postmasterPid) ?? prev.postgres,
      publishers: publishersCpu(),
      machine: machineCpuSeconds(),
    };
    for (const v of views) if (v.svc.child.exitCode !== null) throw new Error(`${v.name} exited during the run`);
    const failed = pubs.failure();
    if (failed) throw failed;
    const counts = sumWorkerCounts(latest.filter((x): x is WorkerCounts => x !== null));
    const s: Second = {
      tS: round((now - startAtMs) / 1000, 1)!,
      publishedSamples: counts.publishedSamples,
      ackedByBroker: counts.ackedSamples,
      storedByWorker: stored.map((x, i) => x - storedAtStart[i]),
      workerCpuPct: c.workers.map((x, i) => round(((x - prev.workers[i]) / dt) * 100)!),
      brokerCpuPct: round(((c.broker - prev.broker) / dt) * 100),
      postgresCpuPct: round(((c.postgres - prev.postgres) / dt) * 100),
      publishersCpuPct: round(((c.publishers - prev.publishers) / dt) * 100),
      machineBusyPct: round(((c.machine.busy - prev.machine.busy) / (c.machine.total - prev.machine.total)) * 100 * cores),
      workerRssMB: views.map((v) => {
        const r = rssBytes(v.svc.pid);
        return r === null ? null : round(r / MB);
      }),
    };
    seconds.push(s);
    prev = c;
    if (!steadyFrom && s.tS >= o.warmupS) steadyFrom = { tS: s.tS, stored: [...s.storedByWorker], cpu: c };
    const total = s.storedByWorker.reduce((a, b) => a + b, 0);
    if (s.tS - lastPrint.tS >= 9.99 || now >= endAtMs) {
      const span = s.tS - lastPrint.tS;
      log(
        `${String(Math.round(s.tS)).padStart(5)} ${fmtInt((s.publishedSamples - lastPrint.published) / span).padStart(13)} ${fmtInt((total - lastPrint.stored) / span).padStart(12)} ` +
          `(${s.storedByWorker.map((x) => fmtInt(x)).join(' / ')})`.padEnd(40) +
          `${fmtInt(Math.max(0, s.ackedByBroker - total)).padStart(12)}          ${s.workerCpuPct.join('+')} / ${s.brokerCpuPct} / ${s.postgresCpuPct} / ${s.publishersCpuPct}`,
      );
      lastPrint = { tS: s.tS, stored: total, published: s.publishedSamples };
    }
  }
  const end = seconds.at(-1)!;
  const endCpu = prev;

  // -- stop the units; wait for the workers to drain mosquitto's queue
  for (const c of publishers) c.send({ type: 'stop', drainMs: 60_000 } satisfies ToWorker);
  await pubs.finished;
  if (done.length !== publishers.length) throw new Error('a publisher ended without its report');
  const totals = sumWorkerCounts(done.map((d) => d.counts));
  const drainStart = Date.now();
  const drainDeadline = drainStart + 15 * 60_000;
  let storedTotal = 0;
  // The workers alone (the units idle): their committed rate while at least a tenth of the backlog is left.
  const drainPoints: { tMs: number; stored: number; cpu: number[] }[] = [];
  while (true) {
    const stored = await Promise.all(views.map(storedNow));
    storedTotal = stored.reduce((a, x, i) => a + x - storedAtStart[i], 0);
    drainPoints.push({ tMs: Date.now(), stored: storedTotal, cpu: views.map((v) => treeCpuSeconds(v.svc.pid) ?? 0) });
    if (storedTotal >= totals.ackedSamples) break;
    if (Date.now() > drainDeadline) {
      log(`drain: ${fmtInt(totals.ackedSamples - storedTotal)} samples still not stored after 15 min`);
      break;
    }
    await sleep(500);
  }
  const drainS = round((Date.now() - drainStart) / 1000, 1)!;
  const backlogAtDrain = totals.ackedSamples - (drainPoints[0]?.stored ?? 0);
  const busy = drainPoints.filter((p) => totals.ackedSamples - p.stored >= 0.1 * backlogAtDrain);
  const d0 = busy[0];
  const d1 = busy.at(-1);
  const drainSpanS = d0 && d1 ? (d1.tMs - d0.tMs) / 1000 : 0;
  const drainRate = drainSpanS >= 5 ? round((d1!.stored - d0!.stored) / drainSpanS, 0) : null;
  const drainCpuPct = drainSpanS >= 5 ? d1!.cpu.map((c, i) => round(((c - d0!.cpu[i]) / drainSpanS) * 100)) : null;
  log(`drained mosquitto's backlog in ${drainS} s${drainRate !== null ? `; ${fmtInt(drainRate)} samples/s with the units idle` : ''}`);

  // -- exactly once
  const matched = await countStoredOfAcknowledged(db, done.flatMap((d) => d.acked));
  const rows = Number((await db.query<{ n: string }>('select count(*) as n from innovation_samples')).rows[0].n);
  const duplicates = Number(
    (await db.query<{ n: string }>('select count(*) as n from (select 1 from innovation_samples group by estimator_id, seq having count(*) > 1) d')).rows[0].n,
  );
  const quarantined = Number((await db.query<{ n: string }>('select count(*) as n from quarantine')).rows[0].n);
  // Each partition held by one worker at a time: claims of two workers on one partition never overlap.
  const handovers = Number(
    (
      await db.query<{ n: string }>(
        `select count(*) as n from partition_claims a join partition_claims b on b.partition = a.partition and b.claimed_at > a.claimed_at and b.worker_id <> a.worker_id
          where not exists (select 1 from partition_claims c where c.partition = a.partition and c.claimed_at > a.claimed_at and c.claimed_at < b.claimed_at)`,
      )
    ).rows[0].n,
  );
  const overlaps = Number(
    (
      await db.query<{ n: string }>(
        `select count(*) as n from partition_claims a join partition_claims b on b.partition = a.partition and b.id > a.id and b.worker_id <> a.worker_id
          where a.claimed_at < coalesce(b.released_at, 'infinity') and b.claimed_at < coalesce(a.released_at, 'infinity')`,
      )
    ).rows[0].n,
  );
  const logs = views.map((v) => fs.readFileSync(path.join(logDir, `${v.name}.log`), 'utf8').split('\n'));
  log(`the workers' logs: ${logDir}`);
  const logMessages = countLogMessages(logs.flat().filter((l) => l.trim() !== ''));
  const dropped = broker.droppedMessages();

  for (const v of views) {
    v.svc.child.kill('SIGTERM');
    if (!(await waitForExit(v.svc.child, 30_000))) v.svc.child.kill('SIGKILL');
    v.svc.logStream.end();
  }
  await db.end();

  // -- figures
  const steady = steadyFrom!;
  const steadyS = end.tS - steady.tS;
  const perWorker = views.map((v, i) => ({
    name: v.name,
    partitions: v.claimed.length,
    committedPerS: round((end.storedByWorker[i] - steady.stored[i]) / steadyS, 0)!,
    cpuPct: round(((endCpu.workers[i] - steady.cpu.workers[i]) / steadyS) * 100)!,
    rssMaxMB: Math.max(...seconds.map((s) => s.workerRssMB[i] ?? 0)),
  }));
  const committed = perWorker.reduce((a, w) => a + w.committedPerS, 0);
  const steadyPublished = (end.publishedSamples - (seconds.find((s) => s.tS >= steady.tS)?.publishedSamples ?? 0)) / steadyS;
  const cpuOf = (a: number, b: number) => round(((a - b) / steadyS) * 100);
  const result = {
    bench: 'partitioned',
    date: startedAt.toISOString(),
    commit: gitCommit(),
    machine: { node: process.version, cores, cpuModel: os.cpus()[0]?.model ?? null, memoryGB: round(os.totalmem() / MB / 1024, 1) },
    postgres: { version: pgVersion, settings: pgSettings },
    load: { ...o, offeredSamplesPerS: offered, offeredMessagesPerS: offered / o.batch },
    throughput: {
      steadyWindowS: round(steadyS, 1),
      offeredSamplesPerS: round(steadyPublished, 0),
      committedSamplesPerS: committed,
      committedMessagesPerS: round(committed / o.batch, 0),
      perWorker,
      perPartitionMessagesPerS: round(committed / o.batch / o.partitions, 1),
      // The publishers report their counts once a second, the workers are read each second: near zero, a few hundred either way.
      backlogAtEndSamples: Math.max(0, end.ackedByBroker - end.storedByWorker.reduce((a, b) => a + b, 0)),
      drainS,
      /** The workers' committed rate with the units idle, while at least a tenth of the backlog was left (null: too short a drain to tell). */
      drainSamplesPerS: drainRate,
      drainWindowS: round(drainSpanS, 1),
      drainWorkersCpuPct: drainCpuPct,
    },
    delivery: {
      publishedSamples: totals.publishedSamples,
      acknowledgedByBroker: totals.ackedSamples,
      storedOfAcknowledged: matched,
      lost: totals.ackedSamples - matched,
      storedRows: rows,
      duplicates,
      quarantined,
      handovers,
      claimsOverlapping: overlaps,
      brokerDropped: dropped.length,
    },
    cpu: {
      note: `100 % = one core; the machine has ${cores * 100} %`,
      workersPct: perWorker.map((w) => w.cpuPct),
      mosquittoPct: cpuOf(endCpu.broker, steady.cpu.broker),
      postgresPct: cpuOf(endCpu.postgres, steady.cpu.postgres),
      publishersPct: cpuOf(endCpu.publishers, steady.cpu.publishers),
      machineBusyPct: round((((endCpu.machine.busy - steady.cpu.machine.busy) / (endCpu.machine.total - steady.cpu.machine.total)) * 100 * cores), 1),
      workerUsPerSample: committed ? round((perWorker.reduce((a, w) => a + w.cpuPct, 0) / 100 / committed) * 1e6, 1) : null,
      wholeRunWorkersCpuS: round(endCpu.workers.reduce((a, x, i) => a + x - first.workers[i], 0), 1),
    },
    logMessages: Object.fromEntries([...logMessages.entries()].slice(0, 10)),
    seconds,
  };
  const md = markdown(result);
  console.log('\n' + md);
  if (o.write) {
    const dir = path.join(root, 'ingest/bench/results');
    fs.mkdirSync(dir, { recursive: true });
    fs.writeFileSync(path.join(dir, `partitioned-${o.name}.json`), JSON.stringify(result, null, 2) + '\n');
    fs.writeFileSync(path.join(dir, `partitioned-${o.name}.md`), md);
    log(`wrote ingest/bench/results/partitioned-${o.name}.{json,md}`);
  }
  for (const c of publishers) if (c.exitCode === null) c.kill();
  await broker.destroy();
  process.off('exit', cleanupBroker);
  stopBenchPostgres();
  if (result.delivery.lost !== 0 || duplicates !== 0) process.exitCode = 1;
}

// eslint-disable-next-line @typescript-eslint/no-explicit-any
function markdown(r: any): string {
  const t = r.throughput;
  const d = r.delivery;
  const c = r.cpu;
  const lines: string[] = [];
  lines.push('# Partitioned workers benchmark (`npm run bench:partitioned`)');
  lines.push('');
  lines.push(
    `${r.date} · ${r.commit ? `commit ${r.commit} · ` : ''}Node ${r.machine.node} · ${r.machine.cores} cores (${r.machine.cpuModel}) · ${r.machine.memoryGB} GB · PostgreSQL ${r.postgres.version} · Debian's mosquitto on loopback`,
  );
  lines.push('');
  lines.push(
    `Load: ${fmtInt(r.load.units)} synthetic tractors, each on its own MQTT connection to mosquitto, ${r.load.rate} samples/s in messages of ${r.load.batch} (QoS 1) under their partition's topic: ${fmtInt(r.load.offeredSamplesPerS)} samples/s, ${fmtInt(r.load.offeredMessagesPerS)} messages/s, for ${r.load.durationS} s. ` +
      `${r.load.workers} worker(s) share ${r.load.partitions} partitions; each partition is one persistent MQTT session, whose messages a worker takes one at a time and acknowledges to mosquitto once committed. ` +
      `The workers, mosquitto, PostgreSQL and the publishers share this machine's ${r.machine.cores} cores.`,
  );
  lines.push('');
  lines.push('| figure | value |');
  lines.push('| --- | --- |');
  lines.push(
    `| committed after the ${r.load.warmupS}-s warm-up (${t.steadyWindowS} s) | **${fmtInt(t.committedSamplesPerS)} samples/s** (${fmtInt(t.committedMessagesPerS)} messages/s, ${t.perPartitionMessagesPerS} messages/s per partition session); offered ${fmtInt(t.offeredSamplesPerS)}: ${t.committedSamplesPerS >= 0.98 * t.offeredSamplesPerS ? 'keeps up' : 'the workers are the limit, mosquitto queues the rest'} |`,
  );
  for (const w of t.perWorker) {
    lines.push(`| ${w.name} | ${w.partitions} partitions, **${fmtInt(w.committedPerS)} samples/s**, CPU ${w.cpuPct} %, RSS max ${w.rssMaxMB} MB |`);
  }
  lines.push(`| backlog in mosquitto when the load ended | about ${fmtInt(t.backlogAtEndSamples)} samples; drained in ${t.drainS} s |`);
  if (t.drainSamplesPerS !== null) {
    lines.push(
      `| **draining the backlog, units idle** (the workers' capacity without the simulated units on the same cores) | **${fmtInt(t.drainSamplesPerS)} samples/s** (${fmtInt(t.drainSamplesPerS / r.load.batch)} messages/s, ${round(t.drainSamplesPerS / r.load.batch / r.load.partitions, 1)} per partition session) over ${t.drainWindowS} s; worker CPU ${t.drainWorkersCpuPct.join(' + ')} % |`,
    );
  }
  lines.push(
    `| delivery | ${fmtInt(d.acknowledgedByBroker)} samples acknowledged by mosquitto, ${fmtInt(d.storedOfAcknowledged)} of them stored, **${fmtInt(d.lost)} missing**, **${fmtInt(d.duplicates)} stored twice**; ${fmtInt(d.quarantined)} quarantined; partitions handed from one worker to another: ${d.handovers}, **held by two workers at once: ${d.claimsOverlapping}**; mosquitto notices of dropped messages: ${d.brokerDropped} |`,
  );
  lines.push(
    `| CPU (100 % = one core of ${r.machine.cores * 100} %) | workers ${c.workersPct.join(' + ')} % (${c.workerUsPerSample} µs per sample), mosquitto ${c.mosquittoPct} %, PostgreSQL ${c.postgresPct} %, publishers ${c.publishersPct} %; machine busy ${c.machineBusyPct} % |`,
  );
  const msgs = Object.entries(r.logMessages as Record<string, number>);
  lines.push(`| workers' log at warn or above | ${msgs.length ? msgs.map(([k, v]) => `${k.replace(/\|/g, '\\|')} (${v})`).join('; ') : 'nothing'} |`);
  lines.push('');
  return lines.join('\n') + '\n';
}

main().catch((err) => {
  console.error(`[bench] failed: ${(err as Error).stack ?? err}`);
  cleanupNow();
  process.exit(1);
});
