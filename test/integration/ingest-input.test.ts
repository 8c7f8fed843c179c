// Bad input through the real broker into the real database: every malformed payload
// is refused or quarantined with the right reason, and every valid sample is stored.
import knexFactory, { type Knex } from 'knex';
import type { MqttClient } from 'mqtt';
import { demoDeviceSecret } from '../../ingest/src/demo/saltmarsh';
import { innovationsTopic, commandsTopic } from '../../ingest/src/broker/topics';
import { createTestDatabase, type TestDatabase } from '../support/database';
import { connectUnit, endClient, publishAcked } from '../support/mqtt';
import { runCli, startService, type ServiceHandle } from '../support/service';

jest.setTimeout(60_000);

const UNIT = 'cabinet-01';
const ESTIMATOR = 'thermal'; // m = 1
const topic = innovationsTopic(UNIT, ESTIMATOR);

describe('ingest: bad input is quarantined, good input is stored', () => {
  let db: TestDatabase;
  let service: ServiceHandle;
  let knex: Knex;
  let unit: MqttClient;
  let seq = 0;
  let validSent = 0;
  const now = Date.now();

  const sample = (overrides: Record<string, unknown> = {}) => ({ seq: ++seq, t: now + seq, nu: [0.1], S: [[0.04]], ...overrides });
  const sendValid = async () => {
    await publishAcked(unit, topic, JSON.stringify({ v: 1, ...sample() }));
    validSent += 1;
  };
  const quarantined = async (reasonCode: string) =>
    knex('quarantine').where({ reason_code: reasonCode }).orderBy('id', 'desc').first();

  beforeAll(async () => {
    db = await createTestDatabase('ingest_input');
    await runCli('ingest/cli/seed.ts', [], { WHITECAP_DATABASE_URL: db.url });
    service = await startService({ WHITECAP_DATABASE_URL: db.url });
    knex = knexFactory({ client: 'pg', connection: db.url });
    unit = await connectUnit(service.mqttPort, UNIT, demoDeviceSecret(UNIT));
  });
  afterAll(async () => {
    if (unit) await endClient(unit);
    await service?.stop();
    await knex?.destroy();
    await db?.drop();
  });

  it('stores a valid single sample and a valid batch', async () => {
    await sendValid();
    const batch = { v: 1, samples: [sample(), sample(), sample({ L: [[0.2]], S: undefined })] };
    await publishAcked(unit, topic, JSON.stringify(batch));
    validSent += 3;
    const stored = await knex('innovation_samples').count<{ count: number }[]>('* as count');
    expect(Number(stored[0].count)).toBe(validSent);
  });

  it.each([
    ['not JSON', () => '{"v":1, seq: oops', 'not_json'],
    ['a schema violation (no sequence number)', () => JSON.stringify({ v: 1, t: now, nu: [0.1], S: [[0.04]] }), 'schema'],
    ['the wrong dimension', () => JSON.stringify({ v: 1, ...sample({ nu: [0.1, 0.2], S: [[1, 0], [0, 1]] }) }), 'dimension_mismatch'],
    ['a number that is not finite (1e999)', () => `{"v":1,"seq":${++seq},"t":${now},"nu":[1e999],"S":[[0.04]]}`, 'not_finite'],
    ['a covariance that is not positive definite', () => JSON.stringify({ v: 1, ...sample({ S: [[-0.04]] }) }), 'not_positive_definite'],
    ['a time far in the future', () => JSON.stringify({ v: 1, ...sample({ t: now + 86_400_000 }) }), 'clock'],
    ['a time far in the past', () => JSON.stringify({ v: 1, ...sample({ t: now - 30 * 86_400_000 }) }), 'clock'],
    ['a huge message', () => JSON.stringify({ v: 1, ...sample(), pad: 'x'.repeat(300_000) }), 'too_large'],
  ])('quarantines %s with its reason, and acknowledges it', async (_name, make, code) => {
    const payload = make();
    await publishAcked(unit, topic, payload);
    const row = await quarantined(code);
    expect(row).toBeDefined();
    expect(row.unit_key).toBe(UNIT);
    expect(row.topic).toBe(topic);
    expect(row.reason.length).toBeGreaterThan(10);
    expect(row.payload_bytes).toBe(Buffer.byteLength(payload));
    expect(row.payload.length).toBeLessThanOrEqual(4096);
    await sendValid(); // the unit's good samples still go through
  });

  it('quarantines an asymmetric covariance of a two-component estimator', async () => {
    const tractor = await connectUnit(service.mqttPort, 'tractor-01', demoDeviceSecret('tractor-01'));
    const payload = JSON.stringify({ v: 1, seq: 1, t: now, nu: [0.1, 0.2], S: [[1, 0.5], [0.1, 1]] });
    await publishAcked(tractor, innovationsTopic('tractor-01', 'position'), payload);
    await endClient(tractor);
    const row = await quarantined('not_symmetric');
    expect(row.unit_key).toBe('tractor-01');
    expect(row.reason).toMatch(/S/);
  });

  it('quarantines a message for an estimator that does not exist', async () => {
    await publishAcked(unit, innovationsTopic(UNIT, 'no-such-estimator'), JSON.stringify({ v: 1, ...sample() }));
    const row = await quarantined('unknown_estimator');
    expect(row.estimator_key).toBe('no-such-estimator');
    expect(row.reason).toContain('no-such-estimator');
  });

  it('keeps the good samples of a batch that holds a bad one, and names the bad one', async () => {
    const batch = { v: 1, samples: [sample(), sample({ S: [[0]] }), sample()] };
    await publishAcked(unit, topic, JSON.stringify(batch));
    validSent += 2;
    const row = await knex('quarantine').where({ sample_index: 1 }).first();
    expect(row.reason_code).toBe('not_positive_definite');
  });

  it('stores a duplicate (same estimator and sequence) once', async () => {
    const dup = JSON.stringify({ v: 1, ...sample() });
    await publishAcked(unit, topic, dup);
    await publishAcked(unit, topic, dup);
    validSent += 1;
    const rows = await knex('innovation_samples').where({ seq }).count<{ count: number }[]>('* as count');
    expect(Number(rows[0].count)).toBe(1);
  });

  it('stores the samples of a unit whose counter started again (same numbers, later times)', async () => {
    const restarted = { v: 1, samples: [1, 2, 3].map((n) => ({ seq: n, t: now + 100_000 + n, nu: [0.05], S: [[0.04]] })) };
    await publishAcked(unit, topic, JSON.stringify(restarted));
    validSent += 3;
    const rows = await knex('innovation_samples').where('seq', '<=', 3).count<{ count: number }[]>('* as count');
    expect(Number(rows[0].count)).toBe(6); // the first 1…3 and the new 1…3
  });

  it('refuses a unit publishing on another unit\'s topic and stores nothing of it', async () => {
    const intruder = await connectUnit(service.mqttPort, 'cabinet-02', demoDeviceSecret('cabinet-02'));
    const before = await knex('innovation_samples').count<{ count: number }[]>('* as count');
    await expect(publishAcked(intruder, topic, JSON.stringify({ v: 1, ...sample() }))).rejects.toThrow(/closed/);
    await endClient(intruder);
    const after = await knex('innovation_samples').count<{ count: number }[]>('* as count');
    expect(after[0].count).toBe(before[0].count);
  });

  it('refuses anonymous connections and wrong secrets', async () => {
    await expect(connectUnit(service.mqttPort, '', '')).rejects.toThrow();
    await expect(connectUnit(service.mqttPort, UNIT, 'not-the-secret')).rejects.toThrow(/Bad username or password|closed/i);
  });

  it('lets a unit subscribe to its own command topic only', async () => {
    const subscribe = (filter: string) =>
      new Promise<number>((resolve) =>
        unit.subscribe(filter, { qos: 1 }, (err, granted) => {
          // mqtt.js turns a refused subscription (SUBACK return code 128) into a "Subscribe error".
          resolve(err && /Subscribe error/.test(err.message) ? 128 : (granted?.[0]?.qos ?? -1));
        }),
      );
    expect(await subscribe(commandsTopic(UNIT))).toBe(1);
    expect(await subscribe(commandsTopic('cabinet-02'))).toBe(128);
    expect(await subscribe('whitecap/#')).toBe(128);
  });

  it('stores exactly as many samples as valid ones were sent, and counts the rest', async () => {
    const stored = await knex('innovation_samples').count<{ count: number }[]>('* as count');
    expect(Number(stored[0].count)).toBe(validSent);
    const metrics = await (await fetch(`${service.url}/metrics`)).text();
    expect(metrics).toMatch(/whitecap_quarantined_total\{reason="not_json"\} 1/);
    expect(metrics).toMatch(/whitecap_publish_refused_total\{reason="foreign_topic"\} 1/);
  });
});
