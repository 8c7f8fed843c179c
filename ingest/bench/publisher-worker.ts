// A publisher process of the ingest benchmark (forked by ingest-bench.ts): a slice of
// the synthetic fleet, one MQTT connection per unit with its own credentials, a real
// Kalman filter per estimator (the simulator's PlantFilter), QoS 1. It times every
// message from publish to PUBACK (the service sends the PUBACK after the commit, so this
// is publish-to-commit) and reports counts every second.
import mqtt, { type MqttClient } from 'mqtt';
import { monitorEventLoopDelay } from 'node:perf_hooks';
import { innovationsTopic, partitionedInnovationsTopic, unitPartition } from '../src/broker/topics';
import { batchPayload, singlePayload, type SimulatedSample } from '../../simulators/src/payload';
import { PlantFilter } from '../../simulators/src/plant-filter';
import { plantDesign } from '../../simulators/src/plant-models';
import { seedOf } from '../../simulators/src/random';
import { syntheticTractors } from '../../simulators/src/saltmarsh-fleet';
import { benchSecretFor, schedule, type AckedRanges, type FromWorker, type ToWorker, type WorkerConfig, type WorkerCounts } from './bench-fleet';
import { LatencyHistogram } from './latency-histogram';

const send = (m: FromWorker) => process.send?.(m);

interface Unit {
  index: number;
  key: string;
  secret: string;
  topic: string;
  client: MqttClient | null;
  filter: PlantFilter | null;
  phase: number;
  generated: number;
  inFlight: number;
  /** acked[seq] = 1 once the message carrying sample seq was acknowledged. */
  acked: Uint8Array;
  batch: SimulatedSample[];
  faulty: boolean;
  faultReported: boolean;
}

const counts: WorkerCounts = {
  publishedMessages: 0,
  ackedMessages: 0,
  publishedSamples: 0,
  ackedSamples: 0,
  inFlightMessages: 0,
  skippedSamples: 0,
  windowFullTicks: 0,
  disconnects: 0,
  errors: 0,
};
const publishToAck = new LatencyHistogram();
const steadyPublishToAck = new LatencyHistogram();
let steadyAtMs = Number.POSITIVE_INFINITY;
/** The last second's PUBACK latencies (reset with each progress report). */
let recent = new LatencyHistogram();
const sampleToAck = new LatencyHistogram();
const loop = monitorEventLoopDelay({ resolution: 10 });
loop.enable();

let config: WorkerConfig;
let plan: ReturnType<typeof schedule>;
let units: Unit[] = [];
let tickTimer: NodeJS.Timeout | null = null;
let progressTimer: NodeJS.Timeout | null = null;
let drainWaiter: (() => void) | null = null;
let failedMessages = 0;
const errorKinds = new Map<string, number>();
const noteError = (what: string) => errorKinds.set(what, (errorKinds.get(what) ?? 0) + 1);

function connect(u: Unit): Promise<void> {
  return new Promise((resolve, reject) => {
    const client = mqtt.connect(config.url, {
      username: u.key,
      password: u.secret,
      clientId: `bench-${u.key}`,
      protocolVersion: 4,
      clean: true,
      keepalive: 60,
      reconnectPeriod: 1000,
      connectTimeout: 30_000,
      reconnectOnConnackError: false,
    });
    u.client = client;
    let first = true;
    client.on('connect', () => {
      if (first) {
        first = false;
        resolve();
      }
    });
    client.on('close', () => {
      if (!first) counts.disconnects += 1;
    });
    client.on('error', (err) => {
      counts.errors += 1;
      noteError(`connection: ${err.message}`);
      if (first) reject(new Error(`${u.key}: ${err.message}`));
    });
  });
}

