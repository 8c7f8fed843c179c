// Units publishing to their partition topics on an external broker, for the scale-out
// tests: one MQTT connection per unit, batches of simulated innovation samples with QoS 1
// at a set pace and a window of messages awaiting PUBACK. The ledger of what the broker
// acknowledged, (unit/estimator, seq), is what the tests compare with the database.
// A connection that drops is a test failure here (the broker does not restart in these
// tests), counted in `connectionsLost`.
import mqtt, { type MqttClient } from 'mqtt';
import { partitionedInnovationsTopic } from '../../ingest/src/broker/topics';
import { PlantFilter, batchPayload, plantDesign } from '../../simulators/src/index';
import { AckedSamples, type LoadUnit, type StreamKey } from './fleet-load';

export interface PartitionedLoadOptions {
  url: string;
  units: (LoadUnit & { partition: number })[];
  batchSize: number;
  /** Each unit sends a message this often (ms). */
  intervalMs: number;
  /** Messages of one unit awaiting PUBACK at most. */
  window: number;
  /** Model time of the first sample (samples are 1 s apart in model time). */
  startTime: number;
}

interface UnitState {
  unit: LoadUnit & { partition: number };
  client: MqttClient | null;
  filters: PlantFilter[];
  outstanding: number;
  next: number;
}

export class PartitionedLoad {
  private readonly units: UnitState[];
  private readonly acked = new AckedSamples();
  private readonly highest = new Map<StreamKey, number>();
  private timer: NodeJS.Timeout | null = null;
  private generating = false;
  connectionsLost = 0;
  publishErrors = 0;

  constructor(private readonly o: PartitionedLoadOptions) {
    this.units = o.units.map((unit, i) => ({
      unit,
      client: null,
      outstanding: 0,
      next: 0,
      filters: unit.estimators.map(
        (e, j) => new PlantFilter({ design: plantDesign(e.kind, e.revision), seed: 7000 + i * 10 + j, startTime: o.startTime, reference: false }),
      ),
    }));
  }

  async connect(): Promise<void> {
    await Promise.all(
      this.units.map(
        (u) =>
          new Promise<void>((resolve, reject) => {
            const client = mqtt.connect(this.o.url, {
              clientId: `scale-${u.unit.key}-${Math.random().toString(36).slice(2, 8)}`,
              username: u.unit.key,
              password: u.unit.secret,
              clean: true,
              reconnectPeriod: 0,
              connectTimeout: 5000,
            });
            u.client = client;
            client.once('connect', () => resolve());
            client.on('error', (err) => {
              if (!client.connected) reject(err);
            });
            client.on('close', () => {
              if (this.timer) this.connectionsLost += 1;
            });
          }),
      ),
    );
  }

  start(): void {
    this.generating = true;
    this.timer ??= setInterval(() => {
      if (!this.generating) return;
      for (const u of this.units) this.send(u);
    }, this.o.intervalMs);
  }

  pause(): void {
    this.generating = false;
  }

  unacknowledged(): number {
    return this.units.reduce((a, u) => a + u.outstanding, 0);
  }

  async drain(timeoutMs: number): Promise<boolean> {
    const deadline = Date.now() + timeoutMs;
    while (this.unacknowledged() > 0) {
      if (Date.now() > deadline) return false;
      await new Promise((r) => setTimeout(r, 50));
    }
    return true;
  }

  async close(): Promise<void> {
    this.generating = false;
    if (this.timer) clearInterval(this.timer);
    this.timer = null;
    await Promise.all(this.units.map((u) => u.client?.endAsync(true).catch(() => undefined)));
  }

  /** stream → acknowledged sequence numbers. */
  ackedSamples(): Map<StreamKey, Set<number>> {
    return this.acked.byStream;
  }

  ackedSampleCount(): number {
    return this.acked.count();
  }

  /** stream → the highest sequence number acknowledged so far. */
  highestAcked(): Map<StreamKey, number> {
    return new Map(this.highest);
  }

  private send(u: UnitState): void {
    const client = u.client;
    if (!client?.connected || u.outstanding >= this.o.window) return;
    const i = u.next++ % u.filters.length;
    const est = u.unit.estimators[i];
    const samples = Array.from({ length: this.o.batchSize }, () => u.filters[i].next());
    const key = `${u.unit.key}/${est.key}`;
    u.outstanding += 1;
    client.publish(
      partitionedInnovationsTopic(u.unit.partition, u.unit.key, est.key),
      batchPayload(samples, { rev: est.revision }),
      { qos: 1 },
      (err) => {
        u.outstanding -= 1;
        if (err) {
          this.publishErrors += 1;
          return;
        }
        this.acked.add(key, samples.map((s) => s.seq));
        this.highest.set(key, Math.max(this.highest.get(key) ?? -1, samples[samples.length - 1].seq));
      },
    );
  }
}
