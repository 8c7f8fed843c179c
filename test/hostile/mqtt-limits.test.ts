// Units (and strangers) pushing the broker's limits, through the real service: packets too
// large to take, a unit flooding samples beyond its rate, and clients reconnecting in a
// tight loop. Each time the service must stay up and answer, legitimate units must not
// notice, and what was refused must be counted (and, for samples, quarantined with the
// payload kept).
import knexFactory, { type Knex } from 'knex';
import type { MqttClient } from 'mqtt';
import { demoDeviceSecret } from '../../ingest/src/demo/saltmarsh';
import { innovationsTopic } from '../../ingest/src/broker/topics';
import { createTestDatabase, type TestDatabase } from '../support/database';
import { connectUnit, endClient, publishAcked } from '../support/mqtt';
import { UnitPool } from '../support/mqtt-pool';
import { connectPacket, header, publishStart, rssOf, streamUntilClosed, tryConnect } from '../support/mqtt-raw';
import { runCli, startService, type ServiceHandle } from '../support/service';

jest.setTimeout(180_000);

const RATE = 200; // samples per second per unit, for this suite
const BURST = 1000;
const CONNECTS_PER_MINUTE = 20;
const MAX_PACKET = 1_048_576; // the default

async function metrics(url: string): Promise<string> {
  return (await fetch(`${url}/metrics`)).text();
}
function metric(text: string, name: string, labels = ''): number {
  const line = text.split('\n').find((l) => l.startsWith(`${name}${labels} `));
  return line ? Number(line.split(' ').pop()) : 0;
}