function publish(u: Unit, samples: SimulatedSample[]): void {
  const payload = samples.length === 1 && config.batch === 1 ? singlePayload(samples[0], { rev: 1 }) : batchPayload(samples, { rev: 1 });
  const oldestT = samples[0].t;
  const n = samples.length;
  const firstSeq = samples[0].seq;
  counts.publishedMessages += 1;
  counts.publishedSamples += n;
  u.inFlight += 1;
  const began = performance.now();
  const steady = Date.now() >= steadyAtMs;
  u.client!.publish(u.topic, payload, { qos: 1 }, (err) => {
    u.inFlight -= 1;
    if (err) {
      counts.errors += 1;
      failedMessages += 1;
      noteError(`publish: ${err.message}`);
    } else {
      const ms = performance.now() - began;
      publishToAck.record(ms);
      if (steady) steadyPublishToAck.record(ms);
      recent.record(ms);
      sampleToAck.record(Date.now() - oldestT);
      counts.ackedMessages += 1;
      counts.ackedSamples += n;
      markAcked(u, firstSeq, n);
    }
    if (drainWaiter && counts.ackedMessages + failedMessages >= counts.publishedMessages) drainWaiter();
  });
}


function markAcked(u: Unit, firstSeq: number, n: number): void {
  const last = firstSeq + n - 1;
  if (last >= u.acked.length) {
    const grown = new Uint8Array(Math.max(u.acked.length * 2, last + 1));
    grown.set(u.acked);
    u.acked = grown;
  }
  u.acked.fill(1, firstSeq, last + 1);
}

/** Each unit's acknowledged sample numbers as ranges [from, to] (runs of consecutive seq). */
function ackedRanges(): AckedRanges[] {
  return units.map((u) => {
    const ranges: [number, number][] = [];
    let start = -1;
    for (let seq = 0; seq <= u.acked.length; seq++) {
      const on = seq < u.acked.length && u.acked[seq] === 1;
      if (on && start < 0) start = seq;
      else if (!on && start >= 0) {
        ranges.push([start, seq - 1]);
        start = -1;
      }
    }
    return { unitKey: u.key, ranges };
  });
}

function tick(startAtMs: number, faultAtMs: number): void {
  const now = Date.now();
  const { rate, batch } = config;
  const maxBacklog = Math.max(1, Math.ceil(rate * 5));
  for (const u of units) {
    if (u.inFlight > config.maxInFlightPerUnit) {
      counts.windowFullTicks += 1;
      continue;
    }
    const due = Math.floor(plan.due((now - startAtMs) / 1000) + u.phase);
    let backlog = due - u.generated;
    if (backlog > maxBacklog) {
      counts.skippedSamples += backlog - maxBacklog;
      u.generated += backlog - maxBacklog;
      backlog = maxBacklog;
    }
    for (; backlog > 0; backlog--) {
      u.generated += 1;
      const t = Math.round(startAtMs + plan.timeOf(u.generated - u.phase) * 1000);
      const sample = u.filter!.next(t);
      if (u.faulty && !u.faultReported && t >= faultAtMs) {
        u.faultReported = true;
        send({ type: 'fault', unitIndex: u.index, unitKey: u.key, seq: sample.seq, tMs: t });
      }
      u.batch.push(sample);
      if (u.batch.length >= batch) {
        publish(u, u.batch);
        u.batch = [];
      }
    }
  }
}

function progress(): void {
  counts.inFlightMessages = units.reduce((a, u) => a + u.inFlight, 0);
  const usage = process.cpuUsage();
  const last = recent;
  recent = new LatencyHistogram();
  send({
    recentP99Ms: last.quantile(0.99),
    recentMaxMs: last.count ? last.maxMs : null,
    type: 'progress',
    atMs: Date.now(),
    counts: { ...counts },
    loopDelayP99Ms: loop.percentile(99) / 1e6,
    cpuSeconds: (usage.user + usage.system) / 1e6,
    systemCpuSeconds: usage.system / 1e6,
  });
}

