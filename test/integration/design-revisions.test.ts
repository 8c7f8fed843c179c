// The design registry against the real service and database: a designer creates a design
// and draft revisions from a model (as the form and an uploaded file do); an invalid model
// is refused with every problem listed and nothing stored; concurrent saves get
// consecutive revision numbers; only an administrator releases, once.
import knexFactory, { type Knex } from 'knex';
import type { DesignSummary } from '../../shared/src/api/api-types';
import { lqr } from '../../shared/src/design/index';
import { STUDY_CAUTION } from '../../ingest/src/workbench/study-service';
import { api, signIn, type Session } from '../support/api';
import { createTestDatabase, type TestDatabase } from '../support/database';
import { runCli, startService, type ServiceHandle } from '../support/service';

jest.setTimeout(90_000);

/** The demo's tractor design (seed-demo.ts) with a process noise of our own. */
function tractorModel(q = 0.05): Record<string, unknown> {
  const A = [
    [1, 0, 1, 0],
    [0, 1, 0, 1],
    [0, 0, 1, 0],
    [0, 0, 0, 1],
  ];
  const G = [
    [0.5, 0],
    [0, 0.5],
    [1, 0],
    [0, 1],
  ];
  const { K } = lqr(A, G, [[1, 0, 0, 0], [0, 1, 0, 0], [0, 0, 0.1, 0], [0, 0, 0, 0.1]], [[1, 0], [0, 1]]);
  return { A, C: [[1, 0, 0, 0], [0, 1, 0, 0]], G, B: G, Q: [[q, 0], [0, q]], R: [[0.25, 0], [0, 0.25]], K, dt: 1 };
}

interface Problem {
  type: string;
  status: number;
  detail?: string;
  errors?: { path: string; message: string }[];
}

