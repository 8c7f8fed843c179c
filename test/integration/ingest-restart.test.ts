// Restarting the service mid-stream: no acknowledged sample is lost, and the checks
// resume from their checkpoint instead of starting over.
import knexFactory, { type Knex } from 'knex';
import type { MqttClient } from 'mqtt';
import { innovationsTopic } from '../../ingest/src/broker/topics';
import { demoDeviceSecret } from '../../ingest/src/demo/saltmarsh';
import { PlantFilter, batchPayload, plantDesign, type SimulatedSample } from '../../simulators/src/index';
import { createTestDatabase, type TestDatabase } from '../support/database';
import { connectUnit, endClient, publishAcked } from '../support/mqtt';
import { runCli, startService, type ServiceHandle } from '../support/service';

jest.setTimeout(120_000);

const UNIT = 'tractor-02';
const topic = innovationsTopic(UNIT, 'position');

function samples(count: number, seed: number): SimulatedSample[] {
  const filter = new PlantFilter({ design: plantDesign('tractor-position'), seed, startTime: Date.now() - count * 1000 });
  return Array.from({ length: count }, () => filter.next());
}

describe('ingest: restarting the service', () => {
  let db: TestDatabase;
  let knex: Knex;
  const env = () => ({ WHITECAP_DATABASE_URL: db.url, WHITECAP_CHECKPOINT_EVERY_MS: '200' });

  const stored = async (): Promise<number[]> =>
    (await knex('innovation_samples as s')
      .join('estimators as e', 'e.id', 's.estimator_id')
      .join('units as u', 'u.id', 'e.unit_id')
      .where({ 'u.key': UNIT })
      .orderBy('s.seq')
      .pluck('s.seq')).map(Number);
  const checkpointSamples = async (): Promise<number> => {
    const row = await knex('estimator_checkpoints as c')
      .join('estimators as e', 'e.id', 'c.estimator_id')
      .join('units as u', 'u.id', 'e.unit_id')
      .where({ 'u.key': UNIT })
      .first('c.samples_seen');
    return Number(row?.samples_seen ?? 0);
  };

  beforeEach(async () => {
    db = await createTestDatabase('ingest_restart');
    await runCli('ingest/cli/seed.ts', [], { WHITECAP_DATABASE_URL: db.url });
    knex = knexFactory({ client: 'pg', connection: db.url });
  });
  afterEach(async () => {
    await knex?.destroy();
    await db?.drop();
  });

  it('resumes the checks from their checkpoint after a graceful restart, with every sample stored once', async () => {
    const all = samples(4000, 21);
    let service: ServiceHandle = await startService(env());
    let unit = await connectUnit(service.mqttPort, UNIT, demoDeviceSecret(UNIT));
    for (let i = 0; i < 2000; i += 100) await publishAcked(unit, topic, batchPayload(all.slice(i, i + 100)));
    await endClient(unit);
    expect(await service.stop('SIGTERM')).toBe(0);
    expect(await checkpointSamples()).toBe(2000);

    service = await startService(env());
    unit = await connectUnit(service.mqttPort, UNIT, demoDeviceSecret(UNIT));
    // The last batch before the restart is sent again (a unit that never saw its PUBACK would): stored once.
    for (let i = 1900; i < 4000; i += 100) await publishAcked(unit, topic, batchPayload(all.slice(i, i + 100)));
    await endClient(unit);
    expect(await service.stop('SIGTERM')).toBe(0);

    const seqs = await stored();
    expect(seqs).toHaveLength(4000);
    expect(seqs[0]).toBe(1);
    expect(seqs[3999]).toBe(4000);
    // Resumed, not restarted: the checks have seen all 4,000 samples (the resent 100 were duplicates).
    expect(await checkpointSamples()).toBe(4000);
    const alerts = await knex('alerts').where({ rule: 'lost-samples' });
    expect(alerts).toEqual([]);
  });

  it('loses no acknowledged sample when the service is killed (SIGKILL) mid-stream', async () => {
    const all = samples(3000, 22);
    const service = await startService(env());
    const unit: MqttClient = await connectUnit(service.mqttPort, UNIT, demoDeviceSecret(UNIT));
    const acked: number[] = [];
    let killed = false;
    const publishing = (async () => {
      // Ten batches in flight at a time; each batch's PUBACK says its samples are committed.
      for (let i = 0; i < all.length && !killed; i += 200) {
        const group = [];
        for (let j = i; j < Math.min(i + 200, all.length); j += 20) {
          const batch = all.slice(j, j + 20);
          group.push(publishAcked(unit, topic, batchPayload(batch)).then(() => acked.push(...batch.map((s) => s.seq)), () => undefined));
        }
        await Promise.all(group);
      }
    })();
    // Kill it mid-stream: once a good part has been acknowledged, with more in flight.
    const deadline = Date.now() + 20_000;
    while (acked.length < 600 && Date.now() < deadline) await new Promise((r) => setTimeout(r, 5));
    killed = true;
    await service.stop('SIGKILL');
    await publishing;
    await endClient(unit);

    expect(acked.length).toBeGreaterThan(0);
    const seqs = new Set(await stored());
    const missing = acked.filter((s) => !seqs.has(s));
    expect(missing).toEqual([]);

    // Back up: the checks resume from the last checkpoint (at most one checkpoint period behind).
    const again = await startService(env());
    const unit2 = await connectUnit(again.mqttPort, UNIT, demoDeviceSecret(UNIT));
    const next = all.filter((s) => !seqs.has(s.seq)).slice(0, 200);
    if (next.length > 0) await publishAcked(unit2, topic, batchPayload(next));
    await endClient(unit2);
    expect(await again.stop('SIGTERM')).toBe(0);
    const after = new Set(await stored());
    for (const s of [...seqs, ...next.map((x) => x.seq)]) expect(after.has(s)).toBe(true);
    expect(await checkpointSamples()).toBeGreaterThan(0);
  });

  it('does not count the time the service was down as silence: after a restart an estimator has its silence period from the start', async () => {
    const service = await startService(env());
    const unit = await connectUnit(service.mqttPort, UNIT, demoDeviceSecret(UNIT));
    await publishAcked(unit, topic, batchPayload(samples(50, 23)));
    await endClient(unit);
    expect(await service.stop('SIGTERM')).toBe(0);
    // As if the service had been down for an hour.
    const id = (await knex('estimators as e').join('units as u', 'u.id', 'e.unit_id').where({ 'u.key': UNIT }).first('e.id')).id;
    await knex('estimator_status').where({ estimator_id: id }).update({ last_received_at: new Date(Date.now() - 3_600_000) });

    const silenceEnv = { ...env(), WHITECAP_SWEEP_EVERY_MS: '100', WHITECAP_SILENCE_FACTOR: '2', WHITECAP_SILENCE_FLOOR_MS: '3000' };
    const started = Date.now(); // the service starts after this
    const again = await startService(silenceEnv);
    const silenceAlerts = () => knex('alerts').where({ estimator_id: id, rule: 'silence' }).select('opened_at');
    try {
      await new Promise((r) => setTimeout(r, Math.max(0, started + 1500 - Date.now())));
      expect(await silenceAlerts()).toEqual([]);
      // The unit stays quiet: silent once the floor has passed since the start.
      const deadline = Date.now() + 15_000;
      let alerts = await silenceAlerts();
      while (alerts.length === 0 && Date.now() < deadline) {
        await new Promise((r) => setTimeout(r, 100));
        alerts = await silenceAlerts();
      }
      expect(alerts).toHaveLength(1);
      expect(new Date(alerts[0].opened_at).getTime() - started).toBeGreaterThanOrEqual(3000);
    } finally {
      await again.stop('SIGTERM');
    }
  });
});
