// Publishes simulated innovation samples over MQTT (QoS 1), one connection per unit
// with the unit's own credentials (username = unit key), on
// whitecap/v1/units/{unit}/estimators/{estimator}/innovations.
//
//   startFleet(options)      many units at a steady rate per estimator, until stop()
//   publishSamples(options)  N samples of one estimator as fast as the broker acknowledges them
//   UnitConnection           one unit's connection, for tests that publish their own payloads
import mqtt, { type MqttClient } from 'mqtt';
import { randomBytes } from 'node:crypto';
import { innovationsTopic } from '../../ingest/src/broker/topics';
import { faultApplies, isMeasurementFault, isMessageFault, type Fault, type FleetFault } from './faults';
import { MessageShaper, type OutgoingMessage } from './message-faults';
import { batchPayload, MAX_BATCH_SIZE, singlePayload, type PayloadOptions, type SimulatedSample, type TimeFormat } from './payload';
import { PlantFilter } from './plant-filter';
import { plantDesign, type PlantKind } from './plant-models';
import { seedOf, SeededRandom } from './random';
import type { SimulatedUnit } from './saltmarsh-fleet';

/** The broker refused the unit's credentials (MQTT CONNACK return code 4 or 5), or another refusal. */
export class ConnectionRefusedError extends Error {
  override readonly name = 'ConnectionRefusedError';
  constructor(
    readonly unit: string,
    readonly returnCode: number,
    message: string,
  ) {
    super(message);
  }
}

export interface UnitConnectionOptions {
  url: string;
  unit: string;
  secret: string;
  /** Default whitecap-sim-{unit}-{random}. */
  clientId?: string;
  /** Milliseconds between reconnection attempts after a lost connection (default 2000). */
  reconnectPeriodMs?: number;
  /** Milliseconds to wait for the broker's CONNACK (default 10000). */
  connectTimeoutMs?: number;
  onError?: (error: Error) => void;
}

/** One unit's MQTT connection, counting what it published and what the broker acknowledged. */
export class UnitConnection {
  readonly unit: string;
  readonly client: MqttClient;
  published = 0;
  acked = 0;
  failed = 0;
  /** Set when the broker refused the connection; no retry follows. */
  refused: ConnectionRefusedError | null = null;
  private readonly firstConnect: Promise<void>;
  private abandonFirstConnect: (err: Error) => void = () => undefined;
  private drainWaiters: (() => void)[] = [];
  private windowWaiters: { limit: number; resolve: () => void }[] = [];

  constructor(options: UnitConnectionOptions) {
    this.unit = options.unit;
    this.client = mqtt.connect(options.url, {
      username: options.unit,
      password: options.secret,
      clientId: options.clientId ?? `whitecap-sim-${options.unit}-${randomBytes(4).toString('hex')}`,
      protocolVersion: 4,
      clean: true,
      reconnectPeriod: options.reconnectPeriodMs ?? 2000,
      connectTimeout: options.connectTimeoutMs ?? 10_000,
      reconnectOnConnackError: false,
    });
    this.firstConnect = new Promise<void>((resolve, reject) => {
      this.abandonFirstConnect = reject;
      this.client.once('connect', () => resolve());
      this.client.on('error', (err: Error & { code?: unknown }) => {
        const code = typeof err.code === 'number' ? err.code : undefined;
        if (code !== undefined && !this.client.connected && !this.refused) {
          const why = code === 4 || code === 5 ? 'bad username or secret, or no credential for this unit' : err.message;
          this.refused = new ConnectionRefusedError(this.unit, code, `${this.unit}: the broker refused the connection (${why})`);
          reject(this.refused);
        }
        options.onError?.(this.refused ?? err);
      });
    });
    // a refusal before anyone asks must not become an unhandled rejection
    this.firstConnect.catch(() => undefined);
  }

  get isConnected(): boolean {
    return this.client.connected;
  }

  /** Messages published but not yet acknowledged. */
  get inFlight(): number {
    return this.published - this.acked - this.failed;
  }

