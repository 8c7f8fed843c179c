// Clock trouble. A unit whose clock is far off stamps its samples in the future or the
// past: those samples are quarantined with the reason 'clock' (and the message
// acknowledged, the good samples beside them stored). And the service's own time comes
// from one clock: started with it an hour ahead (WHITECAP_CLOCK_OFFSET_MS), the service
// judges sample times, stamps what it stores and reports its time by that clock.
import knexFactory, { type Knex } from 'knex';
import type { MqttClient } from 'mqtt';
import { innovationsTopic } from '../../ingest/src/broker/topics';
import { demoDeviceSecret } from '../../ingest/src/demo/saltmarsh';
import { PlantFilter, batchPayload, plantDesign, type SimulatedSample } from '../../simulators/src/index';
import { createTestDatabase, type TestDatabase } from '../support/database';
import { connectUnit, endClient, publishAcked } from '../support/mqtt';
import { runCli, startService, type ServiceHandle } from '../support/service';
import { health } from '../support/watch';

jest.setTimeout(90_000);

const HOUR = 3_600_000;
const MIN = 60_000;
const DAY = 24 * HOUR;

/** How far off the clock a quarantine reason says a sample was, in seconds. */
function secondsOff(reason: string): number {
  const m = /clock by (\d+) s/.exec(reason);
  return m ? Number(m[1]) : NaN;
}

/** Samples of a cabinet estimator, stamped at the given times (sequence numbers 1, 2, …). */
function stamped(times: number[], seed: number): SimulatedSample[] {
  const filter = new PlantFilter({ design: plantDesign('cabinet-thermal'), seed, reference: false });
  return times.map((t) => filter.next(t));
}

