// When PostgreSQL stops taking writes, the service buffers up to its bound
// (WHITECAP_MAX_QUEUED_SAMPLES) and then holds the units' messages unacknowledged
// instead of growing or dropping the connection; once writes resume every message is
// acknowledged, stored once and checked in the order it was sent.
import knexFactory, { type Knex } from 'knex';
import type { MqttClient } from 'mqtt';
import { innovationsTopic } from '../../ingest/src/broker/topics';
import { demoDeviceSecret } from '../../ingest/src/demo/saltmarsh';
import { PlantFilter, plantDesign, singlePayload, type SimulatedSample } from '../../simulators/src/index';
import { createTestDatabase, type TestDatabase } from '../support/database';
import { connectUnit, endClient, publishAcked } from '../support/mqtt';
import { runCli, startService, type ServiceHandle } from '../support/service';

jest.setTimeout(120_000);

const UNIT = 'tractor-05';
const topic = innovationsTopic(UNIT, 'position');
const BOUND = 20;
const MESSAGES = 200;

function metricValue(text: string, name: string): number {
  const line = text.split('\n').find((l) => l.startsWith(`${name} `));
  return line ? Number(line.slice(name.length + 1)) : NaN;
}

describe('ingest: back-pressure while the database is not taking writes', () => {
  let db: TestDatabase;
  let knex: Knex;
  let service: ServiceHandle | null = null;
  let unit: MqttClient | null = null;

  beforeAll(async () => {
    db = await createTestDatabase('ingest_backpressure');
    await runCli('ingest/cli/seed.ts', [], { WHITECAP_DATABASE_URL: db.url });
    knex = knexFactory({ client: 'pg', connection: db.url, pool: { min: 0, max: 2 } });
    service = await startService({ WHITECAP_DATABASE_URL: db.url, WHITECAP_MAX_QUEUED_SAMPLES: String(BOUND) });
  });
  afterAll(async () => {
    if (unit) await endClient(unit);
    await service?.stop();
    await knex?.destroy();
    await db?.drop();
  });

  it('holds messages past the bound, keeps the connection, then stores every one once and in order', async () => {
    const filter = new PlantFilter({ design: plantDesign('tractor-position'), seed: 5, startTime: Date.now() - (MESSAGES + 1) * 1000 });
    const all: SimulatedSample[] = Array.from({ length: MESSAGES + 1 }, () => filter.next());
    unit = await connectUnit(service!.mqttPort, UNIT, demoDeviceSecret(UNIT));
    let closed = 0;
    unit.on('close', () => (closed += 1));
    // The first sample makes the estimator and today's partition known before the lock.
    await publishAcked(unit, topic, singlePayload(all[0]));

    const trx = await knex.transaction();
    await trx.raw('lock table innovation_samples in access exclusive mode');
    let acked = 0;
    const pending = all.slice(1).map((s) => publishAcked(unit!, topic, singlePayload(s)).then(() => (acked += 1)));

    // Wait until the service has taken what its bound allows and holds the rest.
    let metrics = '';
    const deadline = Date.now() + 15_000;
    while (Date.now() < deadline) {
      metrics = await (await fetch(`${service!.url}/metrics`)).text();
      if (metricValue(metrics, 'whitecap_publish_held_total') > 0) break;
      await new Promise((r) => setTimeout(r, 100));
    }
    expect(metricValue(metrics, 'whitecap_publish_held_total')).toBeGreaterThan(0);
    await new Promise((r) => setTimeout(r, 1000));
    metrics = await (await fetch(`${service!.url}/metrics`)).text();
    // Nothing acknowledged while nothing can be committed; the queue stays at its bound.
    expect(acked).toBe(0);
    expect(metricValue(metrics, 'whitecap_write_queue_samples')).toBeLessThanOrEqual(BOUND);
    expect(metricValue(metrics, 'whitecap_messages_in_total')).toBeLessThan(MESSAGES);
    expect(unit.connected).toBe(true);
    expect(closed).toBe(0);

    await trx.commit();
    await Promise.all(pending);
    expect(acked).toBe(MESSAGES);
    expect(closed).toBe(0);

    const seqs = (
      await knex('innovation_samples as s')
        .join('estimators as e', 'e.id', 's.estimator_id')
        .join('units as u', 'u.id', 'e.unit_id')
        .where({ 'u.key': UNIT })
        .orderBy('s.seq')
        .pluck('s.seq')
    ).map(Number);
    expect(seqs).toEqual(all.map((s) => s.seq));
    // The innovation comes back as sent (little-endian float32; written as a bytea array literal).
    const nus: Buffer[] = await knex('innovation_samples as s')
      .join('estimators as e', 'e.id', 's.estimator_id')
      .join('units as u', 'u.id', 'e.unit_id')
      .where({ 'u.key': UNIT })
      .orderBy('s.seq')
      .pluck('s.nu');
    const decoded = nus.map((b) => [b.readFloatLE(0), b.readFloatLE(4)]);
    expect(decoded).toEqual(all.map((s) => s.nu.map((v) => Math.fround(v))));
    // Checked in the order sent: no sequence gaps, no late samples, no lost-samples alert.
    const body = await (await fetch(`${service!.url}/metrics`)).text();
    expect(metricValue(body, 'whitecap_samples_stored_total')).toBe(MESSAGES + 1);
    const lostAlerts = await knex('alerts').where({ rule: 'lost-samples' }).count<{ count: string }[]>('* as count');
    expect(Number(lostAlerts[0].count)).toBe(0);
    await service!.stop();
    service = null;
    const checkpoint = await knex('estimator_checkpoints as c')
      .join('estimators as e', 'e.id', 'c.estimator_id')
      .join('units as u', 'u.id', 'e.unit_id')
      .where({ 'u.key': UNIT })
      .first('c.state');
    const counts = checkpoint.state.checks.sequence.counts;
    expect(counts).toMatchObject({ accepted: MESSAGES + 1, gaps: 0, lost: 0, late: 0, duplicates: 0 });
  });
});