  /** Resolves once the unit is connected; rejects when the broker refuses it or within timeoutMs. */
  connected(timeoutMs = 15_000): Promise<void> {
    let timer: NodeJS.Timeout | undefined;
    const timeout = new Promise<never>((_, reject) => {
      timer = setTimeout(() => reject(new Error(`${this.unit}: not connected within ${timeoutMs} ms`)), timeoutMs);
    });
    return Promise.race([this.firstConnect, timeout]).finally(() => clearTimeout(timer));
  }

  /** Publishes with QoS 1; the PUBACK is counted in `acked`. */
  publish(topic: string, payload: string): void {
    this.published += 1;
    this.client.publish(topic, payload, { qos: 1 }, (err) => {
      if (err) this.failed += 1;
      else this.acked += 1;
      this.settle();
    });
  }

  /** Resolves once no more than `limit` messages are in flight. */
  whenInFlightAtMost(limit: number): Promise<void> {
    if (this.inFlight <= limit) return Promise.resolve();
    return new Promise((resolve) => this.windowWaiters.push({ limit, resolve }));
  }

  /** Waits until every published message is acknowledged (or failed); false on timeout. */
  async drain(timeoutMs = 5000): Promise<boolean> {
    if (this.inFlight === 0) return true;
    let timer: NodeJS.Timeout | undefined;
    const done = new Promise<boolean>((resolve) => this.drainWaiters.push(() => resolve(true)));
    const late = new Promise<boolean>((resolve) => (timer = setTimeout(() => resolve(false), timeoutMs)));
    const ok = await Promise.race([done, late]);
    clearTimeout(timer);
    return ok;
  }

  async close(): Promise<void> {
    this.abandonFirstConnect(new Error(`${this.unit}: closed before it connected`));
    await this.client.endAsync(true);
    this.settle(true);
  }

  private settle(closing = false): void {
    const inFlight = this.inFlight;
    if (this.windowWaiters.length) {
      const waiting = this.windowWaiters;
      this.windowWaiters = [];
      for (const w of waiting) {
        if (closing || inFlight <= w.limit) w.resolve();
        else this.windowWaiters.push(w);
      }
    }
    if ((inFlight === 0 || closing) && this.drainWaiters.length) {
      const waiting = this.drainWaiters;
      this.drainWaiters = [];
      for (const resolve of waiting) resolve();
    }
  }
}

/** One simulated estimator: its plant and filter, its message faults and its encoding. */
class EstimatorStream {
  readonly topic: string;
  readonly generator: PlantFilter;
  readonly shaper: MessageShaper | null;
  private batch: SimulatedSample[] = [];

  constructor(
    unit: string,
    estimator: string,
    kind: PlantKind,
    revision: number,
    faults: readonly Fault[],
    seed: number,
    startTime: number,
    reference: boolean,
    readonly batchSize: number,
    readonly payloadOptions: PayloadOptions,
  ) {
    this.topic = innovationsTopic(unit, estimator);
    this.generator = new PlantFilter({
      design: plantDesign(kind, revision),
      seed: seedOf(seed, unit, estimator, 'plant'),
      faults: faults.filter(isMeasurementFault),
      startTime,
      reference,
    });
    const messageFaults = faults.filter(isMessageFault);
    this.shaper = messageFaults.length
      ? new MessageShaper(messageFaults, seedOf(seed, unit, estimator, 'messages'), payloadOptions)
      : null;
  }

  /** The payloads one new sample turns into (none while a batch fills). */
  step(t: number, elapsedS: number): { payloads: string[]; samples: number } {
    const sample = this.generator.next(t);
    const messages: OutgoingMessage[] = this.shaper ? this.shaper.shape(sample, elapsedS) : [{ kind: 'sample', sample }];
    return this.encode(messages);
  }

