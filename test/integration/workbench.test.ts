// The designer's workbench end to end: simulated tractors publish over the real broker,
// the service stores their innovations in the real database; a designer exports them
// (CSV, JSON), runs a retune study on the demo's mistuned cohort, and turns it into a
// draft design revision.
import knexFactory, { type Knex } from 'knex';
import pg from 'pg';
import { demoDeviceSecret } from '../../ingest/src/demo/saltmarsh';
import { dayStart, PartitionManager } from '../../ingest/src/pipeline/partitions';
import { lqr } from '../../shared/src/design/index';
import type { DesignSummary, RetuneStudy, StudyListItem } from '../../shared/src/api/api-types';
import { plantDesign, publishSamples } from '../../simulators/src/index';
import { api, signIn, type Session } from '../support/api';
import { createTestDatabase, type TestDatabase } from '../support/database';
import { runCli, startService, type ServiceHandle } from '../support/service';

jest.setTimeout(120_000);

const CAUTION =
  "Advisory only: these estimates and the proposed gain must be validated in simulation and under your organisation's own safety process before they reach a machine; applicable codes and licensed engineering practice prevail.";
const SAMPLES = 3000;
const COHORT = ['tractor-33', 'tractor-34', 'tractor-35'];

async function waitFor<T>(what: string, probe: () => Promise<T | null | undefined | false>, timeoutMs = 20_000): Promise<T> {
  const deadline = Date.now() + timeoutMs;
  while (Date.now() < deadline) {
    const v = await probe();
    if (v) return v;
    await new Promise((r) => setTimeout(r, 100));
  }
  throw new Error(`timed out waiting for ${what}`);
}

