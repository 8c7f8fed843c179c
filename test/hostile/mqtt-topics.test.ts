// Units reaching beyond their own topics, through the real broker: wildcard and foreign
// subscriptions, publishes on topics that are not the unit's own innovations topics, and a
// Last Will left on another unit's topic. (test/integration/ingest-input.test.ts checks the
// basic cases one by one; here every variation is in a table, and each one is shown to leak
// nothing: a refused subscriber receives none of the fleet's messages, a refused publish
// stores and quarantines nothing and counts one refusal.)
import knexFactory, { type Knex } from 'knex';
import type { MqttClient } from 'mqtt';
import { demoDeviceSecret } from '../../ingest/src/demo/saltmarsh';
import { commandsTopic, innovationsTopic } from '../../ingest/src/broker/topics';
import { createTestDatabase, type TestDatabase } from '../support/database';
import { connectUnit, endClient, publishAcked } from '../support/mqtt';
import { runCli, startService, type ServiceHandle } from '../support/service';

jest.setTimeout(120_000);

const UNIT = 'cabinet-01';
const OTHER = 'cabinet-02';

function metric(text: string, name: string, labels = ''): number {
  const line = text.split('\n').find((l) => l.startsWith(`${name}${labels} `));
  return line ? Number(line.split(' ').pop()) : 0;
}