  /** Payloads still held back: a reordered sample, a part-filled batch. */
  flush(): { payloads: string[]; samples: number } {
    const out = this.encode(this.shaper ? this.shaper.release() : []);
    if (this.batch.length) {
      out.payloads.push(batchPayload(this.batch, this.payloadOptions));
      out.samples += this.batch.length;
      this.batch = [];
    }
    return out;
  }

  private encode(messages: OutgoingMessage[]): { payloads: string[]; samples: number } {
    const payloads: string[] = [];
    let samples = 0;
    for (const msg of messages) {
      if (msg.kind === 'malformed') {
        payloads.push(msg.payload);
      } else if (this.batchSize <= 1) {
        payloads.push(singlePayload(msg.sample, this.payloadOptions));
        samples += 1;
      } else {
        this.batch.push(msg.sample);
        if (this.batch.length >= this.batchSize) {
          payloads.push(batchPayload(this.batch, this.payloadOptions));
          samples += this.batch.length;
          this.batch = [];
        }
      }
    }
    return { payloads, samples };
  }
}

export interface FleetOptions {
  /** Broker URL, e.g. mqtt://127.0.0.1:1886. */
  url: string;
  units: readonly SimulatedUnit[];
  /** Samples per second per estimator (default 1). */
  rate?: number;
  /** Samples per message: 1 publishes the single form, more the batch form (≤ 1000). Default 1. */
  batchSize?: number;
  /** Faults aimed at units and estimators; schedules count seconds from startFleet. */
  faults?: readonly FleetFault[];
  /** Seed of every plant, filter and fault draw (default 1). */
  seed?: number;
  /** Publish e and P (the reference error and its covariance) too (default true). */
  reference?: boolean;
  /** How t is written (default epoch-ms). */
  time?: TimeFormat;
  /** A unit stops generating while more than this many of its messages await PUBACK (default 10000). */
  maxInFlightPerUnit?: number;
  /** At most this many seconds of samples are made up after a stall; older ones are skipped (default 5). */
  maxCatchUpS?: number;
  onError?: (unit: string, error: Error) => void;
}

export interface FleetStats {
  units: number;
  estimators: number;
  /** Units connected now. */
  connected: number;
  /** Units the broker refused. */
  refused: number;
  /** Samples the filters produced. */
  generated: number;
  /** MQTT messages handed to the client (valid, duplicated and malformed). */
  published: number;
  /** Messages the broker acknowledged (PUBACK). */
  acked: number;
  failed: number;
  /** Sample records carried by published valid messages (duplicates count twice). */
  samples: number;
  /** Samples never published by a fault (dropout, silence, malformed). */
  withheld: number;
  duplicated: number;
  reordered: number;
  malformed: number;
  /** Samples lost while the unit was disconnected. */
  lostOffline: number;
  /** Samples not generated because the simulator fell behind (no sequence gap results). */
  skipped: number;
}

export interface RunningFleet {
  /** Resolves once every unit has connected; rejects on the first refusal. */
  connected(timeoutMs?: number): Promise<void>;
  stats(): FleetStats;
  /** Stops generating, publishes what is held back, waits up to drainMs for PUBACKs, disconnects. */
  stop(options?: { drainMs?: number }): Promise<FleetStats>;
}

interface UnitRuntime {
  key: string;
  connection: UnitConnection;
  startedAt: number | null;
  estimators: { stream: EstimatorStream; phase: number; generated: number }[];
}

