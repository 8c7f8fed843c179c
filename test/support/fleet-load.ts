// A fleet under load for fault tests: many units, one MQTT connection each, publishing
// batches of simulated innovation samples with QoS 1 as fast as a window of messages
// awaiting PUBACK allows (or at a set pace). Like a real unit, each keeps what was not
// acknowledged and sends it again once it is connected again, and it reconnects by itself.
// The ledger of acknowledged samples, (unit/estimator, seq), is what the tests compare
// with the database: every acknowledged sample must be stored, and stored once.
import type { Knex } from 'knex';
import mqtt, { type MqttClient } from 'mqtt';
import { innovationsTopic } from '../../ingest/src/broker/topics';
import { demoDeviceSecret, demoUnits } from '../../ingest/src/demo/saltmarsh';
import { isMeasurementFault } from '../../simulators/src/faults';
import { PlantFilter, batchPayload, plantDesign, type Fault, type PlantKind } from '../../simulators/src/index';

export interface LoadUnit {
  key: string;
  secret: string;
  estimators: { key: string; kind: PlantKind; revision: number; faults?: Fault[] }[];
}

/** The demo units (seeded by `npm run seed`), optionally only some of them. */
export function demoLoadUnits(filter: (key: string) => boolean = () => true): LoadUnit[] {
  return demoUnits
    .filter((u) => filter(u.key))
    .map((u) => ({
      key: u.key,
      secret: demoDeviceSecret(u.key),
      estimators: u.estimators.map((e) => ({ key: e.key, kind: e.design as PlantKind, revision: e.revision })),
    }));
}

export interface FleetLoadOptions {
  /** mqtt://127.0.0.1:port */
  url: string;
  units: LoadUnit[];
  /** Samples per message (the batch form). Default 10. */
  batchSize?: number;
  /** Messages of one unit awaiting PUBACK at most. Default 4. */
  window?: number;
  /** Each unit sends a message at most this often (ms); 0, the default, as fast as its window allows. */
  intervalMs?: number;
  /** Model time of the first sample (default 3 hours ago; samples are 1 s apart in model time). */
  startTime?: number;
  /** Wait between reconnection attempts (ms, default 300). */
  reconnectMs?: number;
  seed?: number;
}

interface Message {
  id: number;
  topic: string;
  payload: string;
  key: string;
  seqs: number[];
}

interface UnitState {
  unit: LoadUnit;
  client: MqttClient | null;
  connecting: boolean;
  /** Published on the current connection, not yet acknowledged. */
  outstanding: Map<number, Message>;
  /** Not acknowledged on an earlier connection: sent again first. */
  resend: Message[];
  filters: PlantFilter[];
  next: number;
  nextAt: number;
  connections: number;
}

/** `${unit}/${estimator}` */
export type StreamKey = string;

/** Samples acknowledged by the broker: stream → sequence numbers. */
export class AckedSamples {
  readonly byStream = new Map<StreamKey, Set<number>>();

  add(key: StreamKey, seqs: Iterable<number>): void {
    let set = this.byStream.get(key);
    if (!set) this.byStream.set(key, (set = new Set()));
    for (const s of seqs) set.add(s);
  }

  count(): number {
    let n = 0;
    for (const s of this.byStream.values()) n += s.size;
    return n;
  }
}

export class FleetLoad {
  private url: string;
  private readonly units: UnitState[];
  private readonly batchSize: number;
  private readonly window: number;
  private readonly intervalMs: number;
  private readonly reconnectMs: number;
  private readonly acked = new AckedSamples();
  private generating = false;
  private closed = false;
  private timer: NodeJS.Timeout | null = null;
  private messageIds = 0;
  /** Messages acknowledged, samples acknowledged (resends that were acknowledged twice count twice). */
  ackedMessages = 0;
  publishedMessages = 0;
  /** Connections lost (not counting our own disconnects). */
  connectionsLost = 0;

