// Residual uploads (ability 'design'): POST a text/csv body, streamed; GET the list.
import type { Knex } from 'knex';
import { z } from 'zod';
import type { ResidualUpload, UploadReport } from '../../../shared/src/api/api-types';
import { HttpProblem } from '../http/problem';
import { route, type RouteDef } from '../http/route-table';
import { ResidualUploadRepository } from './residual-upload-repository';
import { ResidualUploadService } from './residual-upload-service';
import type { WorkbenchRepository } from './workbench-repository';

const id = () => z.coerce.number().int().positive().max(2_147_483_647);

const uploadQuery = z.object({
  designRevisionId: id(),
  // A label, never a path: no slashes, no control or bidirectional-override characters, not only dots.
  name: z
    .string()
    .trim()
    .min(1, 'required: a name for the upload')
    .max(200)
    .refine((s) => !/[\\/\p{Cc}\u202A-\u202E\u2066-\u2069]/u.test(s) && !/^\.+$/.test(s), {
      message: 'must be a plain name: no slashes or backslashes, no control characters, not only dots',
    }),
});

const listQuery = z.object({
  designRevisionId: id().optional(),
  limit: z.coerce.number().int().min(1).max(500).default(100),
  offset: z.coerce.number().int().min(0).default(0),
});

export function residualUploadRoutes(knex: Knex, workbench: WorkbenchRepository): RouteDef[] {
  const repo = new ResidualUploadRepository(knex);
  const service = new ResidualUploadService(knex, repo, workbench);
  return [
    route({
      method: 'post',
      path: '/residual-uploads',
      ability: 'design',
      tag: 'workbench',
      summary:
        'Upload a logged innovation file (text/csv, at most 50 MB, streamed): the residual export\'s columns or seq,t,nu_1..nu_m; ' +
        'rows are checked one by one, good ones stored, the first 100 rejected ones reported (docs/residual-upload.md). Answers 201 { id, rowsAccepted, rowsRejected, rejected }',
      query: uploadQuery,
      status: 201,
      raw: true,
      handler: async ({ query, user, req, res }) => {
        const type = (req.headers['content-type'] ?? '').split(';')[0].trim().toLowerCase();
        if (type !== 'text/csv' && type !== 'text/plain') {
          req.resume();
          throw new HttpProblem(415, 'unsupported-media-type', 'Send the file as text/csv', `The body must be text/csv; it was ${type || 'not labelled'}.`);
        }
        const length = req.headers['content-length'] === undefined ? undefined : Number(req.headers['content-length']);
        try {
          const report: UploadReport = await service.upload(user, query, req, length);
          res.status(201).json(report);
        } catch (err) {
          if (!req.readableEnded) {
            // Too large: answer and close rather than read the rest; otherwise drain what is left.
            if (err instanceof HttpProblem && err.status === 413) res.set('Connection', 'close');
            else req.resume();
          }
          throw err;
        }
      },
    }),
    route({
      method: 'get',
      path: '/residual-uploads',
      ability: 'design',
      tag: 'workbench',
      summary: 'Residual uploads, newest first (optionally of one design revision)',
      query: listQuery,
      handler: ({ query }): Promise<ResidualUpload[]> => repo.list(query),
    }),
  ];
}