describe('faults: clock trouble', () => {
  const dbs: TestDatabase[] = [];
  const knexes: Knex[] = [];
  const services: ServiceHandle[] = [];
  const clients: MqttClient[] = [];

  const setUp = async (name: string, env: Record<string, string> = {}) => {
    const db = await createTestDatabase(name);
    dbs.push(db);
    await runCli('ingest/cli/seed.ts', [], { WHITECAP_DATABASE_URL: db.url });
    const knex = knexFactory({ client: 'pg', connection: db.url, pool: { min: 0, max: 2 } });
    knexes.push(knex);
    const service = await startService({ WHITECAP_DATABASE_URL: db.url, WHITECAP_NOTIFICATIONS: 'false', ...env });
    services.push(service);
    return { knex, service };
  };
  const publish = async (service: ServiceHandle, unit: string, estimator: string, payload: string) => {
    const client = await connectUnit(service.mqttPort, unit, demoDeviceSecret(unit));
    clients.push(client);
    await publishAcked(client, innovationsTopic(unit, estimator), payload);
  };
  const storedSeqs = async (knex: Knex, unit: string, estimator: string): Promise<number[]> =>
    (
      await knex('innovation_samples as s')
        .join('estimators as e', 'e.id', 's.estimator_id')
        .join('units as u', 'u.id', 'e.unit_id')
        .where({ 'u.key': unit, 'e.key': estimator })
        .orderBy('s.seq')
        .pluck('s.seq')
    ).map(Number);
  const quarantined = (knex: Knex, unit: string, estimator: string) =>
    knex('quarantine').where({ unit_key: unit, estimator_key: estimator }).orderBy('sample_index').select('reason_code', 'reason', 'sample_index', 'received_at');

  afterAll(async () => {
    for (const c of clients) await endClient(c);
    await Promise.all(services.map((s) => s.stop()));
    for (const k of knexes) await k.destroy();
    for (const db of dbs) await db.drop();
  });

  // Both services start at once: two tests, one wait.
  let normal: Promise<{ knex: Knex; service: ServiceHandle }>;
  let ahead: Promise<{ knex: Knex; service: ServiceHandle }>;
  beforeAll(() => {
    normal = setUp('faults_clock');
    ahead = setUp('faults_clock_ahead', { WHITECAP_CLOCK_OFFSET_MS: String(HOUR) });
    // Failures surface in the tests that await them.
    normal.catch(() => undefined);
    ahead.catch(() => undefined);
  });

  it('quarantines samples stamped far in the future or the past with the reason clock, and stores the rest', async () => {
    const { knex, service } = await normal;
    const now = Date.now();
    // One batch: good, a day ahead, a month behind, 30 minutes ahead, 2 minutes ahead (within the 5-minute allowance), good.
    const samples = stamped([now - 20_000, now + DAY, now - 30 * DAY, now + 30 * MIN, now + 2 * MIN, now - 10_000], 11);
    await publish(service, 'cabinet-06', 'thermal', batchPayload(samples));
    // A single sample of another estimator, two days behind, on its own.
    const [old] = stamped([now - 2 * DAY - 5 * MIN], 12);
    // (two days is within the 14-day retention: accepted)
    await publish(service, 'cabinet-06', 'charge', batchPayload([old]));
    const [ancient] = stamped([now - 15 * DAY], 13);
    await publish(service, 'cabinet-07', 'thermal', batchPayload([ancient]));

    expect(await storedSeqs(knex, 'cabinet-06', 'thermal')).toEqual([1, 5, 6]);
    const q = await quarantined(knex, 'cabinet-06', 'thermal');
    expect(q.map((r) => [r.sample_index, r.reason_code])).toEqual([
      [1, 'clock'],
      [2, 'clock'],
      [3, 'clock'],
    ]);
    expect(q[0].reason).toMatch(/ahead of the service clock/);
    expect(secondsOff(q[0].reason)).toBeCloseTo(DAY / 1000, -2);
    expect(q[1].reason).toMatch(/behind the service clock/);
    expect(secondsOff(q[1].reason)).toBeCloseTo((30 * DAY) / 1000, -2);
    expect(q[2].reason).toMatch(/ahead of the service clock/);
    expect(secondsOff(q[2].reason)).toBeCloseTo((30 * MIN) / 1000, -2);
    for (const r of q) expect(Math.abs(new Date(r.received_at).getTime() - now)).toBeLessThan(30_000);

    expect(await storedSeqs(knex, 'cabinet-06', 'charge')).toEqual([1]);
    expect(await storedSeqs(knex, 'cabinet-07', 'thermal')).toEqual([]);
    const q2 = await quarantined(knex, 'cabinet-07', 'thermal');
    expect(q2.map((r) => r.reason_code)).toEqual(['clock']);
    expect(q2[0].reason).toMatch(/behind the service clock .* 14 days behind/);

    // This service's clock is the wall's.
    const h = await health(service.url);
    expect(Math.abs(new Date(h.body.time).getTime() - Date.now())).toBeLessThan(10_000);
  });

  it('runs on its own clock when that clock is an hour ahead: times judged, stamped and reported by it', async () => {
    const { knex, service } = await ahead;
    const wall = Date.now();
    // The units' clocks are right; the service's is an hour ahead of them.
    const h = await health(service.url);
    const offset = new Date(h.body.time).getTime() - Date.now();
    expect(offset).toBeGreaterThan(HOUR - 10_000);
    expect(offset).toBeLessThan(HOUR + 10_000);

    // 30 minutes ahead of the wall is 30 minutes behind the service: accepted (the other
    // service quarantined that). 70 minutes ahead of the wall is 10 minutes ahead of it: quarantined.
    const samples = stamped([wall - 10_000, wall + 30 * MIN, wall + 70 * MIN], 21);
    await publish(service, 'cabinet-08', 'thermal', batchPayload(samples));
    expect(await storedSeqs(knex, 'cabinet-08', 'thermal')).toEqual([1, 2]);
    const q = await quarantined(knex, 'cabinet-08', 'thermal');
    expect(q.map((r) => [r.sample_index, r.reason_code])).toEqual([[2, 'clock']]);
    expect(q[0].reason).toMatch(/ahead of the service clock/);
    expect(secondsOff(q[0].reason)).toBeCloseTo((10 * MIN) / 1000, -2);

    // What it stores carries its time, not the wall's.
    const receivedAt = new Date(q[0].received_at).getTime();
    expect(receivedAt - wall).toBeGreaterThan(HOUR - 30_000);
    expect(receivedAt - wall).toBeLessThan(HOUR + 30_000);
    const status = await knex('estimator_status as s')
      .join('estimators as e', 'e.id', 's.estimator_id')
      .join('units as u', 'u.id', 'e.unit_id')
      .where({ 'u.key': 'cabinet-08', 'e.key': 'thermal' })
      .first('s.last_received_at');
    const lastReceived = new Date(status.last_received_at).getTime();
    expect(lastReceived - wall).toBeGreaterThan(HOUR - 30_000);
    expect(lastReceived - wall).toBeLessThan(HOUR + 30_000);
  });
});
