// The designer's workbench API (ability 'design': designers and admins): the residual
// export, streamed from a database cursor; retune studies; a draft design revision from
// a study.
import { pipeline } from 'node:stream/promises';
import type { Knex } from 'knex';
import { z } from 'zod';
import type { RetuneStudy, StudyListItem } from '../../../shared/src/api/api-types';
import { route, type RouteDef } from '../http/route-table';
import { ExportService } from './export-service';
import { residualUploadRoutes } from './residual-upload-routes';
import { StudyService, type DraftRevisionCreated } from './study-service';
import { WorkbenchRepository } from './workbench-repository';

const MAX_WINDOW_MS = 31 * 86_400_000;
const MAX_ESTIMATORS = 500;
/** Ids are PostgreSQL integers: larger ones are refused here rather than by the database. */
const id = () => z.number().int().positive().max(2_147_483_647);
const studyParam = z.object({ id: z.coerce.number().int().positive().max(2_147_483_647) });

const instant = z.iso.datetime({ offset: true, message: 'must be an ISO 8601 date-time with a time zone, e.g. 2026-12-02T08:00:00Z' });

/** from < to, at most 31 days apart. */
function checkWindow(w: { from: string; to: string }, ctx: z.RefinementCtx): void {
  const from = Date.parse(w.from);
  const to = Date.parse(w.to);
  if (!(from < to)) ctx.addIssue({ code: 'custom', path: ['from'], message: 'must be before to' });
  else if (to - from > MAX_WINDOW_MS) ctx.addIssue({ code: 'custom', path: ['to'], message: 'the window may span at most 31 days' });
}

const estimatorIdList = z
  .union([z.string(), z.array(z.string())], { message: 'required: estimator ids separated by commas, e.g. 1,2,3' })
  .describe('Estimator ids separated by commas, e.g. 1,2,3 (at most 500)')
  .transform((v) => (Array.isArray(v) ? v.join(',') : v))
  .pipe(z.string().regex(/^\s*\d+(\s*,\s*\d+)*\s*$/, 'must be estimator ids separated by commas, e.g. 1,2,3'))
  .transform((s) => [...new Set(s.split(',').map((x) => Number(x.trim())))])
  .pipe(z.array(id()).min(1).max(MAX_ESTIMATORS, `at most ${MAX_ESTIMATORS} estimators`));

const residualsQuery = z
  .object({
    estimatorIds: estimatorIdList,
    from: instant,
    to: instant,
    format: z.enum(['csv', 'json']).default('csv'),
    limit: z.coerce.number().int().min(1).max(10_000_000).optional(),
  })
  .superRefine(checkWindow);

const matrix = z
  .array(z.array(z.number()).min(1).max(64))
  .min(1)
  .max(64)
  .refine((M) => M.every((row) => row.length === M[0].length), { message: 'every row must have the same number of entries' });

const studyBody = z
  .object({
    estimatorIds: z.array(id()).min(1).max(MAX_ESTIMATORS).optional(),
    designRevisionId: id().optional(),
    uploadIds: z.array(id()).min(1).max(50).optional(),
    from: instant,
    to: instant,
    lags: z.number().int().min(2).max(60).optional(),
    estimateQ: z.enum(['diagonal', 'full']).optional(),
    estimateR: z.enum(['diagonal', 'full']).optional(),
    regulatorK: matrix.optional(),
    marginFloor: z
      .object({
        gainDb: z.number().positive().max(60).optional(),
        phaseDeg: z.number().positive().max(90).optional(),
        diskAlpha: z.number().positive().max(2).optional(),
      })
      .optional(),
    title: z.string().trim().max(200).optional(),
  })
  .superRefine((b, ctx) => {
    if (!b.estimatorIds?.length && b.designRevisionId === undefined && !b.uploadIds?.length) {
      ctx.addIssue({ code: 'custom', path: ['estimatorIds'], message: 'give estimatorIds, designRevisionId for every estimator on that revision, or uploadIds' });
    }
    checkWindow(b, ctx);
  });

const listQuery = z.object({
  designRevisionId: z.coerce.number().pipe(id()).optional(),
  limit: z.coerce.number().int().min(1).max(500).default(100),
  offset: z.coerce.number().int().min(0).default(0),
});

export function workbenchRoutes(knex: Knex): RouteDef[] {
  const repo = new WorkbenchRepository(knex);
  const exports = new ExportService(repo);
  const studies = new StudyService(knex, repo);
  return [
    ...residualUploadRoutes(knex, repo),
    route({
      method: 'get',
      path: '/residuals',
      ability: 'design',
      tag: 'workbench',
      summary:
        'Field residuals of estimators in a window (at most 31 days) as CSV or a JSON array, streamed from a database cursor; ' +
        'X-Whitecap-Estimated-Rows tells a progress bar what to expect (columns: docs/residual-export.md)',
      query: residualsQuery,
      produces: 'text/csv',
      raw: true,
      handler: async ({ query, res }) => {
        const out = await exports.open({ estimatorIds: query.estimatorIds, from: new Date(query.from), to: new Date(query.to), format: query.format, limit: query.limit });
        try {
          res.status(200).set({
            'Content-Type': out.contentType,
            'Content-Disposition': `attachment; filename="${out.filename}"`,
            'Cache-Control': 'no-store',
            'X-Whitecap-Estimated-Rows': String(out.estimatedRows),
          });
          // pipeline: backpressure from the client to the cursor, and everything torn down on an error or a client that leaves
          await pipeline(out.rows, out.formatter, res);
        } catch (err) {
          if (!res.headersSent) throw err;
          // Mid-stream: the response ends without its last chunk, which clients see as a failed download.
          res.destroy(err as Error);
        } finally {
          await out.release();
        }
      },
    }),
    route({
      method: 'post',
      path: '/studies',
      ability: 'design',
      tag: 'workbench',
      summary:
        'Run a retune study on estimators (ids, or every estimator on a design revision) over a window: noise covariances by autocovariance least squares, ' +
        'the proposed steady-state gain, predicted NIS, and with a regulator gain the separation check and the margins before and after; saved',
      body: studyBody,
      status: 201,
      handler: ({ body, user }): Promise<RetuneStudy> => studies.create(user, body),
    }),
    route({
      method: 'get',
      path: '/studies',
      ability: 'design',
      tag: 'workbench',
      summary: 'Saved retune studies, newest first (optionally of one design revision)',
      query: listQuery,
      handler: ({ query }): Promise<StudyListItem[]> => repo.listStudies(query),
    }),
    route({
      method: 'get',
      path: '/studies/:id',
      ability: 'design',
      tag: 'workbench',
      summary: 'One saved retune study',
      params: studyParam,
      handler: ({ params }): Promise<RetuneStudy> => studies.get(params.id),
    }),
    route({
      method: 'post',
      path: '/studies/:id/draft-revision',
      ability: 'design',
      tag: 'workbench',
      summary:
        'Make a draft design revision from a study: the assumed model with the estimated Q and R and the proposed gain L; one per study (409 for a second). ' +
        'Answers { revisionId, revision, designKey, status, studyId }',
      params: studyParam,
      status: 201,
      handler: ({ params, user }): Promise<DraftRevisionCreated> => studies.createDraft(user, params.id),
    }),
  ];
}
