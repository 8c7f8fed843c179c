// Many messages through the real broker fast: one MQTT connection per unit, each with up
// to `window` QoS 1 publishes in flight (pipelined; each resolves on its PUBACK, which
// the service sends once the message's samples or quarantine rows are committed).
import type { MqttClient } from 'mqtt';
import { demoDeviceSecret } from '../../ingest/src/demo/saltmarsh';
import { connectUnit, endClient } from './mqtt';

export interface Outgoing {
  unit: string;
  topic: string;
  payload: Buffer;
}

export interface PoolResult {
  sent: number;
  acked: number;
  /** Messages whose publish failed (connection closed before the PUBACK, or an error). */
  failed: { message: Outgoing; error: string }[];
  ms: number;
}

export class UnitPool {
  private constructor(private readonly clients: Map<string, MqttClient>) {}

  /** One connection per unit, signed in with the demo credentials. */
  static async connect(mqttPort: number, units: string[], secretOf: (unit: string) => string = demoDeviceSecret): Promise<UnitPool> {
    const clients = new Map<string, MqttClient>();
    for (const unit of units) clients.set(unit, await connectUnit(mqttPort, unit, secretOf(unit)));
    return new UnitPool(clients);
  }

  units(): string[] {
    return [...this.clients.keys()];
  }

  /**
   * Publishes every message on its unit's connection, keeping up to `window` in flight per
   * connection; resolves when each has been acknowledged or has failed.
   */
  async publishAll(messages: Outgoing[], window = 64): Promise<PoolResult> {
    const started = performance.now();
    const byUnit = new Map<string, Outgoing[]>();
    for (const m of messages) {
      if (!this.clients.has(m.unit)) throw new Error(`no connection for unit ${m.unit}`);
      let list = byUnit.get(m.unit);
      if (!list) byUnit.set(m.unit, (list = []));
      list.push(m);
    }
    const failed: PoolResult['failed'] = [];
    let acked = 0;
    await Promise.all(
      [...byUnit].map(async ([unit, list]) => {
        const client = this.clients.get(unit)!;
        // each publish in flight listens for the connection closing
        client.setMaxListeners(Math.max(client.getMaxListeners(), window + 50));
        let next = 0;
        const lane = async () => {
          while (next < list.length) {
            const m = list[next++];
            const error = await publishOnce(client, m);
            if (error === null) acked += 1;
            else failed.push({ message: m, error });
          }
        };
        await Promise.all(Array.from({ length: Math.min(window, list.length) }, lane));
      }),
    );
    return { sent: messages.length, acked, failed, ms: performance.now() - started };
  }

  async end(): Promise<void> {
    await Promise.all([...this.clients.values()].map((c) => endClient(c)));
  }
}

/** null on PUBACK, else what went wrong. */
function publishOnce(client: MqttClient, m: Outgoing): Promise<string | null> {
  return new Promise((resolve) => {
    if (!client.connected) return resolve('not connected');
    let settled = false;
    const onClose = () => {
      if (settled) return;
      settled = true;
      resolve('connection closed before PUBACK');
    };
    client.once('close', onClose);
    client.publish(m.topic, m.payload, { qos: 1 }, (err) => {
      client.off('close', onClose);
      if (settled) return;
      settled = true;
      resolve(err ? err.message : null);
    });
  });
}