/** Starts a fleet publishing at a steady rate; returns at once (see `connected()`). */
export function startFleet(options: FleetOptions): RunningFleet {
  const rate = options.rate ?? 1;
  const batchSize = options.batchSize ?? 1;
  const seed = options.seed ?? 1;
  const maxInFlight = options.maxInFlightPerUnit ?? 10_000;
  const maxBacklog = Math.max(1, Math.ceil(rate * (options.maxCatchUpS ?? 5)));
  const faults = options.faults ?? [];
  if (!(rate > 0 && Number.isFinite(rate))) throw new RangeError(`rate must be a positive number of samples per second, got ${rate}`);
  if (!Number.isInteger(batchSize) || batchSize < 1 || batchSize > MAX_BATCH_SIZE) {
    throw new RangeError(`batchSize must be an integer from 1 to ${MAX_BATCH_SIZE}, got ${batchSize}`);
  }
  const start = Date.now();
  const payloadOptions = (revision: number): PayloadOptions => ({ rev: revision, time: options.time ?? 'epoch-ms' });
  const phases = new SeededRandom(seedOf(seed, 'phases'));
  const counts = { offline: 0, skipped: 0, samples: 0 };

  const units: UnitRuntime[] = options.units.map((u) => ({
    key: u.key,
    connection: new UnitConnection({
      url: options.url,
      unit: u.key,
      secret: u.secret,
      onError: (err) => options.onError?.(u.key, err),
    }),
    startedAt: null,
    estimators: u.estimators.map((e) => ({
      stream: new EstimatorStream(
        u.key,
        e.key,
        e.kind,
        e.revision,
        faults.filter((f) => faultApplies(f, u.key, e.key)).map((f) => f.fault),
        seed,
        start,
        options.reference ?? true,
        batchSize,
        payloadOptions(e.revision),
      ),
      // spreads the fleet's samples over each period instead of one burst
      phase: phases.uniform(),
      generated: 0,
    })),
  }));

  const tickMs = Math.min(100, Math.max(10, Math.floor(1000 / rate)));
  const tick = (): void => {
    const now = Date.now();
    for (const unit of units) {
      const { connection } = unit;
      if (unit.startedAt === null) {
        if (!connection.isConnected) continue;
        // each estimator's clock starts when its unit first connects
        unit.startedAt = now;
      }
      if (connection.isConnected && connection.inFlight > maxInFlight) continue;
      for (const est of unit.estimators) {
        const due = Math.floor(((now - unit.startedAt) / 1000) * rate + est.phase);
        let backlog = due - est.generated;
        if (backlog > maxBacklog) {
          counts.skipped += backlog - maxBacklog;
          est.generated += backlog - maxBacklog;
          backlog = maxBacklog;
        }
        for (; backlog > 0; backlog--) {
          est.generated += 1;
          const t = Math.round(unit.startedAt + ((est.generated - est.phase) / rate) * 1000);
          const out = est.stream.step(t, (t - start) / 1000);
          if (!connection.isConnected) {
            counts.offline += 1;
            continue;
          }
          counts.samples += out.samples;
          for (const p of out.payloads) connection.publish(est.stream.topic, p);
        }
      }
    }
  };
  const timer = setInterval(tick, tickMs);

  const stats = (): FleetStats => {
    const s: FleetStats = {
      units: units.length,
      estimators: 0,
      connected: 0,
      refused: 0,
      generated: 0,
      published: 0,
      acked: 0,
      failed: 0,
      samples: counts.samples,
      withheld: 0,
      duplicated: 0,
      reordered: 0,
      malformed: 0,
      lostOffline: counts.offline,
      skipped: counts.skipped,
    };
    for (const u of units) {
      s.connected += u.connection.isConnected ? 1 : 0;
      s.refused += u.connection.refused ? 1 : 0;
      s.published += u.connection.published;
      s.acked += u.connection.acked;
      s.failed += u.connection.failed;
      for (const e of u.estimators) {
        s.estimators += 1;
        s.generated += e.stream.generator.seq - 1;
        const shaped = e.stream.shaper?.stats();
        if (shaped) {
          s.withheld += shaped.withheld;
          s.duplicated += shaped.duplicated;
          s.reordered += shaped.reordered;
          s.malformed += shaped.malformed;
        }
      }
    }
    return s;
  };
  let stopped: Promise<FleetStats> | null = null;
  return {
    connected: async (timeoutMs = 15_000) => {
      await Promise.all(units.map((u) => u.connection.connected(timeoutMs)));
    },
    stats,
    stop: (stopOptions = {}) => {
      stopped ??= (async () => {
        clearInterval(timer);
        for (const unit of units) {
          if (!unit.connection.isConnected) continue;
          for (const est of unit.estimators) {
            const out = est.stream.flush();
            counts.samples += out.samples;
            for (const p of out.payloads) unit.connection.publish(est.stream.topic, p);
          }
        }
        const drainMs = stopOptions.drainMs ?? 2000;
        await Promise.all(units.map((u) => (u.connection.isConnected ? u.connection.drain(drainMs) : true)));
        await Promise.all(units.map((u) => u.connection.close()));
        return stats();
      })();
      return stopped;
    },
  };
}