describe('workbench: residual export, retune study, draft revision', () => {
  let db: TestDatabase;
  let service: ServiceHandle;
  let knex: Knex;
  let designer: Session;
  let viewer: Session;
  const ids: Record<string, number> = {};
  let revision1Id: number;
  let revision2Id: number;
  let from: string;
  let to: string;

  const raw = (session: Session, path: string) => fetch(`${service.url}/api${path}`, { headers: { authorization: `Bearer ${session.accessToken}` } });
  const residuals = (session: Session, q: Record<string, string | number>) =>
    raw(session, `/residuals?${new URLSearchParams(Object.entries(q).map(([k, v]) => [k, String(v)])).toString()}`);

  beforeAll(async () => {
    db = await createTestDatabase('workbench');
    await runCli('ingest/cli/seed.ts', [], { WHITECAP_DATABASE_URL: db.url });
    // A small pool: a connection an export failed to give back would soon starve the API.
    service = await startService({ WHITECAP_DATABASE_URL: db.url, WHITECAP_DB_POOL_MAX: '4' });
    knex = knexFactory({ client: 'pg', connection: db.url });
    for (const unit of [...COHORT, 'tractor-01']) {
      const row = await knex('estimators as e').join('units as u', 'u.id', 'e.unit_id').where({ 'u.key': unit, 'e.key': 'position' }).first('e.id', 'e.design_revision_id');
      ids[unit] = Number(row.id);
      if (unit === 'tractor-01') revision1Id = Number(row.design_revision_id);
      else revision2Id = Number(row.design_revision_id);
    }
    // Each tractor's plant runs the true process noise (revision 1's); revision 2's filters assume 100× less.
    const url = `mqtt://127.0.0.1:${service.mqttPort}`;
    const published = await Promise.all(
      [...COHORT.map((unit, i) => ({ unit, revision: 2, seed: 31 + i })), { unit: 'tractor-01', revision: 1, seed: 41 }].map((p) =>
        publishSamples({
          url,
          unit: p.unit,
          secret: demoDeviceSecret(p.unit),
          estimator: 'position',
          kind: 'tractor-position',
          count: SAMPLES,
          clock: 'model',
          batchSize: 100,
          revision: p.revision,
          seed: p.seed,
        }),
      ),
    );
    for (const r of published) expect(r.acked).toBe(r.published);
    await waitFor('every sample stored', async () => {
      const rows = await knex('innovation_samples').whereIn('estimator_id', Object.values(ids)).groupBy('estimator_id').select('estimator_id', knex.raw('count(*)::int as n'));
      return rows.length === 4 && rows.every((r) => Number(r.n) === SAMPLES);
    });
    from = new Date(Date.now() - 2 * 3_600_000).toISOString();
    to = new Date(Date.now() + 60_000).toISOString();
    designer = await signIn(service.url, 'designer@saltmarsh.example', 'saltmarsh-designer');
    viewer = await signIn(service.url, 'viewer@saltmarsh.example', 'saltmarsh-viewer');
  });
  afterAll(async () => {
    await service?.stop();
    await knex?.destroy();
    await db?.drop();
  });

  it('exports one estimator\'s residuals as CSV: every sample in the window, documented columns, values that read back exactly', async () => {
    const id = ids['tractor-33'];
    const res = await residuals(designer, { estimatorIds: id, from, to, format: 'csv' });
    expect(res.status).toBe(200);
    expect(res.headers.get('content-type')).toMatch(/^text\/csv/);
    expect(res.headers.get('content-disposition')).toMatch(/^attachment; filename="residuals-tractor-33-position-\d{8}T\d{6}Z-\d{8}T\d{6}Z\.csv"$/);
    expect(Number(res.headers.get('x-whitecap-estimated-rows'))).toBeGreaterThan(0);
    const lines = (await res.text()).split('\r\n').filter((l) => l.length);
    expect(lines[0]).toBe('estimator_id,unit,estimator,seq,t,nis,nu_1,nu_2');
    const stored = await knex('innovation_samples').where('estimator_id', id).where('t', '>=', new Date(from)).where('t', '<', new Date(to)).orderBy('seq').select('seq', 'nis', 'nu');
    expect(lines.length - 1).toBe(stored.length);
    expect(stored.length).toBe(SAMPLES);
    const rows = lines.slice(1).map((l) => l.split(','));
    rows.forEach((f, i) => {
      expect(f).toHaveLength(8);
      expect([Number(f[0]), f[1], f[2], Number(f[3])]).toEqual([id, 'tractor-33', 'position', i + 1]); // time order = sequence order here
      expect(Number.isNaN(Date.parse(f[4]))).toBe(false);
      // nis is real (float4), nu little-endian float32: the text reads back to the same float32
      expect(Math.fround(Number(f[5]))).toBe(Math.fround(Number(stored[i].nis)));
      const nu: Buffer = stored[i].nu;
      expect([Math.fround(Number(f[6])), Math.fround(Number(f[7]))]).toEqual([nu.readFloatLE(0), nu.readFloatLE(4)]);
    });
  });

  it('exports as a streamed JSON array, honours the row limit, and exports several estimators in order', async () => {
    const id = ids['tractor-34'];
    const res = await residuals(designer, { estimatorIds: id, from, to, format: 'json' });
    expect(res.status).toBe(200);
    expect(res.headers.get('content-type')).toMatch(/^application\/json/);
    expect(res.headers.get('content-disposition')).toMatch(/\.json"$/);
    const rows = (await res.json()) as { estimatorId: number; unit: string; estimator: string; seq: number; t: string; nis: number; nu: number[] }[];
    expect(rows).toHaveLength(SAMPLES);
    expect(rows[0]).toEqual({ estimatorId: id, unit: 'tractor-34', estimator: 'position', seq: 1, t: expect.any(String), nis: expect.any(Number), nu: [expect.any(Number), expect.any(Number)] });
    expect(rows.every((r, i) => r.seq === i + 1 && r.nu.length === 2 && r.nu.every(Number.isFinite) && r.nis >= 0)).toBe(true);

    const limited = await residuals(designer, { estimatorIds: id, from, to, format: 'json', limit: 10 });
    expect(((await limited.json()) as unknown[]).length).toBe(10);

    const both = await residuals(designer, { estimatorIds: `${ids['tractor-35']},${ids['tractor-01']}`, from, to });
    const lines = (await both.text()).split('\r\n').filter((l) => l.length);
    expect(lines).toHaveLength(1 + 2 * SAMPLES);
    const order = lines.slice(1).map((l) => Number(l.split(',')[0]));
    expect(order).toEqual([...order].sort((a, b) => a - b));

    const empty = await residuals(designer, { estimatorIds: id, from: '2020-01-01T00:00:00Z', to: '2020-01-02T00:00:00Z', format: 'json' });
    expect(await empty.json()).toEqual([]);
  });

  it('refuses the export to a viewer (403) and bad ids or windows (400, problem+json)', async () => {
    const id = ids['tractor-33'];
    expect((await residuals(viewer, { estimatorIds: id, from, to })).status).toBe(403);
    const bad: Record<string, string | number>[] = [
      { estimatorIds: 'one,two', from, to },
      { estimatorIds: 999_999, from, to },
      { estimatorIds: id, from: to, to: from },
      { estimatorIds: id, from: '2026-01-01T00:00:00Z', to: '2026-02-15T00:00:00Z' },
      { estimatorIds: id, from: 'yesterday', to },
      { estimatorIds: id, from, to, format: 'xml' },
      { estimatorIds: id, from, to, limit: 0 },
    ];
    for (const q of bad) {
      const res = await residuals(designer, q);
      expect([q, res.status]).toEqual([q, 400]);
      expect(res.headers.get('content-type')).toContain('application/problem+json');
    }
    const unknown = await (await residuals(designer, { estimatorIds: 999_999, from, to })).json();
    expect(unknown.detail).toMatch(/999999/);
  });

  it('streams a large export, and gives its database connection back when the client leaves half-way', async () => {
    const cabinet = await knex('estimators as e').join('units as u', 'u.id', 'e.unit_id').where({ 'u.key': 'cabinet-01', 'e.key': 'thermal' }).first('e.id');
    const id = Number(cabinet.id);
    const rows = 200_000;
    const start = Date.now() - 40 * 60_000; // 10 ms apart: 2,000 s, inside the window
    const pool = new pg.Pool({ connectionString: db.url, max: 1 });
    await new PartitionManager().ensure(pool, [dayStart(start), dayStart(start + rows * 10)]);
    await pool.end();
    const one = Buffer.alloc(4);
    one.writeFloatLE(0.5);
    await knex.raw(
      `insert into innovation_samples (t, estimator_id, seq, nis, cusum_up, cusum_down, nu, w)
       select to_timestamp((?::float8 + g * 10) / 1000), ?, g, 0.25, 0, 0, ?, ? from generate_series(1, ?) as g`,
      [start, id, one, one, rows],
    );
    const query = { estimatorIds: id, from, to };
    // Retries while the service answers 429 (exports still closing); a connection never given back never frees a slot.
    const whenFree = async (signal?: AbortSignal): Promise<Response> =>
      waitFor('a free export slot', async () => {
        const res = await fetch(`${service.url}/api/residuals?${new URLSearchParams(Object.entries(query).map(([k, v]) => [k, String(v)]))}`, {
          headers: { authorization: `Bearer ${designer.accessToken}` },
          signal,
        });
        if (res.status === 429) {
          await res.body?.cancel();
          return null;
        }
        return res;
      }, 10_000);
    for (let i = 0; i < 8; i++) {
      const abort = new AbortController();
      const res = await whenFree(abort.signal);
      expect(res.status).toBe(200);
      const reader = res.body!.getReader();
      expect((await reader.read()).done).toBe(false);
      abort.abort();
    }
    const began = performance.now();
    const full = await whenFree();
    expect(full.status).toBe(200);
    const text = await full.text();
    const seconds = (performance.now() - began) / 1000;
    const lines = text.split('\r\n').filter((l) => l.length);
    expect(lines).toHaveLength(1 + rows);
    expect(lines[0]).toBe('estimator_id,unit,estimator,seq,t,nis,nu_1');
    expect(lines[1]).toMatch(new RegExp(`^${id},cabinet-01,thermal,1,\\d{4}-\\d\\d-\\d\\dT\\d\\d:\\d\\d:\\d\\d\\.\\d{3}Z,0\\.25,0\\.5$`));
    console.log(`export of ${rows} rows: ${Math.round(rows / seconds)} rows/s over HTTP`);
    // and the rest of the API still has connections to work with
    expect((await api(service.url, designer, '/studies')).status).toBe(200);
  });

  let study: RetuneStudy;

  it('finds the process noise of the mistuned revision-2 cohort set far too low, and proposes a filter that would see NIS 1', async () => {
    const began = performance.now();
    const res = await api<RetuneStudy>(service.url, designer, '/studies', { method: 'POST', body: { designRevisionId: revision2Id, from, to } });
    const elapsedMs = performance.now() - began;
    expect(res.status).toBe(201);
    study = res.body;
    console.log(`retune study of ${study.samples} samples: ${Math.round(elapsedMs)} ms round trip`);
    expect(study.caution).toBe(CAUTION);
    expect(study.design).toMatchObject({ revisionId: revision2Id, revision: 2, designKey: 'tractor-position', stateDim: 4, measurementDim: 2 });
    expect(study.samples).toBe(3 * SAMPLES);
    // The cohort is tractors 33–40; only 33–35 published here.
    expect(study.estimators).toHaveLength(8);
    expect(study.estimators.filter((e) => e.samples === SAMPLES).map((e) => e.unitKey)).toEqual(COHORT);
    expect(study.notes.join(' ')).toMatch(/No samples in the window from tractor-36/);

    // The simulated plants run revision 1's process noise, q = 0.05 (simulators/src/plant-models.ts,
    // plantDesign: the truth is always revision 1); revision 2's filters assume q = 0.0005.
    const qTrue = plantDesign('tractor-position', 2).truth.Q[0][0];
    const qAssumed = plantDesign('tractor-position', 2).filter.Q[0][0];
    expect([qTrue, qAssumed]).toEqual([0.05, 0.0005]);
    expect(study.assumed.Q).toEqual([[qAssumed, 0], [0, qAssumed]]);
    for (const i of [0, 1]) {
      expect(study.estimated.Q[i][i] / qAssumed).toBeGreaterThan(30); // the truth is 100×
      expect(study.estimated.Q[i][i]).toBeGreaterThan(0.6 * qTrue);
      expect(study.estimated.Q[i][i]).toBeLessThan(1.5 * qTrue);
      // R is less sharply determined: the mistuned filter's innovations are mostly process noise
      // (with these seeds one component comes out near 0.36, the same as the simulator alone gives).
      expect(study.estimated.R[i][i]).toBeGreaterThan(0.5 * 0.25); // the truth is 0.25
      expect(study.estimated.R[i][i]).toBeLessThan(2 * 0.25);
    }
    expect(study.estimated.identifiable).toMatchObject({ Q: true, R: true });
    expect(study.estimated.intervals).not.toBeNull();
    const [lo, hi] = study.estimated.intervals!.Q[0][0];
    expect(lo).toBeLessThanOrEqual(study.estimated.Q[0][0]);
    expect(hi).toBeGreaterThanOrEqual(study.estimated.Q[0][0]);

    // NIS per component: far above 1, and the estimated noise explains what was observed.
    expect(study.nis.m).toBe(2);
    expect(study.nis.observed).toBeGreaterThan(3);
    expect(study.nis.predictedCurrent).toBeGreaterThan(3);
    expect(Math.abs(study.nis.observed / study.nis.predictedCurrent - 1)).toBeLessThan(0.25);
    expect(study.nis.predictedProposed).toBeCloseTo(1, 6);

    // The proposed filter is faster: its poles sit well inside the current ones.
    const radius = (f: RetuneStudy['current']) => Math.max(...f.poles.map((z) => Math.hypot(z.re, z.im)));
    expect(study.current.poles).toHaveLength(4);
    expect(radius(study.proposed)).toBeLessThan(radius(study.current) - 0.1);
    expect(study.proposed.L[2][0]).toBeGreaterThan(study.current.L[2][0]);
    // The demo design carries its speed controller (B, K, dt): the retune that fixes the filter
    // erodes the loop's margins (a loop can be optimal and fragile at once), and the study says so.
    expect(study.loop).not.toBeNull();
    expect(study.loop!.separation.agree).toBe(true);
    expect(study.loop!.marginsProposed.gainMarginUpperDb!).toBeLessThan(study.loop!.marginsCurrent.gainMarginUpperDb!);
    expect(study.loop!.warnings.join(' ')).toMatch(/gain margin falls/i);
    expect(study.autocovariance.lags).toEqual(Array.from({ length: 15 }, (_, j) => j));
    expect(study.autocovariance.estimated).toHaveLength(15);
    expect(study.autocovariance.fitted).toHaveLength(15);
  });

  it('lists and reads back saved studies, to designers only', async () => {
    const list = await api<StudyListItem[]>(service.url, designer, '/studies');
    expect(list.status).toBe(200);
    expect(list.body[0]).toMatchObject({ id: study.id, designKey: 'tractor-position', revision: 2, samples: 3 * SAMPLES, draftRevisionId: null, createdBy: expect.stringMatching(/Dana/) });
    const one = await api<RetuneStudy>(service.url, designer, `/studies/${study.id}`);
    expect(one.body).toEqual(study);
    expect((await api(service.url, designer, '/studies/999999')).status).toBe(404);
    expect((await api(service.url, viewer, '/studies')).status).toBe(403);
    expect((await api(service.url, viewer, '/studies', { method: 'POST', body: { designRevisionId: revision2Id, from, to } })).status).toBe(403);
  });

  it('refuses a study mixing design revisions (400 naming them), and one on an unobservable design (422)', async () => {
    const mixed = await api(service.url, designer, '/studies', { method: 'POST', body: { estimatorIds: [ids['tractor-33'], ids['tractor-01']], from, to } });
    expect(mixed.status).toBe(400);
    expect(mixed.body.type).toMatch(/mixed-design-revisions$/);
    expect(mixed.body.detail).toMatch(/tractor-01\/position/);
    expect(mixed.body.detail).toMatch(/tractor-33\/position/);
    expect(mixed.body.revisions).toEqual(
      expect.arrayContaining([
        { designRevisionId: revision1Id, estimatorIds: [ids['tractor-01']] },
        { designRevisionId: revision2Id, estimatorIds: [ids['tractor-33']] },
      ]),
    );
    const noWindow = await api(service.url, designer, '/studies', { method: 'POST', body: { designRevisionId: revision2Id, from: to, to: from } });
    expect(noWindow.status).toBe(400);
    expect((await api(service.url, designer, '/studies', { method: 'POST', body: { from, to } })).status).toBe(400);

    // A design whose measurements never see the velocities (A = I: nothing carries them into the positions).
    const [{ id: designId }] = await knex('designs').insert({ key: 'blind-velocity', name: 'Blind velocity', description: '' }).returning('id');
    const I4 = [0, 1, 2, 3].map((i) => [0, 1, 2, 3].map((j) => (i === j ? 1 : 0)));
    const [{ id: revId }] = await knex('design_revisions')
      .insert({
        design_id: designId,
        revision: 1,
        state_dim: 4,
        measurement_dim: 2,
        model: JSON.stringify({ A: I4, C: [[1, 0, 0, 0], [0, 1, 0, 0]], Q: I4, R: [[1, 0], [0, 1]] }),
      })
      .returning('id');
    const unit = await knex('units').where({ key: 'tractor-02' }).first('id');
    const [{ id: blindId }] = await knex('estimators').insert({ unit_id: unit.id, key: 'blind', design_revision_id: revId, measurement_dim: 2 }).returning('id');
    const blind = await api(service.url, designer, '/studies', { method: 'POST', body: { estimatorIds: [blindId], from, to } });
    expect(blind.status).toBe(422);
    expect(blind.body.type).toMatch(/design-unobservable$/);
    expect(blind.body.detail).toMatch(/observable subspace has dimension 2 of 4/);
  });

  it('checks the closed loop with a regulator gain: the separation principle holds and the margins come before and after', async () => {
    // Give revision 2 an input matrix (acceleration commands) and a sample time, as a design with a regulator would have.
    const B = [[0.5, 0], [0, 0.5], [1, 0], [0, 1]];
    await knex('design_revisions').where({ id: revision2Id }).update({ model: knex.raw('model || ?::jsonb', [JSON.stringify({ B, dt: 1 })]) });
    const { A } = plantDesign('tractor-position', 2).filter;
    const I4 = [0, 1, 2, 3].map((i) => [0, 1, 2, 3].map((j) => (i === j ? 1 : 0)));
    const K = lqr(A, B, I4, [[1, 0], [0, 1]]).K;
    const res = await api<RetuneStudy>(service.url, designer, '/studies', {
      method: 'POST',
      body: { estimatorIds: COHORT.map((u) => ids[u]), from, to, regulatorK: K, marginFloor: { gainDb: 6, phaseDeg: 30, diskAlpha: 0.4 }, title: 'Cohort with the regulator' },
    });
    expect(res.status).toBe(201);
    const loop = res.body.loop!;
    expect(res.body.title).toBe('Cohort with the regulator');
    expect(loop.K).toEqual(K);
    expect(loop.separation.agree).toBe(true);
    expect(loop.separation.combinedPoles).toHaveLength(8);
    for (const margins of [loop.marginsCurrent, loop.marginsProposed]) {
      expect(margins.closedLoopStable).toBe(true);
      expect(margins.sweep.omega.length).toBeGreaterThan(100);
      expect(margins.sweep.magnitudeDb).toHaveLength(margins.sweep.omega.length);
      expect(margins.diskAlpha === null || margins.diskAlpha > 0).toBe(true);
    }
    expect(Array.isArray(loop.warnings)).toBe(true);
    expect(res.body.caution).toBe(CAUTION);

    // A gain that does not fit the design: 422 naming it.
    const wrong = await api(service.url, designer, '/studies', { method: 'POST', body: { estimatorIds: [ids['tractor-33']], from, to, regulatorK: [[1, 2, 3]] } });
    expect(wrong.status).toBe(422);
    expect(wrong.body.detail).toMatch(/K/);
  });

  it('turns a study into a draft design revision once (201, then 409), visible in the design registry as a draft', async () => {
    const made = await api(service.url, designer, `/studies/${study.id}/draft-revision`, { method: 'POST', body: {} });
    expect(made.status).toBe(201);
    expect(made.body).toEqual({ revisionId: expect.any(Number), revision: 3, designKey: 'tractor-position', status: 'draft', studyId: study.id });
    const draftId: number = made.body.revisionId;
    const reread = await api<RetuneStudy>(service.url, designer, `/studies/${study.id}`);
    expect(reread.body.draftRevisionId).toBe(draftId);
    expect(reread.body.caution).toBe(CAUTION);

    const again = await api(service.url, designer, `/studies/${study.id}/draft-revision`, { method: 'POST', body: {} });
    expect(again.status).toBe(409);
    expect(again.body.draftRevisionId).toBe(draftId);
    expect((await api(service.url, viewer, `/studies/${study.id}/draft-revision`, { method: 'POST', body: {} })).status).toBe(403);

    const designs = await api<{ items: DesignSummary[] }>(service.url, designer, '/designs');
    const tractor = designs.body.items.find((d) => d.key === 'tractor-position')!;
    expect(tractor.revisions.find((r) => r.id === draftId)).toMatchObject({ revision: 3, status: 'draft', stateDim: 4, measurementDim: 2, estimators: 0 });

    const row = await knex('design_revisions').where({ id: draftId }).first('model', 'notes');
    expect(row.model.Q).toEqual(study.estimated.Q);
    expect(row.model.R).toEqual(study.estimated.R);
    expect(row.model.L).toEqual(study.proposed.L);
    expect(row.model.A).toEqual(plantDesign('tractor-position', 2).filter.A);
    expect(row.notes).toMatch(new RegExp(`^Draft from retune study #${study.id}: `));
    expect((await api<StudyListItem[]>(service.url, designer, '/studies')).body.find((s) => s.id === study.id)!.draftRevisionId).toBe(draftId);
  });
});
