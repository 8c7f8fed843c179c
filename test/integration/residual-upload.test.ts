// Residual upload end to end: a designer uploads a logged innovation file (made here by
// the simulator's plant and filter), the service checks it row by row, stores the good
// rows, reports the bad ones, and a retune study runs on the upload alone.
import http from 'node:http';
import { Readable } from 'node:stream';
import knexFactory, { type Knex } from 'knex';
import { ResidualUploadRepository } from '../../ingest/src/workbench/residual-upload-repository';
import { ResidualUploadService } from '../../ingest/src/workbench/residual-upload-service';
import { WorkbenchRepository } from '../../ingest/src/workbench/workbench-repository';
import type { ResidualUpload, RetuneStudy, UploadReport } from '../../shared/src/api/api-types';
import { PlantFilter, plantDesign } from '../../simulators/src/index';
import { api, signIn, type Session } from '../support/api';
import { createTestDatabase, type TestDatabase } from '../support/database';
import { runCli, startService, type ServiceHandle } from '../support/service';

jest.setTimeout(120_000);

const ROWS = 3000;

/** A CSV in the export's own columns from a plant running q = 0.05 under a filter assuming q = 0.0005; three bad rows in it. */
function loggedRun(): { csv: string; badLines: number[] } {
  const filter = new PlantFilter({ design: plantDesign('tractor-position', 2), seed: 77, startTime: Date.parse('2026-12-01T08:00:00Z'), reference: false });
  const lines = ['estimator_id,unit,estimator,seq,t,nis,nu_1,nu_2'];
  const badLines: number[] = [];
  for (let i = 0; i < ROWS; i++) {
    const s = filter.next();
    lines.push(`7,"bench, north",position,${s.seq},${new Date(s.t).toISOString()},,${s.nu[0]},${s.nu[1]}`);
    if (i === 500) {
      lines.push(`7,bench,position,${s.seq + 100000},${new Date(s.t).toISOString()},,NaN,0.1`);
      badLines.push(lines.length);
    }
    if (i === 1500) {
      lines.push(`7,bench,position,${s.seq + 100000},,0.1`);
      badLines.push(lines.length);
    }
    if (i === 2500) {
      lines.push(`7,bench,position,${s.seq},,,0.1,0.2`); // repeats the seq just accepted
      badLines.push(lines.length);
    }
  }
  return { csv: lines.join('\r\n') + '\r\n', badLines };
}