describe('hostile MQTT topics: a unit stays within its own topics', () => {
  let db: TestDatabase;
  let service: ServiceHandle;
  let knex: Knex;
  let seq = 0;
  const now = Date.now();
  const sample = () => JSON.stringify({ v: 1, seq: ++seq, t: now - 1000 + seq, nu: [0.1], S: [[0.04]] });
  const counts = async () => {
    const [s] = await knex('innovation_samples').count<{ count: string }[]>('* as count');
    const [q] = await knex('quarantine').count<{ count: string }[]>('* as count');
    return { samples: Number(s.count), quarantine: Number(q.count) };
  };
  const refusedForeign = async () => metric(await (await fetch(`${service.url}/metrics`)).text(), 'whitecap_publish_refused_total', '{reason="foreign_topic"}');

  beforeAll(async () => {
    db = await createTestDatabase('hostile_mqtt_topics');
    await runCli('ingest/cli/seed.ts', [], { WHITECAP_DATABASE_URL: db.url });
    service = await startService({ WHITECAP_DATABASE_URL: db.url, WHITECAP_NOTIFICATIONS: 'false' });
    knex = knexFactory({ client: 'pg', connection: db.url, pool: { min: 0, max: 2 } });
  });
  afterAll(async () => {
    await service?.stop();
    await knex?.destroy();
    await db?.drop();
  });

  /** The QoS granted, or 128 when the broker refuses the subscription (SUBACK 0x80). */
  const subscribe = (client: MqttClient, filter: string) =>
    new Promise<number>((resolve) =>
      client.subscribe(filter, { qos: 1 }, (err, granted) => {
        resolve(err && /Subscribe error/.test(err.message) ? 128 : (granted?.[0]?.qos ?? -1));
      }),
    );

  it.each([
    ['everything', '#'],
    ['everything below one level', '+/#'],
    ['the whole tree', 'whitecap/#'],
    ['every unit', 'whitecap/v1/units/#'],
    ["every unit's commands", 'whitecap/v1/units/+/commands'],
    ["another unit's commands", commandsTopic(OTHER)],
    ["another unit's innovations", innovationsTopic(OTHER, 'thermal')],
    ["every unit's innovations", 'whitecap/v1/units/+/estimators/+/innovations'],
    ['its own subtree', `whitecap/v1/units/${UNIT}/#`],
    ['its own innovations topic', innovationsTopic(UNIT, 'thermal')],
    ['its own estimators by wildcard', `whitecap/v1/units/${UNIT}/estimators/+/innovations`],
    ['the broker system topics', '$SYS/#'],
    ['a shared subscription', `$share/g/${commandsTopic(UNIT)}`],
    ['its commands topic with a trailing level', `${commandsTopic(UNIT)}/#`],
  ])('refuses a subscription to %s (%s) and delivers nothing through it', async (_what, filter) => {
    const spy = await connectUnit(service.mqttPort, UNIT, demoDeviceSecret(UNIT));
    const received: string[] = [];
    spy.on('message', (topic) => received.push(topic));
    try {
      expect(await subscribe(spy, filter)).toBe(128);
      // traffic the filter would match: another unit's samples, and this unit's own
      const other = await connectUnit(service.mqttPort, OTHER, demoDeviceSecret(OTHER));
      await publishAcked(other, innovationsTopic(OTHER, 'thermal'), sample());
      await endClient(other);
      await publishAcked(spy, innovationsTopic(UNIT, 'thermal'), sample());
      await new Promise((r) => setTimeout(r, 200));
      expect(received).toEqual([]);
    } finally {
      await endClient(spy);
    }
  });

  it('grants a unit its own command topic', async () => {
    const unit = await connectUnit(service.mqttPort, UNIT, demoDeviceSecret(UNIT));
    expect(await subscribe(unit, commandsTopic(UNIT))).toBe(1);
    await endClient(unit);
  });

  it.each([
    ["another unit's innovations topic", innovationsTopic(OTHER, 'thermal')],
    ["another unit's estimator that the unit also has", innovationsTopic('cabinet-03', 'charge')],
    ['its own commands topic', commandsTopic(UNIT)],
    ["another unit's commands topic", commandsTopic(OTHER)],
    ['a level below its innovations topic', `${innovationsTopic(UNIT, 'thermal')}/more`],
    ['a level above its innovations topic', `whitecap/v1/units/${UNIT}/estimators/thermal`],
    ['its unit key in capitals', innovationsTopic(UNIT.toUpperCase(), 'thermal')],
    ['an estimator key with a space', `whitecap/v1/units/${UNIT}/estimators/the rmal/innovations`],
    ['a path traversal', `whitecap/v1/units/${UNIT}/../${OTHER}/estimators/thermal/innovations`],
    ['a double slash', `whitecap/v1/units/${UNIT}//estimators/thermal/innovations`],
    ['a NUL character in the topic', `whitecap/v1/units/${UNIT}\u0000/estimators/thermal/innovations`],
    ['an estimator key of 65 characters', innovationsTopic(UNIT, 'e'.repeat(65))],
    ['a topic of 60,000 characters', `whitecap/v1/units/${UNIT}/estimators/${'x'.repeat(60_000)}/innovations`],
    ['the broker system topics', '$SYS/broker/clients'],
    ['another protocol version of the tree', `whitecap/v2/units/${UNIT}/estimators/thermal/innovations`],
    ['a unicode look-alike of its unit key', innovationsTopic('cabinet\u20110\u0031', 'thermal')],
  ])('refuses a publish on %s: the connection is closed, nothing stored or quarantined, one refusal counted', async (_what, topic) => {
    const unit = await connectUnit(service.mqttPort, UNIT, demoDeviceSecret(UNIT));
    const before = await counts();
    const refusedBefore = await refusedForeign();
    await expect(publishAcked(unit, topic, sample())).rejects.toThrow(/closed/);
    await endClient(unit);
    expect(await counts()).toEqual(before);
    expect(await refusedForeign()).toBe(refusedBefore + 1);
  });

  it("refuses a publish with a wildcard in its topic (malformed in MQTT) and stores nothing", async () => {
    const before = await counts();
    for (const topic of [`whitecap/v1/units/+/estimators/thermal/innovations`, `whitecap/v1/units/${UNIT}/estimators/#`]) {
      const unit = await connectUnit(service.mqttPort, UNIT, demoDeviceSecret(UNIT));
      // the broker refuses the packet itself (before any authorization): the connection is closed
      await expect(publishAcked(unit, topic, sample())).rejects.toThrow(/closed/);
      await endClient(unit);
    }
    expect(await counts()).toEqual(before);
  });

  it("does not publish a Last Will left on another unit's topic when the unit drops off", async () => {
    const before = await counts();
    const refusedBefore = await refusedForeign();
    const unit = await connectUnit(service.mqttPort, UNIT, demoDeviceSecret(UNIT), {
      will: { topic: innovationsTopic(OTHER, 'thermal'), payload: Buffer.from(sample()), qos: 1, retain: false },
    });
    // drop the connection without DISCONNECT, so that the broker would send the will
    (unit.stream as unknown as { destroy(): void }).destroy();
    const deadline = Date.now() + 5000;
    while ((await refusedForeign()) === refusedBefore && Date.now() < deadline) await new Promise((r) => setTimeout(r, 100));
    expect(await refusedForeign()).toBe(refusedBefore + 1);
    expect(await counts()).toEqual(before);
    await endClient(unit);
  });

  it('keeps taking the units\' own samples after all of that', async () => {
    const before = await counts();
    const unit = await connectUnit(service.mqttPort, UNIT, demoDeviceSecret(UNIT));
    await publishAcked(unit, innovationsTopic(UNIT, 'thermal'), sample());
    await endClient(unit);
    expect((await counts()).samples).toBe(before.samples + 1);
    expect((await fetch(`${service.url}/api/health`)).status).toBe(200);
  });
});