  constructor(options: FleetLoadOptions) {
    this.url = options.url;
    this.batchSize = options.batchSize ?? 10;
    this.window = options.window ?? 4;
    this.intervalMs = options.intervalMs ?? 0;
    this.reconnectMs = options.reconnectMs ?? 300;
    const startTime = options.startTime ?? Date.now() - 3 * 3_600_000;
    this.units = options.units.map((unit, i) => ({
      unit,
      client: null,
      connecting: false,
      outstanding: new Map(),
      resend: [],
      filters: unit.estimators.map(
        (e, j) =>
          new PlantFilter({
            design: plantDesign(e.kind, e.revision),
            seed: (options.seed ?? 1) * 1000 + i * 10 + j,
            startTime,
            faults: e.faults?.filter(isMeasurementFault),
            reference: false,
          }),
      ),
      next: 0,
      nextAt: 0,
      connections: 0,
    }));
  }

  /** Connects every unit; resolves once all are connected. */
  async connect(timeoutMs = 20_000): Promise<void> {
    for (const u of this.units) this.open(u);
    await this.waitUntil(() => this.units.every((u) => u.client?.connected), timeoutMs, 'every unit connected');
  }

  /** Points the units at another broker (a restarted service on new ports); they reconnect there by themselves. */
  retarget(url: string): void {
    this.url = url;
    for (const u of this.units) {
      if (u.client && !u.client.connected) {
        u.client.end(true);
        u.client = null;
        u.connecting = false;
      }
      this.open(u);
    }
  }

  /** Starts (or resumes) making new samples. */
  start(): void {
    this.generating = true;
    if (!this.timer) {
      this.timer = setInterval(() => this.pumpAll(), Math.max(5, Math.min(20, this.intervalMs || 20)));
      this.timer.unref();
    }
    this.pumpAll();
  }

  /** Stops making new samples; what is outstanding is still sent and acknowledged. */
  pause(): void {
    this.generating = false;
  }

  connectedUnits(): number {
    return this.units.filter((u) => u.client?.connected).length;
  }

  /** Messages published and not acknowledged yet (on any connection). */
  unacknowledged(): number {
    return this.units.reduce((a, u) => a + u.outstanding.size + u.resend.length, 0);
  }

  /** Waits until nothing is left unacknowledged; false on timeout. */
  async drain(timeoutMs = 30_000): Promise<boolean> {
    try {
      await this.waitUntil(() => this.unacknowledged() === 0, timeoutMs, 'every message acknowledged');
      return true;
    } catch {
      return false;
    }
  }

  /** Disconnects every unit and stops reconnecting. */
  async close(): Promise<void> {
    this.closed = true;
    this.generating = false;
    if (this.timer) clearInterval(this.timer);
    this.timer = null;
    await Promise.all(this.units.map((u) => (u.client ? u.client.endAsync(true).catch(() => undefined) : undefined)));
  }

  /** The acknowledged samples: stream → sequence numbers. */
  ackedSamples(): Map<StreamKey, Set<number>> {
    return this.acked.byStream;
  }

  ackedSampleCount(): number {
    return this.acked.count();
  }

  /** Samples acknowledged since a snapshot (see snapshot()). */
  ackedSince(before: Map<StreamKey, Set<number>>): Map<StreamKey, number[]> {
    const out = new Map<StreamKey, number[]>();
    for (const [key, seqs] of this.acked.byStream) {
      const old = before.get(key);
      const fresh = [...seqs].filter((s) => !old?.has(s));
      if (fresh.length) out.set(key, fresh);
    }
    return out;
  }

  snapshot(): Map<StreamKey, Set<number>> {
    return new Map([...this.acked.byStream].map(([k, v]) => [k, new Set(v)]));
  }

  private open(u: UnitState): void {
    if (this.closed || u.connecting || u.client?.connected) return;
    u.connecting = true;
    const client = mqtt.connect(this.url, {
      username: u.unit.key,
      password: u.unit.secret,
      clientId: `load-${u.unit.key}-${Math.random().toString(36).slice(2, 8)}`,
      protocolVersion: 4,
      clean: true,
      reconnectPeriod: 0,
      connectTimeout: 5000,
    });
    u.client = client;
    const retry = () => {
      if (u.client !== client) return;
      u.connecting = false;
      // What this connection had not got acknowledged goes out again on the next one.
      if (u.outstanding.size) {
        u.resend.unshift(...[...u.outstanding.values()].sort((a, b) => a.id - b.id));
        u.outstanding.clear();
      }
      u.client = null;
      if (this.closed) return;
      setTimeout(() => this.open(u), this.reconnectMs).unref();
    };
    let wasConnected = false;
    client.on('connect', () => {
      if (u.client !== client) return;
      wasConnected = true;
      u.connecting = false;
      u.connections += 1;
      this.pump(u);
    });
    const lost = () => {
      if (u.client !== client) return;
      if (wasConnected && !this.closed) this.connectionsLost += 1;
      client.end(true);
      retry();
    };
    client.on('error', () => {
      if (!client.connected) lost();
    });
    client.on('close', lost);
  }

