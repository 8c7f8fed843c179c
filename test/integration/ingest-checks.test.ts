// The checks on every sample, end to end: simulated Kalman filters (simulators/) publish
// over the real broker; the service checks, stores and raises alerts in the real database.
import knexFactory, { type Knex } from 'knex';
import { demoDeviceSecret } from '../../ingest/src/demo/saltmarsh';
import { publishSamples, type Fault, type PlantKind } from '../../simulators/src/index';
import { createTestDatabase, type TestDatabase } from '../support/database';
import { runCli, startService, type ServiceHandle } from '../support/service';

jest.setTimeout(120_000);

interface AlertRow {
  id: number;
  rule: string;
  state: string;
  severity: string;
  summary: string;
  evidence: { atSeq?: number };
  openedAtSeq: number;
}

describe('ingest: checks and alerts on simulated estimators', () => {
  let db: TestDatabase;
  let service: ServiceHandle;
  let knex: Knex;
  let url: string;

  const estimatorId = async (unit: string, estimator: string): Promise<number> => {
    const row = await knex('estimators as e').join('units as u', 'u.id', 'e.unit_id').where({ 'u.key': unit, 'e.key': estimator }).first('e.id');
    return Number(row.id);
  };
  // `openedAtSeq`: where the estimator's stream stood when the alert opened (the evidence
  // stored with the 'opened' event; the alert's own evidence is refreshed while it lasts).
  const alertsOf = async (id: number): Promise<AlertRow[]> =>
    knex('alerts as a')
      .join('alert_events as ev', function () {
        this.on('ev.alert_id', 'a.id').andOnVal('ev.kind', '=', 'opened');
      })
      .where({ 'a.estimator_id': id })
      .orderBy('a.id')
      .select('a.id', 'a.rule', 'a.state', 'a.severity', 'a.summary', 'a.evidence', knex.raw(`(ev.data->>'atSeq')::int as "openedAtSeq"`));
  const waitFor = async <T>(what: string, probe: () => Promise<T | null | undefined | false>, timeoutMs = 15_000): Promise<T> => {
    const deadline = Date.now() + timeoutMs;
    while (Date.now() < deadline) {
      const v = await probe();
      if (v) return v;
      await new Promise((r) => setTimeout(r, 100));
    }
    throw new Error(`timed out waiting for ${what}`);
  };
  const publish = (unit: string, estimator: string, kind: PlantKind, count: number, faults: Fault[] = [], extra: { revision?: number; batchSize?: number; seed?: number } = {}) =>
    publishSamples({
      url,
      unit,
      secret: demoDeviceSecret(unit),
      estimator,
      kind,
      count,
      faults,
      clock: 'model',
      batchSize: extra.batchSize ?? 50,
      revision: extra.revision,
      seed: extra.seed ?? 11,
    });

  beforeAll(async () => {
    db = await createTestDatabase('ingest_checks');
    await runCli('ingest/cli/seed.ts', [], { WHITECAP_DATABASE_URL: db.url });
    service = await startService({
      WHITECAP_DATABASE_URL: db.url,
      WHITECAP_STATUS_EVERY_MS: '100',
      WHITECAP_SWEEP_EVERY_MS: '100',
      WHITECAP_ALERT_HOLD_MS: '500',
      WHITECAP_SILENCE_FACTOR: '2',
      WHITECAP_SILENCE_FLOOR_MS: '0',
    });
    url = `mqtt://127.0.0.1:${service.mqttPort}`;
    knex = knexFactory({ client: 'pg', connection: db.url });
  });
  afterAll(async () => {
    await service?.stop();
    await knex?.destroy();
    await db?.drop();
  });

  it('raises no alert on a correctly tuned estimator over 20,000 samples, and stores every one', async () => {
    // Expected false alerts: the window tests page at p < 1e-6 and the CUSUM is designed
    // for an in-control ARL of 1e7 samples. Over 20,000 samples that is about 0.01
    // expected alerts (≈ 200 independent windows × 3 tests × 1e-6 × a sliding-window
    // factor of a few, plus 2 × 20,000 / 1e7), so the count must be 0.
    const result = await publish('tractor-01', 'position', 'tractor-position', 20_000, [], { batchSize: 100 });
    expect(result.acked).toBe(result.published);
    const id = await estimatorId('tractor-01', 'position');
    const stored = await knex('innovation_samples').where({ estimator_id: id }).count<{ count: number }[]>('* as count');
    expect(Number(stored[0].count)).toBe(20_000);
    await new Promise((r) => setTimeout(r, 500)); // let a sweep look at it
    expect(await alertsOf(id)).toEqual([]);
    const status = await knex('estimator_status').where({ estimator_id: id }).first();
    expect(Number(status.samples_total)).toBe(20_000);
    expect(Number(status.last_seq)).toBe(20_000);
  });

  it('raises a NIS or CUSUM alert within 150 samples of the measurement noise growing 3×, and clears it after the fault ends', async () => {
    const faults: Fault[] = [{ kind: 'noise', factor: 3, when: { fromSeq: 1001, toSeq: 1800 } }];
    await publish('cabinet-02', 'thermal', 'cabinet-thermal', 3000, faults);
    const id = await estimatorId('cabinet-02', 'thermal');
    const alerts = await waitFor('an alert', async () => (await alertsOf(id)).filter((a) => ['nis-window', 'cusum-drift'].includes(a.rule)));
    const first = alerts[0];
    expect(first.severity).toMatch(/critical|warning/);
    expect(first.openedAtSeq - 1000).toBeGreaterThan(0);
    expect(first.openedAtSeq - 1000).toBeLessThanOrEqual(150);
    // 1,200 healthy samples after the fault, then the 500 ms hold: every alert clears by itself.
    await waitFor('the alerts to clear', async () => (await alertsOf(id)).every((a) => a.state === 'resolved'));
    // (The notification side adds its own entries: paged, or why not.)
    const events = await knex('alert_events').where({ alert_id: first.id }).whereNotIn('kind', ['paged', 'not-paged']).orderBy('id').pluck('kind');
    expect(events).toEqual(['opened', 'cleared']);
  });

  it('raises a NIS window or whiteness alert within 300 samples on a design revision whose process noise is set too low', async () => {
    await publish('tractor-33', 'position', 'tractor-position', 1000, [], { revision: 2 });
    const id = await estimatorId('tractor-33', 'position');
    const alerts = await waitFor('an alert', async () => (await alertsOf(id)).filter((a) => ['nis-window', 'whiteness', 'cusum-drift'].includes(a.rule)));
    expect(Math.min(...alerts.map((a) => a.openedAtSeq))).toBeLessThanOrEqual(300);
    expect(alerts.every((a) => a.state === 'open')).toBe(true); // the fault persists
  });

  it('raises a bias alert within 200 samples of a temperature sensor offset, and clears it after', async () => {
    const faults: Fault[] = [{ kind: 'bias', offset: 4, component: 0, when: { fromSeq: 1001, toSeq: 1600 } }];
    await publish('cabinet-03', 'thermal', 'cabinet-thermal', 2800, faults);
    const id = await estimatorId('cabinet-03', 'thermal');
    const bias = await waitFor('a bias alert', async () => (await alertsOf(id)).find((a) => a.rule === 'bias'));
    expect(bias.summary).toMatch(/component 1/);
    expect(bias.openedAtSeq - 1000).toBeLessThanOrEqual(200);
    await waitFor('the alerts to clear', async () => (await alertsOf(id)).every((a) => a.state === 'resolved'));
  });

  it('raises a lost-samples alert when 5 % of the samples go missing', async () => {
    const faults: Fault[] = [{ kind: 'dropout', fraction: 0.05, when: { fromSeq: 201, toSeq: 1200 } }];
    await publish('cabinet-07', 'thermal', 'cabinet-thermal', 1200, faults, { batchSize: 1 });
    const id = await estimatorId('cabinet-07', 'thermal');
    const lost = await waitFor('a lost-samples alert', async () => (await alertsOf(id)).find((a) => a.rule === 'lost-samples'));
    expect(lost.summary).toMatch(/samples were lost/);
  });

  it('shows the alerts in the API to a signed-in user, and to nobody else', async () => {
    expect((await fetch(`${service.url}/api/alerts`)).status).toBe(401);
    const signIn = await fetch(`${service.url}/api/auth/sign-in`, {
      method: 'POST',
      headers: { 'content-type': 'application/json' },
      body: JSON.stringify({ email: 'viewer@saltmarsh.example', password: 'saltmarsh-viewer' }),
    });
    const { accessToken } = await signIn.json();
    const res = await fetch(`${service.url}/api/alerts?state=live&limit=100`, { headers: { authorization: `Bearer ${accessToken}` } });
    expect(res.status).toBe(200);
    const body = await res.json();
    const tractor33 = body.items.filter((a: { unitKey: string }) => a.unitKey === 'tractor-33');
    expect(tractor33.length).toBeGreaterThan(0);
    expect(tractor33[0]).toEqual(expect.objectContaining({ estimatorKey: 'position', siteKey: 'south-yard', state: 'open' }));
    const bad = await fetch(`${service.url}/api/alerts?state=whatever`, { headers: { authorization: `Bearer ${accessToken}` } });
    expect(bad.status).toBe(400);
    expect(bad.headers.get('content-type')).toContain('application/problem+json');
  });

  it('marks an estimator silent and raises a silence alert when it stops publishing, and clears it when it comes back', async () => {
    const id = await estimatorId('cabinet-05', 'thermal');
    await publish('cabinet-05', 'thermal', 'cabinet-thermal', 200);
    // Expected interval 1 s, silence factor 2: silent 2 s after the last message.
    const silence = await waitFor('a silence alert', async () => (await alertsOf(id)).find((a) => a.rule === 'silence'), 10_000);
    expect(silence.severity).toBe('critical');
    const status = await knex('estimator_status').where({ estimator_id: id }).first();
    expect(status.verdict).toBe('silent');
    // It comes back (later sequence numbers, fresh times).
    await publishSamples({ url, unit: 'cabinet-05', secret: demoDeviceSecret('cabinet-05'), estimator: 'thermal', kind: 'cabinet-thermal', count: 20, clock: 'wall', seed: 12 });
    await waitFor('the silence alert to clear', async () => (await alertsOf(id)).find((a) => a.rule === 'silence')?.state === 'resolved');
    const after = await knex('estimator_status').where({ estimator_id: id }).first();
    expect(after.verdict).not.toBe('silent');
  });
});