describe('residual upload', () => {
  let db: TestDatabase;
  let service: ServiceHandle;
  let knex: Knex;
  let designer: Session;
  let viewer: Session;
  let revision2Id: number;

  const upload = (session: Session, q: Record<string, string | number>, body: string) =>
    fetch(`${service.url}/api/residual-uploads?${new URLSearchParams(Object.entries(q).map(([k, v]) => [k, String(v)])).toString()}`, {
      method: 'POST',
      headers: { authorization: `Bearer ${session.accessToken}`, 'content-type': 'text/csv' },
      body,
    });

  beforeAll(async () => {
    db = await createTestDatabase('residual-upload');
    await runCli('ingest/cli/seed.ts', [], { WHITECAP_DATABASE_URL: db.url });
    service = await startService({ WHITECAP_DATABASE_URL: db.url });
    knex = knexFactory({ client: 'pg', connection: db.url });
    const row = await knex('design_revisions as r').join('designs as d', 'd.id', 'r.design_id').where({ 'd.key': 'tractor-position', 'r.revision': 2 }).first('r.id');
    revision2Id = Number(row.id);
    designer = await signIn(service.url, 'designer@saltmarsh.example', 'saltmarsh-designer');
    viewer = await signIn(service.url, 'viewer@saltmarsh.example', 'saltmarsh-viewer');
  });
  afterAll(async () => {
    await service?.stop();
    await knex?.destroy();
    await db?.drop();
  });

  let uploadId: number;

  it('stores the good rows and reports the three bad ones by line', async () => {
    const { csv, badLines } = loggedRun();
    const res = await upload(designer, { designRevisionId: revision2Id, name: 'bench run 1' }, csv);
    expect(res.status).toBe(201);
    const report = (await res.json()) as UploadReport;
    expect(report).toMatchObject({ rowsAccepted: ROWS, rowsRejected: 3 });
    expect(report.rejected.map((r) => r.line)).toEqual(badLines);
    expect(report.rejected[0].reason).toMatch(/nu_1 "NaN" is not a finite number/);
    expect(report.rejected[1].reason).toMatch(/6 columns, the header has 8/);
    expect(report.rejected[2].reason).toMatch(/does not increase/);
    uploadId = report.id;
    const stored = await knex('residual_upload_samples').where('upload_id', uploadId).count<{ count: string }[]>('* as count');
    expect(Number(stored[0].count)).toBe(ROWS);
    const list = await api<ResidualUpload[]>(service.url, designer, '/residual-uploads');
    expect(list.body[0]).toMatchObject({ id: uploadId, name: 'bench run 1', designRevisionId: revision2Id, designKey: 'tractor-position', revision: 2, rowsAccepted: ROWS, rowsRejected: 3 });
  });

  it('refuses a wrong header (400, nothing stored), a viewer (403) and a non-CSV body (415)', async () => {
    const before = Number((await knex('residual_uploads').count<{ count: string }[]>('* as count'))[0].count);
    const wrong = await upload(designer, { designRevisionId: revision2Id, name: 'wrong' }, 'seq,t,nu_1\r\n1,,0.5\r\n');
    expect(wrong.status).toBe(400);
    expect(wrong.headers.get('content-type')).toMatch(/problem\+json/);
    expect((await wrong.json()).detail).toMatch(/measures 2 components/);
    expect((await upload(viewer, { designRevisionId: revision2Id, name: 'v' }, 'seq,t,nu_1,nu_2\r\n1,,0,0\r\n')).status).toBe(403);
    const json = await fetch(`${service.url}/api/residual-uploads?designRevisionId=${revision2Id}&name=j`, {
      method: 'POST',
      headers: { authorization: `Bearer ${designer.accessToken}`, 'content-type': 'application/json' },
      body: '{}',
    });
    expect(json.status).toBe(415);
    expect((await api(service.url, viewer, '/residual-uploads')).status).toBe(403);
    expect(Number((await knex('residual_uploads').count<{ count: string }[]>('* as count'))[0].count)).toBe(before);
  });

  it('refuses a file over the size limit with a clear 413, whether its length is declared or only counted, and stores nothing', async () => {
    const before = Number((await knex('residual_uploads').count<{ count: string }[]>('* as count'))[0].count);
    // Over HTTP: the declared length is over 50 MB; the answer comes before the body is sent.
    const big = await new Promise<{ status: number; body: string }>((resolve, reject) => {
      const req = http.request(
        `${service.url}/api/residual-uploads?designRevisionId=${revision2Id}&name=big`,
        { method: 'POST', headers: { authorization: `Bearer ${designer.accessToken}`, 'content-type': 'text/csv', 'content-length': String(51 * 1024 * 1024) } },
        (res) => {
          let body = '';
          res.on('data', (d) => (body += d));
          res.on('end', () => {
            resolve({ status: res.statusCode ?? 0, body });
            req.destroy();
          });
        },
      );
      req.on('error', reject);
      req.write('seq,t,nu_1,nu_2\r\n');
    });
    expect(big.status).toBe(413);
    expect(JSON.parse(big.body).detail).toMatch(/at most 50 MB/);
    // The running count, for a body whose length is not declared (chunked): the same service with a 4 KB limit.
    const user = { id: designer.user.id, email: designer.user.email, displayName: designer.user.displayName, role: designer.user.role };
    const service4k = new ResidualUploadService(knex, new ResidualUploadRepository(knex), new WorkbenchRepository(knex), 4096);
    const rows = ['seq,t,nu_1,nu_2', ...Array.from({ length: 500 }, (_, i) => `${i + 1},,0.1,0.2`)].join('\r\n');
    await expect(service4k.upload(user, { designRevisionId: revision2Id, name: 'chunked' }, Readable.from([rows]))).rejects.toMatchObject({ status: 413 });
    expect(Number((await knex('residual_uploads').count<{ count: string }[]>('* as count'))[0].count)).toBe(before);
  });

  it('a study on the upload alone finds Q far above the assumed one', async () => {
    const { status, body: study } = await api<RetuneStudy>(service.url, designer, '/studies', {
      method: 'POST',
      body: { uploadIds: [uploadId], from: '2026-12-01T00:00:00Z', to: '2026-12-02T00:00:00Z' },
    });
    expect(status).toBe(201);
    expect(study.design).toMatchObject({ revisionId: revision2Id, revision: 2 });
    expect(study.uploads).toEqual([{ id: uploadId, name: 'bench run 1', samples: ROWS }]);
    expect(study.samples).toBe(ROWS);
    const qTrue = plantDesign('tractor-position', 2).truth.Q[0][0];
    const qAssumed = plantDesign('tractor-position', 2).filter.Q[0][0];
    expect([qTrue, qAssumed]).toEqual([0.05, 0.0005]);
    expect(study.assumed.Q[0][0]).toBeCloseTo(qAssumed);
    for (let i = 0; i < study.estimated.Q.length; i++) expect(study.estimated.Q[i][i] / qAssumed).toBeGreaterThan(30);
    expect(Number.isFinite(study.nis.observed)).toBe(true);
    expect(study.nis.observed).toBeGreaterThan(1.5); // the mistuned filter sees innovations far larger than its S
    expect(study.notes.join(' ')).toMatch(/1 upload/);
  });
});
