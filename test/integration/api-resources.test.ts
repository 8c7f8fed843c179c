// The web API's resources against the real service, database and broker, with data
// published by simulated estimators.
import { demoDeviceSecret } from '../../ingest/src/demo/saltmarsh';
import { publishSamples, type Fault } from '../../simulators/src/index';
import type { AlertDetail, AlertList, EstimatorSeries, FleetResponse, QuarantineSummary } from '../../shared/src/api/api-types';
import { createTestDatabase, type TestDatabase } from '../support/database';
import { api, signIn, type Session } from '../support/api';
import { runCli, startService, type ServiceHandle } from '../support/service';
import { innovationsTopic } from '../../ingest/src/broker/topics';
import { connectUnit, endClient, publishAcked } from '../support/mqtt';

jest.setTimeout(120_000);

describe('API resources', () => {
  let db: TestDatabase;
  let service: ServiceHandle;
  let viewer: Session;
  let responder: Session;
  let designer: Session;
  let url: string;

  beforeAll(async () => {
    db = await createTestDatabase('api_resources');
    await runCli('ingest/cli/seed.ts', [], { WHITECAP_DATABASE_URL: db.url });
    service = await startService({ WHITECAP_DATABASE_URL: db.url, WHITECAP_STATUS_EVERY_MS: '100', WHITECAP_SWEEP_EVERY_MS: '100' });
    url = `mqtt://127.0.0.1:${service.mqttPort}`;
    const publish = (unit: string, estimator: string, kind: 'tractor-position' | 'cabinet-thermal', count: number, revision = 1, faults: Fault[] = []) =>
      publishSamples({ url, unit, secret: demoDeviceSecret(unit), estimator, kind, count, revision, faults, clock: 'model', batchSize: 100, seed: 5 });
    await publish('tractor-01', 'position', 'tractor-position', 3600);
    await publish('tractor-34', 'position', 'tractor-position', 1200, 2); // process noise set too low
    await publish('cabinet-04', 'thermal', 'cabinet-thermal', 1200, 1, [{ kind: 'noise', factor: 3, when: { fromSeq: 200 } }]);
    const bad = await connectUnit(service.mqttPort, 'cabinet-06', demoDeviceSecret('cabinet-06'));
    await publishAcked(bad, innovationsTopic('cabinet-06', 'charge'), 'not json at all');
    await endClient(bad);
    viewer = await signIn(service.url, 'viewer@saltmarsh.example', 'saltmarsh-viewer');
    responder = await signIn(service.url, 'responder@saltmarsh.example', 'saltmarsh-responder');
    designer = await signIn(service.url, 'designer@saltmarsh.example', 'saltmarsh-designer');
    await new Promise((r) => setTimeout(r, 500)); // a sweep writes the status rows
  });
  afterAll(async () => {
    await service?.stop();
    await db?.drop();
  });

  it('gives the fleet summary: every estimator, counts by verdict, live alerts, sorted worst first', async () => {
    const { status, body } = await api<FleetResponse>(service.url, viewer, '/fleet?limit=100');
    expect(status).toBe(200);
    expect(body.total).toBe(64);
    expect(Object.values(body.counts).reduce((a, b) => a + b, 0)).toBe(64);
    expect(body.counts.inconsistent).toBeGreaterThanOrEqual(2);
    expect(body.liveAlerts.critical + body.liveAlerts.warning).toBeGreaterThan(0);
    // Default sort: worst first (inconsistent, silent, marginal, consistent), then those that never reported.
    const rank = { consistent: 1, marginal: 2, silent: 3, inconsistent: 4 };
    const ranks = body.items.map((i) => (i.lastSampleAt === null ? 0 : rank[i.verdict]));
    expect(body.items[0].verdict).toBe('inconsistent');
    expect([...ranks].sort((a, b) => b - a)).toEqual(ranks);
    const t1 = body.items.find((i) => i.unitKey === 'tractor-01')!;
    expect(t1.samplesTotal).toBe(3600);
    expect(t1.window?.nis?.expected).toBe(2);
    expect(t1.lastSampleAgeMs).toBeGreaterThanOrEqual(0);
    // Fleet-wide false discovery control flags the mistuned ones, not the healthy one.
    expect(body.discoveries.estimatorIds).toContain(body.items.find((i) => i.unitKey === 'tractor-34')!.id);
    expect(body.discoveries.estimatorIds).not.toContain(t1.id);
  });

  it('filters, sorts and pages the fleet on the server', async () => {
    const page = await api<FleetResponse>(service.url, viewer, '/fleet?site=cabinet-row&sort=unit&order=asc&limit=5&offset=5');
    expect(page.body.total).toBe(24);
    expect(page.body.items).toHaveLength(5);
    expect(page.body.items.every((i) => i.siteKey === 'cabinet-row')).toBe(true);
    expect(page.body.items.map((i) => i.unitKey)).toEqual([...page.body.items.map((i) => i.unitKey)].sort());
    const text = await api<FleetResponse>(service.url, viewer, '/fleet?q=tractor-3&verdict=inconsistent');
    expect(text.body.items.map((i) => i.unitKey)).toContain('tractor-34');
    const bad = await api(service.url, viewer, '/fleet?sort=password');
    expect(bad.status).toBe(400);
  });

  it('gives an estimator\'s series down-sampled to the points asked for, with its chi-square band', async () => {
    const fleet = await api<FleetResponse>(service.url, viewer, '/fleet?q=tractor-01');
    const id = fleet.body.items[0].id;
    const to = new Date(Date.now() + 60_000).toISOString();
    const from = new Date(Date.now() - 2 * 3_600_000).toISOString();
    const { status, body } = await api<EstimatorSeries>(service.url, viewer, `/estimators/${id}/series?from=${from}&to=${to}&points=200`);
    expect(status).toBe(200);
    expect(body.samples).toBe(3600);
    expect(body.points.length).toBeLessThanOrEqual(200);
    expect(body.points.reduce((a, p) => a + p.count, 0)).toBe(3600);
    for (const p of body.points) expect(p.nisMin).toBeLessThanOrEqual(p.nisMax);
    // For m = 2 the chi-square quantiles have a closed form: F⁻¹(p) = −2 ln(1 − p).
    // Two-sided at α = 0.001: [−2 ln(0.9995), −2 ln(0.0005)] = [0.0010003, 15.2018].
    expect(body.band.lower).toBeCloseTo(-2 * Math.log(0.9995), 6);
    expect(body.band.upper).toBeCloseTo(-2 * Math.log(0.0005), 4);
    // A consistent filter: whitened components near N(0, 1), autocorrelations inside their bound.
    expect(body.histogram.counts).toHaveLength(2);
    expect(body.histogram.counts[0].reduce((a, b) => a + b, 0)).toBe(3600);
    expect(Math.abs(body.bias.mean[0])).toBeLessThan(body.bias.bound);
    expect(body.autocorrelation.values[0]).toHaveLength(10);
    // A long range is drawn from the minute rollups: whole-minute buckets, every sample counted once.
    const day = await api<EstimatorSeries>(service.url, viewer, `/estimators/${id}/series?from=${new Date(Date.now() - 24 * 3_600_000).toISOString()}&to=${to}&points=2000`);
    expect(day.body.bucketMs % 60_000).toBe(0);
    expect(day.body.points.reduce((a, p) => a + p.count, 0)).toBe(3600);
    expect(Math.max(...day.body.points.map((p) => p.nisMax))).toBe(Math.max(...body.points.map((p) => p.nisMax)));
  });

  it('lists alerts and shows one with its evidence; a responder acknowledges, annotates and resolves it with an audit trail', async () => {
    const list = await api<AlertList>(service.url, viewer, '/alerts?state=open&sort=severity');
    expect(list.status).toBe(200);
    const alert = list.body.items.find((a) => a.unitKey === 'cabinet-04')!;
    expect(alert).toBeDefined();
    const detail = await api<AlertDetail>(service.url, viewer, `/alerts/${alert.id}`);
    expect(detail.body.evidence).toEqual(expect.objectContaining({ check: expect.any(String) }));
    expect(detail.body.events[0].kind).toBe('opened');

    // A viewer may not act, and nothing changes.
    expect((await api(service.url, viewer, `/alerts/${alert.id}/acknowledge`, { method: 'POST', body: {} })).status).toBe(403);
    expect((await api<AlertDetail>(service.url, viewer, `/alerts/${alert.id}`)).body.state).toBe('open');

    const ack = await api<AlertDetail>(service.url, responder, `/alerts/${alert.id}/acknowledge`, { method: 'POST', body: { note: 'looking at the sensor' } });
    expect(ack.status).toBe(200);
    expect(ack.body.state).toBe('acknowledged');
    expect(ack.body.acknowledgedBy).toBe('Ravi Castellan (on call)');
    expect((await api(service.url, responder, `/alerts/${alert.id}/acknowledge`, { method: 'POST', body: {} })).status).toBe(409);
    const note = await api<AlertDetail>(service.url, responder, `/alerts/${alert.id}/notes`, { method: 'POST', body: { text: 'sensor cable swapped' } });
    expect(note.status).toBe(201);
    expect((await api(service.url, responder, `/alerts/${alert.id}/notes`, { method: 'POST', body: { text: '' } })).status).toBe(400);
    const resolved = await api<AlertDetail>(service.url, responder, `/alerts/${alert.id}/resolve`, { method: 'POST', body: {} });
    expect(resolved.body.state).toBe('resolved');
    // (Paging entries of the notification side are left out here; notifications.test.ts has them.)
    const trail = resolved.body.events.filter((e) => e.kind !== 'paged' && e.kind !== 'not-paged');
    expect(trail.map((e) => [e.kind, e.actor])).toEqual([
      ['opened', null],
      ['acknowledged', 'Ravi Castellan (on call)'],
      ['note', 'Ravi Castellan (on call)'],
      ['resolved', 'Ravi Castellan (on call)'],
    ]);
    expect(trail[2].note).toBe('sensor cable swapped');
  });

  it('shows the quarantine to designers (not viewers): what, from which unit, why, how often', async () => {
    expect((await api(service.url, viewer, '/quarantine')).status).toBe(403);
    const list = await api(service.url, designer, '/quarantine?unit=cabinet-06');
    expect(list.body.items[0]).toEqual(expect.objectContaining({ unitKey: 'cabinet-06', reasonCode: 'not_json', payloadPreview: 'not json at all' }));
    const summary = await api<QuarantineSummary>(service.url, designer, '/quarantine/summary');
    expect(summary.body.rows).toContainEqual(expect.objectContaining({ unitKey: 'cabinet-06', reasonCode: 'not_json', count: 1 }));
  });

  it('streams verdict and alert changes to a signed-in client as server-sent events', async () => {
    const controller = new AbortController();
    const res = await fetch(`${service.url}/api/events`, { headers: { authorization: `Bearer ${viewer.accessToken}` }, signal: controller.signal });
    expect(res.status).toBe(200);
    expect(res.headers.get('content-type')).toContain('text/event-stream');
    const reader = res.body!.getReader();
    const received: string[] = [];
    const reading = (async () => {
      const decoder = new TextDecoder();
      let text = '';
      while (!received.some((l) => l.startsWith('event: alert'))) {
        const { value, done } = await reader.read();
        if (done) break;
        text += decoder.decode(value);
        received.push(...text.split('\n'));
        text = '';
      }
    })();
    // A fault on another estimator: its alert arrives on the stream.
    await publishSamples({ url, unit: 'cabinet-05', secret: demoDeviceSecret('cabinet-05'), estimator: 'thermal', kind: 'cabinet-thermal', count: 600, faults: [{ kind: 'noise', factor: 4, when: { fromSeq: 150 } }], clock: 'model', batchSize: 50, seed: 9 });
    await Promise.race([reading, new Promise((r) => setTimeout(r, 10_000))]);
    controller.abort();
    expect(received).toContain('event: verdict');
    expect(received).toContain('event: alert');
    expect((await fetch(`${service.url}/api/events`)).status).toBe(401);
  });

  it('lists the designs with their revisions and how many estimators run each', async () => {
    const { body } = await api<{ items: { key: string; revisions: { revision: number; estimators: number }[] }[] }>(service.url, viewer, '/designs');
    const tractor = body.items.find((d) => d.key === 'tractor-position')!;
    expect(tractor.revisions.map((r) => [r.revision, r.estimators])).toEqual([
      [1, 32],
      [2, 8],
    ]);
  });

  it('serves its OpenAPI 3.1 document and an interactive page for it', async () => {
    const doc = await (await fetch(`${service.url}/api/openapi.json`)).json();
    expect(doc.openapi).toBe('3.1.0');
    expect(doc.paths['/alerts/{id}/acknowledge'].post['x-whitecap-ability']).toBe('respond');
    const page = await fetch(`${service.url}/api/docs/`);
    expect(page.status).toBe(200);
    expect(await page.text()).toContain('swagger-ui-bundle.js');
    expect((await fetch(`${service.url}/api/docs/swagger-ui-bundle.js`)).status).toBe(200);
  });
});