describe('hostile MQTT limits', () => {
  let db: TestDatabase;
  let service: ServiceHandle;
  let knex: Knex;
  const now = Date.now();
  const seqs = new Map<string, number>();
  /** `count` valid samples for an estimator of m = 1 (cabinets) or 2 (tractors), as one batch message. */
  const batch = (unit: string, count: number, m = unit.startsWith('tractor') ? 2 : 1) => {
    const samples = Array.from({ length: count }, () => {
      const seq = (seqs.get(unit) ?? 0) + 1;
      seqs.set(unit, seq);
      return { seq, t: now - 600_000 + seq, nu: Array(m).fill(0.1), S: Array.from({ length: m }, (_, r) => Array.from({ length: m }, (__, c) => (r === c ? 0.04 : 0))) };
    });
    return Buffer.from(JSON.stringify({ v: 1, samples }));
  };
  const estimatorOf = (unit: string) => (unit.startsWith('tractor') ? 'position' : 'thermal');
  const storedOf = async (unit: string) => {
    const [row] = await knex('innovation_samples as s')
      .join('estimators as e', 'e.id', 's.estimator_id')
      .join('units as u', 'u.id', 'e.unit_id')
      .where('u.key', unit)
      .count<{ count: string }[]>('* as count');
    return Number(row.count);
  };
  const health = async () => {
    const started = performance.now();
    const res = await fetch(`${service.url}/api/health`, { signal: AbortSignal.timeout(10_000) });
    return { status: res.status, ms: performance.now() - started };
  };
  const alive = () => service.process.exitCode === null && service.process.signalCode === null;

  beforeAll(async () => {
    db = await createTestDatabase('hostile_mqtt_limits');
    await runCli('ingest/cli/seed.ts', [], { WHITECAP_DATABASE_URL: db.url });
    service = await startService({
      WHITECAP_DATABASE_URL: db.url,
      WHITECAP_NOTIFICATIONS: 'false',
      WHITECAP_UNIT_MAX_SAMPLES_PER_SECOND: String(RATE),
      WHITECAP_UNIT_BURST_SAMPLES: String(BURST),
      WHITECAP_MQTT_CONNECTS_PER_MINUTE: String(CONNECTS_PER_MINUTE),
      WHITECAP_MQTT_MAX_PACKET_BYTES: String(MAX_PACKET),
      WHITECAP_LOG_LEVEL: 'error',
    });
    knex = knexFactory({ client: 'pg', connection: db.url, pool: { min: 0, max: 2 } });
  });
  afterAll(async () => {
    await service?.stop();
    await knex?.destroy();
    await db?.drop();
  });

  describe('oversized messages', () => {
    const UNIT = 'cabinet-08';
    const topic = innovationsTopic(UNIT, 'thermal');
    const padded = (bytes: number) => {
      const head = `{"v":1,"seq":1,"t":${now},"nu":[0.1],"S":[[0.04]],"pad":"`;
      return Buffer.from(`${head}${'x'.repeat(bytes - head.length - 2)}"}`);
    };

    it.each([
      ['just over the 256 KiB payload limit', 256 * 1024 + 1],
      ['just under the packet limit', MAX_PACKET - 200],
    ])('quarantines a message %s (too_large, its first 4 KiB kept) and acknowledges it', async (_what, bytes) => {
      const unit = await connectUnit(service.mqttPort, UNIT, demoDeviceSecret(UNIT));
      await publishAcked(unit, topic, padded(bytes));
      const row = await knex('quarantine').where({ unit_key: UNIT, reason_code: 'too_large' }).orderBy('id', 'desc').first();
      expect(row.payload_bytes).toBe(bytes);
      expect(row.payload.length).toBe(4096);
      expect(row.payload.subarray(0, 7).toString()).toBe('{"v":1,');
      await endClient(unit);
    });

    it.each([
      ['just over the packet limit', MAX_PACKET + 1],
      ['of 16 MB', 16 * 1024 * 1024],
    ])('closes the connection of a unit that publishes a message %s, keeps nothing of it, counts it, and takes the unit back', async (_what, bytes) => {
      const refusedBefore = metric(await metrics(service.url), 'whitecap_publish_refused_total', '{reason="too_large"}');
      const quarantineBefore = await knex('quarantine').where({ unit_key: UNIT }).count<{ count: string }[]>('* as count');
      const unit = await connectUnit(service.mqttPort, UNIT, demoDeviceSecret(UNIT));
      await expect(publishAcked(unit, topic, padded(bytes))).rejects.toThrow(/closed/);
      await endClient(unit);
      expect(metric(await metrics(service.url), 'whitecap_publish_refused_total', '{reason="too_large"}')).toBe(refusedBefore + 1);
      const quarantineAfter = await knex('quarantine').where({ unit_key: UNIT }).count<{ count: string }[]>('* as count');
      expect(quarantineAfter[0].count).toBe(quarantineBefore[0].count);
      // the unit is not banned: its next normal message goes through
      const again = await connectUnit(service.mqttPort, UNIT, demoDeviceSecret(UNIT));
      const storedBefore = await storedOf(UNIT);
      await publishAcked(again, topic, batch(UNIT, 1));
      expect(await storedOf(UNIT)).toBe(storedBefore + 1);
      await endClient(again);
    });

    it.each([
      ['a CONNECT declaring 200 MB, before any sign-in', () => header(0x10, 200 * 1024 * 1024)],
      [
        'a PUBLISH declaring 255 MB after signing in',
        () => Buffer.concat([connectPacket({ clientId: 'big-publisher', username: UNIT, password: demoDeviceSecret(UNIT) }), publishStart(topic, 255 * 1024 * 1024)]),
      ],
    ])('closes a connection that streams %s as soon as the header says so, without holding the bytes', async (_what, first) => {
      const rssBefore = rssOf(service.process.pid!);
      // 64 MB follow the header, as fast as the connection takes them
      const r = await streamUntilClosed(service.mqttPort, first(), 64 * 1024 * 1024);
      const rssAfter = rssOf(service.process.pid!);
      expect(r.closed).toBe(true);
      expect(r.written).toBeLessThan(32 * 1024 * 1024);
      expect(rssAfter - rssBefore).toBeLessThan(32 * 1024 * 1024);
      expect(alive()).toBe(true);
      expect((await health()).status).toBe(200);
    });
  });

  describe('a unit flooding samples', () => {
    const FLOODER = 'tractor-05';
    const STEADY = 'tractor-06';

    it(`takes ${BURST} at once and ${RATE}/s after from one unit, quarantines the rest with reason rate_limit (payload kept) and counts it, while a steady unit loses nothing`, async () => {
      const pool = await UnitPool.connect(service.mqttPort, [FLOODER, STEADY]);
      const MESSAGES = 80;
      const PER_MESSAGE = 100;
      const flood = Array.from({ length: MESSAGES }, () => ({ unit: FLOODER, topic: innovationsTopic(FLOODER, 'position'), payload: batch(FLOODER, PER_MESSAGE) }));
      const metricsBefore = await metrics(service.url);
      const started = performance.now();
      // the steady unit: 10 samples a second in batches of 10 (the benchmark's pace), all through the flood
      let steadySent = 0;
      let flooding = true;
      const steady = (async () => {
        while (flooding || steadySent < 30) {
          const r = await pool.publishAll([{ unit: STEADY, topic: innovationsTopic(STEADY, 'position'), payload: batch(STEADY, 10) }]);
          expect(r.failed).toEqual([]);
          steadySent += 10;
          await new Promise((res) => setTimeout(res, 1000));
        }
      })();
      const result = await pool.publishAll(flood, 16);
      const elapsedS = (performance.now() - started) / 1000;
      flooding = false;
      await steady;
      expect(result.failed).toEqual([]);

      const stored = await storedOf(FLOODER);
      const rows = await knex('quarantine').where({ unit_key: FLOODER, reason_code: 'rate_limit' }).orderBy('id');
      const refusedSamples = rows.length * PER_MESSAGE;
      expect(stored + refusedSamples).toBe(MESSAGES * PER_MESSAGE);
      expect(stored).toBeGreaterThanOrEqual(BURST);
      expect(stored).toBeLessThanOrEqual(BURST + RATE * elapsedS + PER_MESSAGE);
      expect(rows.length).toBeGreaterThan(0);
      const unmatched = new Set(flood.map((m) => m.payload));
      for (const row of rows) {
        expect(row.estimator_key).toBe('position');
        expect(row.sample_index).toBeNull();
        expect(row.reason).toMatch(/limit of 200\/s/);
        expect(row.payload.length).toBe(Math.min(4096, row.payload_bytes));
        // the row keeps the start of one of the flood's messages, and that message's size
        const sent = [...unmatched].find((p) => p.length === row.payload_bytes && p.subarray(0, row.payload.length).equals(row.payload));
        expect(sent).toBeDefined();
        unmatched.delete(sent!);
      }
      const metricsAfter = await metrics(service.url);
      expect(metric(metricsAfter, 'whitecap_samples_rate_limited_total') - metric(metricsBefore, 'whitecap_samples_rate_limited_total')).toBe(refusedSamples);
      expect(metric(metricsAfter, 'whitecap_quarantined_total', '{reason="rate_limit"}') - metric(metricsBefore, 'whitecap_quarantined_total', '{reason="rate_limit"}')).toBe(rows.length);
      // the steady unit lost nothing
      expect(await storedOf(STEADY)).toBe(steadySent);
      // the flood shows on the dashboard as the unit's quarantine-rate alert
      const alert = await knex('alerts as a').join('units as u', 'u.id', 'a.unit_id').where({ 'u.key': FLOODER, 'a.rule': 'quarantine-rate' }).first('a.state');
      expect(alert).toBeDefined();
      // and once the unit slows down it gets through again: 1.5 s refill 300 tokens
      await new Promise((r) => setTimeout(r, 1500));
      const before = await storedOf(FLOODER);
      const again = await pool.publishAll([{ unit: FLOODER, topic: innovationsTopic(FLOODER, 'position'), payload: batch(FLOODER, PER_MESSAGE) }]);
      expect(again.failed).toEqual([]);
      expect(await storedOf(FLOODER)).toBe(before + PER_MESSAGE);
      expect((await health()).status).toBe(200);
      await pool.end();
    });
  });

  describe('clients reconnecting in a tight loop', () => {
    const LOOPER = 'cabinet-05';

    /** Connects over and over for `ms`; returns the CONNACK codes seen (0 = accepted). */
    const loop = async (ms: number, clientId: () => string, password = demoDeviceSecret(LOOPER)) => {
      const codes = new Map<number, number>();
      const end = Date.now() + ms;
      while (Date.now() < end) {
        const code = await tryConnect(service.mqttPort, LOOPER, password, clientId());
        codes.set(code, (codes.get(code) ?? 0) + 1);
      }
      return codes;
    };

    /** Meanwhile: a unit publishing every 100 ms on its connection, another connecting afresh every 500 ms, health every 250 ms. */
    const bystanders = (stop: () => boolean) => {
      const seen = { published: 0, publishFailures: 0, connects: 0, connectFailures: 0, health: [] as { status: number; ms: number }[] };
      let steady: MqttClient;
      const work = (async () => {
        steady = await connectUnit(service.mqttPort, 'cabinet-06', demoDeviceSecret('cabinet-06'));
        await Promise.all([
          (async () => {
            while (!stop()) {
              await publishAcked(steady, innovationsTopic('cabinet-06', 'thermal'), batch('cabinet-06', 1)).then(
                () => (seen.published += 1),
                () => (seen.publishFailures += 1),
              );
              await new Promise((r) => setTimeout(r, 100));
            }
          })(),
          (async () => {
            while (!stop()) {
              const code = await tryConnect(service.mqttPort, 'cabinet-07', demoDeviceSecret('cabinet-07'), `cabinet-07-${Math.random().toString(36).slice(2, 10)}`);
              if (code === 0) seen.connects += 1;
              else seen.connectFailures += 1;
              await new Promise((r) => setTimeout(r, 500));
            }
          })(),
          (async () => {
            while (!stop()) {
              seen.health.push(await health());
              await new Promise((r) => setTimeout(r, 250));
            }
          })(),
        ]);
        await endClient(steady);
      })();
      return { seen, work };
    };

    it(`accepts ${CONNECTS_PER_MINUTE} connects a minute from one client id and refuses the rest with CONNACK 3 (server unavailable), while other units carry on`, async () => {
      const refusedBefore = metric(await metrics(service.url), 'whitecap_publish_refused_total', '{reason="connect_rate"}');
      let stopped = false;
      const others = bystanders(() => stopped);
      const started = performance.now();
      const codes = await loop(4000, () => 'cabinet-05-fixed-id');
      const elapsedS = (performance.now() - started) / 1000;
      stopped = true;
      await others.work;
      const attempts = [...codes.values()].reduce((a, b) => a + b, 0);
      const accepted = codes.get(0) ?? 0;
      const refused = codes.get(3) ?? 0;
      console.log(`reconnect loop, one client id: ${attempts} attempts in ${elapsedS.toFixed(1)} s: ${JSON.stringify(Object.fromEntries(codes))}; bystanders ${JSON.stringify({ ...others.seen, health: undefined, healthWorstMs: Math.round(Math.max(...others.seen.health.map((h) => h.ms))) })}`);
      expect(attempts).toBeGreaterThan(50);
      expect(accepted).toBeGreaterThanOrEqual(CONNECTS_PER_MINUTE);
      expect(accepted).toBeLessThanOrEqual(CONNECTS_PER_MINUTE + Math.ceil((elapsedS * CONNECTS_PER_MINUTE) / 60));
      expect(refused).toBe(attempts - accepted);
      expect(metric(await metrics(service.url), 'whitecap_publish_refused_total', '{reason="connect_rate"}')).toBe(refusedBefore + refused);
      // the other units did not notice
      expect(others.seen.publishFailures).toBe(0);
      expect(others.seen.published).toBeGreaterThan(10);
      expect(others.seen.connectFailures).toBe(0);
      expect(others.seen.connects).toBeGreaterThan(3);
      expect(others.seen.health.every((h) => h.status === 200)).toBe(true);
      // the same unit under another client id is not held back, and the looping id gets back in once it waits
      expect(await tryConnect(service.mqttPort, LOOPER, demoDeviceSecret(LOOPER), 'cabinet-05-other-id')).toBe(0);
      await new Promise((r) => setTimeout(r, (60 / CONNECTS_PER_MINUTE) * 1000 + 500));
      expect(await tryConnect(service.mqttPort, LOOPER, demoDeviceSecret(LOOPER), 'cabinet-05-fixed-id')).toBe(0);
      expect(alive()).toBe(true);
    });

    it('stays up and answering while a stranger loops with a new client id and a wrong secret every time', async () => {
      let stopped = false;
      const others = bystanders(() => stopped);
      const codes = await loop(3000, () => `stranger-${Math.random().toString(36).slice(2, 10)}`, 'not-the-secret');
      stopped = true;
      await others.work;
      const attempts = [...codes.values()].reduce((a, b) => a + b, 0);
      console.log(`reconnect loop, new client ids, wrong secret: ${attempts} attempts: ${JSON.stringify(Object.fromEntries(codes))}; health worst ${Math.round(Math.max(...others.seen.health.map((h) => h.ms)))} ms`);
      expect(attempts).toBeGreaterThan(50);
      expect(codes.get(4)).toBe(attempts); // bad username or password, every time
      expect(others.seen.publishFailures).toBe(0);
      expect(others.seen.connectFailures).toBe(0);
      expect(others.seen.health.every((h) => h.status === 200)).toBe(true);
      expect(alive()).toBe(true);
    });
  });
});
