// The demo fleet simulator. Each demo estimator publishes one innovation sample a
// second over MQTT with its unit's own credentials.
// Until the ingest pipeline lands, the innovations are drawn from the filter's own
// predicted covariance (a consistent estimator); the plant-and-filter simulation with
// injected faults replaces this.
import mqtt from 'mqtt';
import { demoDeviceSecret, demoUnits } from '../ingest/src/demo/saltmarsh';
import { innovationsTopic } from '../ingest/src/broker/topics';

const url = process.env.WHITECAP_MQTT_URL ?? `mqtt://127.0.0.1:${process.env.WHITECAP_MQTT_PORT ?? 1886}`;
const intervalMs = Number(process.env.WHITECAP_SIM_INTERVAL_MS ?? 1000);

function gaussian(): number {
  // Box–Muller transform.
  const u = 1 - Math.random();
  const v = Math.random();
  return Math.sqrt(-2 * Math.log(u)) * Math.cos(2 * Math.PI * v);
}

const clients: mqtt.MqttClient[] = [];
let sent = 0;
for (const unit of demoUnits) {
  const client = mqtt.connect(url, {
    username: unit.key,
    password: demoDeviceSecret(unit.key),
    clientId: `sim-${unit.key}`,
    reconnectPeriod: 2000,
  });
  clients.push(client);
  client.on('error', (err) => console.error(`${unit.key}: ${err.message}`));
  const seq = new Map<string, number>();
  setInterval(() => {
    if (!client.connected) return;
    for (const e of unit.estimators) {
      const n = (seq.get(e.key) ?? 0) + 1;
      seq.set(e.key, n);
      const sigma = 0.5;
      const nu = Array.from({ length: e.measurementDim }, () => sigma * gaussian());
      const S = nu.map((_, i) => nu.map((__, j) => (i === j ? sigma * sigma : 0)));
      const payload = JSON.stringify({ v: 1, seq: n, t: new Date().toISOString(), nu, S });
      client.publish(innovationsTopic(unit.key, e.key), payload, { qos: 1 });
      sent += 1;
    }
  }, intervalMs);
}
console.log(`fleet simulator: ${demoUnits.length} units publishing to ${url}`);
setInterval(() => console.log(`fleet simulator: ${sent} samples sent`), 60_000).unref();

function stop(): void {
  for (const c of clients) c.end(true);
  process.exit(0);
}
process.on('SIGINT', stop);
process.on('SIGTERM', stop);