async function start(c: WorkerConfig): Promise<void> {
  config = c;
  const secretFor = benchSecretFor(c.runKey);
  const fleet = syntheticTractors(c.totalUnits, secretFor).slice(c.from, c.to);
  const faulty = new Set(c.faultUnits);
  units = fleet.map((f, i) => ({
    index: c.from + i,
    key: f.key,
    secret: f.secret,
    // Behind an external broker with partitioned workers, a unit publishes under its partition (as provisioned).
    topic: c.partitions
      ? partitionedInnovationsTopic(unitPartition(f.key, c.partitions), f.key, f.estimators[0].key)
      : innovationsTopic(f.key, f.estimators[0].key),
    client: null,
    filter: null,
    // spreads each unit's samples over the period instead of one burst per tick
    phase: (((c.from + i) * 0.618033988749895) % 1 + 1) % 1,
    generated: 0,
    inFlight: 0,
    batch: [],
    faulty: faulty.has(c.from + i),
    faultReported: false,
    acked: new Uint8Array(1024),
  }));
  const began = performance.now();
  let next = 0;
  const lanes = Array.from({ length: Math.min(c.connectConcurrency, units.length) }, async () => {
    while (next < units.length) await connect(units[next++]);
  });
  await Promise.all(lanes);
  send({ type: 'connected', units: units.length, ms: performance.now() - began });
}

function go(startAtMs: number, faultAtMs: number): void {
  plan = schedule(config.rate, config.rampS);
  for (const u of units) {
    u.filter = new PlantFilter({
      design: plantDesign('tractor-position', 1),
      seed: seedOf(config.seed, u.key, 'position', 'plant'),
      startTime: startAtMs,
      reference: config.reference,
      faults: u.faulty ? [{ kind: 'noise', factor: config.faultFactor, when: { fromS: (faultAtMs - startAtMs) / 1000 } }] : [],
    });
  }
  const wait = Math.max(0, startAtMs - Date.now());
  setTimeout(() => {
    tickTimer = setInterval(() => tick(startAtMs, faultAtMs), 10);
    progressTimer = setInterval(progress, 1000);
    progress();
  }, wait);
}

async function stop(drainMs: number): Promise<void> {
  if (tickTimer) clearInterval(tickTimer);
  for (const u of units) {
    if (u.batch.length) {
      publish(u, u.batch);
      u.batch = [];
    }
  }
  const drained = await new Promise<boolean>((resolve) => {
    if (counts.ackedMessages + failedMessages >= counts.publishedMessages) return resolve(true);
    const timer = setTimeout(() => resolve(false), drainMs);
    drainWaiter = () => {
      clearTimeout(timer);
      resolve(true);
    };
  });
  if (progressTimer) clearInterval(progressTimer);
  progress();
  loop.disable();
  send({
    type: 'done',
    counts: { ...counts, inFlightMessages: units.reduce((a, u) => a + u.inFlight, 0) },
    drained,
    publishToAck: publishToAck.toJSON(),
    steadyPublishToAck: steadyPublishToAck.toJSON(),
    sampleToAck: sampleToAck.toJSON(),
    loopDelay: { p50Ms: loop.percentile(50) / 1e6, p99Ms: loop.percentile(99) / 1e6, maxMs: loop.max / 1e6 },
    acked: ackedRanges(),
    errorKinds: Object.fromEntries(errorKinds),
  });
  await Promise.all(units.map((u) => u.client?.endAsync(true).catch(() => undefined)));
  process.exit(0);
}

process.on('message', (m: ToWorker) => {
  const fail = (err: Error) => {
    send({ type: 'error', message: err.message });
    process.exit(1);
  };
  if (m.type === 'config') start(m.config).catch(fail);
  else if (m.type === 'go') {
    steadyAtMs = m.steadyAtMs;
    go(m.startAtMs, m.faultAtMs);
  }
  else if (m.type === 'stop') stop(m.drainMs).catch(fail);
});
// The benchmark is gone (Ctrl-C, crash): do not outlive it.
process.on('disconnect', () => process.exit(0));