export interface PublishSamplesOptions {
  url: string;
  unit: string;
  secret: string;
  estimator: string;
  kind: PlantKind;
  /** Design revision the filter runs (default 1). */
  revision?: number;
  /** How many samples to generate. */
  count: number;
  /** Samples per message (default 1: the single form). */
  batchSize?: number;
  seed?: number;
  /** Faults for this estimator; schedules in seconds count on the sample clock below. */
  faults?: readonly Fault[];
  reference?: boolean;
  time?: TimeFormat;
  /**
   * Sample times: 'wall' stamps each sample with the time it is made (default);
   * 'model' stamps sample k at startTime + k·1 s, the plant's own clock.
   */
  clock?: 'wall' | 'model';
  /** Epoch ms of sample 0 on the model clock (default: now − count seconds, so the last sample is now). */
  startTime?: number;
  /** Messages allowed in flight before waiting for PUBACKs (default 1000). */
  maxInFlight?: number;
  /** Reuse an open connection instead of opening (and closing) one. */
  connection?: UnitConnection;
}

export interface PublishSamplesResult {
  /** Samples generated (sequence numbers 1 … generated). */
  generated: number;
  /** Sample records in published valid messages. */
  samples: number;
  /** Messages published and acknowledged. */
  published: number;
  acked: number;
  elapsedMs: number;
}

/** Publishes `count` samples of one estimator as fast as the broker acknowledges them; resolves after the last PUBACK. */
export async function publishSamples(options: PublishSamplesOptions): Promise<PublishSamplesResult> {
  const began = performance.now();
  const clock = options.clock ?? 'wall';
  const startTime = options.startTime ?? (clock === 'model' ? Date.now() - options.count * 1000 : Date.now());
  const revision = options.revision ?? 1;
  const batchSize = options.batchSize ?? 1;
  if (!Number.isInteger(batchSize) || batchSize < 1 || batchSize > MAX_BATCH_SIZE) {
    throw new RangeError(`batchSize must be an integer from 1 to ${MAX_BATCH_SIZE}, got ${batchSize}`);
  }
  const stream = new EstimatorStream(
    options.unit,
    options.estimator,
    options.kind,
    revision,
    options.faults ?? [],
    options.seed ?? 1,
    startTime,
    options.reference ?? true,
    batchSize,
    { rev: revision, time: options.time ?? 'epoch-ms' },
  );
  const own = !options.connection;
  const connection =
    options.connection ?? new UnitConnection({ url: options.url, unit: options.unit, secret: options.secret });
  const publishedBefore = connection.published;
  const ackedBefore = connection.acked;
  const window = options.maxInFlight ?? 1000;
  let samples = 0;
  try {
    await connection.connected();
    for (let k = 1; k <= options.count; k++) {
      const t = clock === 'model' ? startTime + k * 1000 : Date.now();
      const out = stream.step(t, (t - startTime) / 1000);
      samples += out.samples;
      for (const p of out.payloads) connection.publish(stream.topic, p);
      if (connection.inFlight > window) await connection.whenInFlightAtMost(window >> 1);
    }
    const rest = stream.flush();
    samples += rest.samples;
    for (const p of rest.payloads) connection.publish(stream.topic, p);
    await connection.drain(60_000);
  } finally {
    if (own) await connection.close();
  }
  return {
    generated: options.count,
    samples,
    published: connection.published - publishedBefore,
    acked: connection.acked - ackedBefore,
    elapsedMs: performance.now() - began,
  };
}