  private pumpAll(): void {
    for (const u of this.units) this.pump(u);
  }

  private pump(u: UnitState): void {
    const client = u.client;
    if (!client?.connected) return;
    while (u.outstanding.size < this.window) {
      let msg = u.resend.shift();
      if (!msg) {
        if (!this.generating) return;
        const now = Date.now();
        if (this.intervalMs > 0 && now < u.nextAt) return;
        u.nextAt = Math.max(u.nextAt + this.intervalMs, now - this.intervalMs);
        msg = this.make(u);
      }
      this.send(u, client, msg);
    }
  }

  private make(u: UnitState): Message {
    const i = u.next++ % u.filters.length;
    const filter = u.filters[i];
    const est = u.unit.estimators[i];
    const samples = Array.from({ length: this.batchSize }, () => filter.next());
    return {
      id: ++this.messageIds,
      topic: innovationsTopic(u.unit.key, est.key),
      payload: batchPayload(samples, { rev: est.revision }),
      key: `${u.unit.key}/${est.key}`,
      seqs: samples.map((s) => s.seq),
    };
  }

  private send(u: UnitState, client: MqttClient, msg: Message): void {
    u.outstanding.set(msg.id, msg);
    this.publishedMessages += 1;
    client.publish(msg.topic, msg.payload, { qos: 1 }, (err) => {
      // Only an acknowledgement on the connection it was sent on counts.
      if (err || u.client !== client || !u.outstanding.has(msg.id)) return;
      u.outstanding.delete(msg.id);
      this.ackedMessages += 1;
      this.acked.add(msg.key, msg.seqs);
      this.pump(u);
    });
  }

  private async waitUntil(cond: () => boolean | undefined, timeoutMs: number, what: string): Promise<void> {
    const deadline = Date.now() + timeoutMs;
    while (!cond()) {
      if (Date.now() > deadline) throw new Error(`fleet load: timed out waiting for ${what}`);
      await new Promise((r) => setTimeout(r, 50));
    }
  }
}

/** How many times each (unit/estimator, seq) is stored. */
export async function storedSamples(knex: Knex, unitKeys?: string[]): Promise<Map<StreamKey, Map<number, number>>> {
  const q = knex('innovation_samples as s')
    .join('estimators as e', 'e.id', 's.estimator_id')
    .join('units as u', 'u.id', 'e.unit_id')
    .groupBy('u.key', 'e.key', 's.seq')
    .select('u.key as unit', 'e.key as estimator', 's.seq')
    .count<{ unit: string; estimator: string; seq: string; count: string }[]>('* as count');
  if (unitKeys) q.whereIn('u.key', unitKeys);
  const out = new Map<StreamKey, Map<number, number>>();
  for (const r of await q) {
    const key = `${r.unit}/${r.estimator}`;
    let m = out.get(key);
    if (!m) out.set(key, (m = new Map()));
    m.set(Number(r.seq), Number(r.count));
  }
  return out;
}

/** Acknowledged samples missing from the database, and samples stored more than once. */
export function compareWithStored(
  acked: Map<StreamKey, Set<number> | number[]>,
  stored: Map<StreamKey, Map<number, number>>,
): { ackedCount: number; storedCount: number; missing: string[]; duplicates: string[] } {
  const missing: string[] = [];
  const duplicates: string[] = [];
  let ackedCount = 0;
  let storedCount = 0;
  for (const [key, seqs] of acked) {
    const s = stored.get(key);
    for (const seq of seqs) {
      ackedCount += 1;
      if (!s?.has(seq)) missing.push(`${key}#${seq}`);
    }
  }
  for (const [key, m] of stored) {
    for (const [seq, n] of m) {
      storedCount += 1;
      if (n > 1) duplicates.push(`${key}#${seq}×${n}`);
    }
  }
  return { ackedCount, storedCount, missing, duplicates };
}
