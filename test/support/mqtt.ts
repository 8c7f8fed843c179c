// An MQTT client for tests: signs in as a unit and publishes with QoS 1, awaiting PUBACK.
import mqtt, { type MqttClient } from 'mqtt';

export async function connectUnit(port: number, username: string, password: string, extra: mqtt.IClientOptions = {}): Promise<MqttClient> {
  const client = mqtt.connect(`mqtt://127.0.0.1:${port}`, {
    username,
    password,
    clientId: `test-${username}-${Math.random().toString(36).slice(2, 8)}`,
    reconnectPeriod: 0,
    connectTimeout: 5000,
    ...extra,
  });
  await new Promise<void>((resolve, reject) => {
    client.once('connect', () => resolve());
    client.once('error', reject);
    client.once('close', () => reject(new Error('connection closed before CONNACK')));
  });
  return client;
}

/** Resolves on PUBACK; rejects when the broker closes the connection instead. */
export function publishAcked(client: MqttClient, topic: string, payload: string | Buffer): Promise<void> {
  return new Promise((resolve, reject) => {
    const onClose = () => reject(new Error('connection closed before PUBACK'));
    client.once('close', onClose);
    client.publish(topic, payload, { qos: 1 }, (err) => {
      client.off('close', onClose);
      if (err) reject(err);
      else resolve();
    });
  });
}

export function endClient(client: MqttClient): Promise<void> {
  return new Promise((resolve) => client.end(true, {}, () => resolve()));
}