describe('design registry: revisions from a model', () => {
  let db: TestDatabase;
  let service: ServiceHandle;
  let knex: Knex;
  let designer: Session;
  let admin: Session;
  let viewer: Session;
  let tractorId: number;

  const revisionCount = async () => Number((await knex('design_revisions').count<{ count: string }[]>('* as count'))[0].count);
  const post = (session: Session, designId: number, body: unknown) => api(service.url, session, `/designs/${designId}/revisions`, { method: 'POST', body });

  beforeAll(async () => {
    db = await createTestDatabase('design_revisions');
    await runCli('ingest/cli/seed.ts', [], { WHITECAP_DATABASE_URL: db.url });
    service = await startService({ WHITECAP_DATABASE_URL: db.url });
    knex = knexFactory({ client: 'pg', connection: db.url });
    designer = await signIn(service.url, 'designer@saltmarsh.example', 'saltmarsh-designer');
    admin = await signIn(service.url, 'admin@saltmarsh.example', 'saltmarsh-admin');
    viewer = await signIn(service.url, 'viewer@saltmarsh.example', 'saltmarsh-viewer');
    tractorId = Number((await knex('designs').where({ key: 'tractor-position' }).first('id')).id);
  });
  afterAll(async () => {
    await knex?.destroy();
    await service?.stop();
    await db?.drop();
  });

  it('creates a draft from a valid model as the next revision, listed in GET /api/designs, the model readable in full', async () => {
    const before = await revisionCount();
    const { status, body } = await post(designer, tractorId, { model: tractorModel(), notes: 'Process noise raised after the crane-side study.' });
    expect(status).toBe(201);
    expect(body).toMatchObject({ designKey: 'tractor-position', revision: 3, status: 'draft', stateDim: 4, measurementDim: 2, warnings: [] });
    expect(body.caution).toBe(STUDY_CAUTION);
    expect(await revisionCount()).toBe(before + 1);

    const { body: designs } = await api<{ items: DesignSummary[] }>(service.url, designer, '/designs');
    const listed = designs.items.find((d) => d.key === 'tractor-position')?.revisions.find((r) => r.id === body.id);
    expect(listed).toMatchObject({ revision: 3, status: 'draft', stateDim: 4, measurementDim: 2, estimators: 0 });

    const detail = await api(service.url, designer, `/designs/${tractorId}/revisions/${body.id}`);
    expect(detail.status).toBe(200);
    expect(detail.body.model).toEqual(tractorModel());
    expect(detail.body.notes).toBe('Process noise raised after the crane-side study.\n\nSaved by Dana Whitlow (estimator design).');
    expect(detail.body.check).toEqual({ problems: [], warnings: [] });
    expect(detail.body.caution).toBe(STUDY_CAUTION);
    // A revision is read through its own design only.
    const cabinet = Number((await knex('designs').where({ key: 'cabinet-thermal' }).first('id')).id);
    expect((await api(service.url, designer, `/designs/${cabinet}/revisions/${body.id}`)).status).toBe(404);
  });

  it('refuses an invalid model with 400 listing every problem, and stores nothing', async () => {
    const before = await revisionCount();
    const model = {
      ...tractorModel(),
      C: [[1, 0, 0]], // wrong shape: 1 × 3 for 4 states
      A: [[1, 0, 1, 0], [0, 1, 0, 1], [0, 0, 'NaN', 0], [0, 0, 0, 1]], // not a number
      Q: [[0.05, 0.01], [0.02, 0.05]], // not symmetric
      R: [[0.25, 0.5], [0.5, 0.25]], // indefinite (eigenvalues −0.25 and 0.75), and R is 2 × 2 for one measured row
    };
    const { status, body } = await post(designer, tractorId, { model });
    expect(status).toBe(400);
    const problem = body as Problem;
    expect(problem.type).toMatch(/\/invalid-design-model$/);
    expect(problem.errors!.map((e) => e.path)).toEqual(['model.A.2.2', 'model.C', 'model.R', 'model.Q']);
    expect(problem.errors![0].message).toBe('A row 3, column 3 must be a finite number, not the text "NaN"');
    expect(problem.errors![1].message).toMatch(/^C is 1 × 3; it must be 1 × 4/);
    expect(problem.errors![3].message).toMatch(/^Q must be symmetric/);
    expect(problem.detail).toMatch(/^4 problems in the model, nothing saved\./);

    // R of the right size but indefinite, and a null entry (what JSON makes of NaN): both reported.
    const second = await post(designer, tractorId, { model: { ...tractorModel(), R: [[0.25, 0.5], [0.5, 0.25]], Q: [[null, 0], [0, 0.05]] } });
    expect(second.status).toBe(400);
    expect((second.body as Problem).errors).toEqual([
      { where: 'body', path: 'model.Q.0.0', message: 'Q row 1, column 1 must be a finite number, not empty (null)' },
      { where: 'body', path: 'model.R', message: expect.stringMatching(/^R must be positive definite .* the smallest eigenvalue of R is -0\.25$/) },
    ]);
    expect(await revisionCount()).toBe(before);
  });

  it('refuses the demo charge design (A = I₂, C = [1, 0.05]) as not observable', async () => {
    const charge = Number((await knex('designs').where({ key: 'cabinet-charge' }).first('id')).id);
    const before = await revisionCount();
    const { status, body } = await post(designer, charge, {
      model: { A: [[1, 0], [0, 1]], C: [[1, 0.05]], G: [[1, 0], [0, 1]], Q: [[1e-6, 0], [0, 1e-8]], R: [[1e-4]] },
    });
    expect(status).toBe(400);
    expect((body as Problem).errors).toEqual([{ where: 'body', path: 'model.C', message: expect.stringMatching(/^\(A, C\) is not observable, nor even detectable: .* λ = 1/) }]);
    expect(await revisionCount()).toBe(before);
  });

  it('refuses a missing model, a status other than draft, an unknown design and a body over 256 KB', async () => {
    const none = await post(designer, tractorId, { notes: 'forgot it' });
    expect(none.status).toBe(400);
    expect((none.body as Problem).errors![0].path).toBe('model');
    const released = await post(designer, tractorId, { model: tractorModel(), status: 'released' });
    expect(released.status).toBe(400);
    expect((released.body as Problem).errors!.map((e) => e.path)).toEqual(['status']);
    expect((await post(designer, 999_999, { model: tractorModel() })).status).toBe(404);
    const big = await post(designer, tractorId, { model: tractorModel(), notes: 'x'.repeat(3000), padding: 'y'.repeat(300 * 1024) });
    expect(big.status).toBe(413);
    expect((big.body as Problem).detail).toMatch(/at most 256 KB; this one is 30\d KB/);
  });

  it('keeps a viewer out (403) and stores nothing', async () => {
    const before = await revisionCount();
    const { status, body } = await post(viewer, tractorId, { model: tractorModel() });
    expect(status).toBe(403);
    expect((body as Problem).type).toMatch(/\/forbidden$/);
    expect((await api(service.url, viewer, '/designs', { method: 'POST', body: { key: 'viewer-design', name: 'No' } })).status).toBe(403);
    expect(await revisionCount()).toBe(before);
  });

  it('gives concurrent saves consecutive revision numbers', async () => {
    const { body: created } = await api(service.url, designer, '/designs', {
      method: 'POST',
      body: { key: 'tractor-heading', name: 'Tractor heading', description: 'Heading and yaw rate from the gyro and the compass.' },
    });
    expect(created).toMatchObject({ key: 'tractor-heading', name: 'Tractor heading', revisions: [] });
    const heading = { A: [[1, 0.1], [0, 1]], C: [[1, 0], [0, 1]], Q: [[1e-4, 0], [0, 1e-3]], R: [[1e-3, 0], [0, 1e-2]], dt: 0.1 };
    const answers = await Promise.all(Array.from({ length: 6 }, () => post(designer, created.id, { model: heading })));
    expect(answers.map((a) => a.status)).toEqual([201, 201, 201, 201, 201, 201]);
    expect(answers.map((a) => a.body.revision).sort((a, b) => a - b)).toEqual([1, 2, 3, 4, 5, 6]);

    const again = await api(service.url, admin, '/designs', { method: 'POST', body: { key: 'tractor-heading', name: 'Again' } });
    expect(again.status).toBe(409);
    const badKey = await api(service.url, designer, '/designs', { method: 'POST', body: { key: 'Tractor Heading!', name: '' } });
    expect(badKey.status).toBe(400);
    expect((badKey.body as Problem).errors!.map((e) => e.path)).toEqual(['key', 'name']);
  });

  it('lets an admin release a draft once and then retire it; a designer may not', async () => {
    const { body: draft } = await post(designer, tractorId, { model: tractorModel(0.08) });
    const patch = (session: Session, status: string) =>
      api(service.url, session, `/designs/${tractorId}/revisions/${draft.id}`, { method: 'PATCH', body: { status } });

    const refused = await patch(designer, 'released');
    expect(refused.status).toBe(403);
    expect((await api(service.url, designer, `/designs/${tractorId}/revisions/${draft.id}`)).body.status).toBe('draft');

    const released = await patch(admin, 'released');
    expect(released.status).toBe(200);
    expect(released.body).toMatchObject({ id: draft.id, status: 'released' });
    const twice = await patch(admin, 'released');
    expect(twice.status).toBe(409);
    expect((twice.body as Problem).detail).toMatch(/is released already/);

    expect((await patch(admin, 'retired')).body.status).toBe('retired');
    expect((await patch(admin, 'released')).status).toBe(409);
    expect((await patch(admin, 'draft')).status).toBe(400);
  });

  it('refuses to release a draft whose stored model does not pass the check (a draft made elsewhere)', async () => {
    const revision = Number((await knex('design_revisions').where({ design_id: tractorId }).max('revision as max').first())!.max) + 1;
    const [row] = await knex('design_revisions')
      .insert({ design_id: tractorId, revision, status: 'draft', state_dim: 4, measurement_dim: 2, model: JSON.stringify({ ...tractorModel(), Q: [[1, 2], [2, 1]] }) })
      .returning('id');
    const detail = await api(service.url, admin, `/designs/${tractorId}/revisions/${row.id}`);
    expect(detail.body.check.problems.map((p: { path: string }) => p.path)).toEqual(['Q']);
    const { status, body } = await api(service.url, admin, `/designs/${tractorId}/revisions/${row.id}`, { method: 'PATCH', body: { status: 'released' } });
    expect(status).toBe(422);
    expect((body as Problem).errors!.map((e) => e.path)).toEqual(['Q']);
    expect((await knex('design_revisions').where({ id: row.id }).first('status')).status).toBe('draft');
  });
});
