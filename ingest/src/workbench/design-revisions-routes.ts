// The design registry's API: create a design; create a design revision from a model (the
// dashboard's form and an uploaded JSON file both post here), read one revision with its
// model; release or retire a revision (administrators).
import type { Knex } from 'knex';
import { z } from 'zod';
import { HttpProblem } from '../http/problem';
import { route, text, type RouteDef } from '../http/route-table';
import { DesignRevisionsRepository } from './design-revisions-repository';
import { DesignRevisionsService, type DesignRevisionCreated, type DesignRevisionDetail } from './design-revisions-service';
import { WorkbenchRepository } from './workbench-repository';

/** A revision request is at most this large: far more than a 16-state design needs, and the dashboard's file limit. */
export const REVISION_BODY_LIMIT_BYTES = 256 * 1024;

const id = () => z.coerce.number().int().positive().max(2_147_483_647);
const designParams = z.object({ id: id() });
const revisionParams = z.object({ id: id(), revisionId: id() });

const designBody = z.object({
  key: z
    .string()
    .trim()
    .min(2)
    .max(64)
    .regex(/^[a-z0-9]+(-[a-z0-9]+)*$/, 'must be lower-case letters and digits in words joined by hyphens, e.g. tractor-heading'),
  name: z.string().trim().min(1, 'must not be empty').max(200),
  description: text(2000).default(''),
});

const revisionBody = z.object({
  model: z
    .unknown()
    .describe(
      'The design model { A, C, G?, B?, Q, R, L?, K?, dt? }, matrices as lists of rows; checked as a whole (shapes, finite entries, ' +
        'symmetric positive (semi)definite Q and R, detectability of (A, C), stabilizability of (A, B)) and every problem reported',
    ),
  notes: text(4000).default(''),
  status: z.literal('draft', { message: 'a new revision is a draft; an administrator releases it' }).default('draft'),
});

const statusBody = z.object({
  status: z.enum(['released', 'retired'], { message: "must be 'released' or 'retired'" }),
});

export function designRevisionsRoutes(knex: Knex): RouteDef[] {
  const service = new DesignRevisionsService(knex, new DesignRevisionsRepository(knex), new WorkbenchRepository(knex));
  return [
    route({
      method: 'post',
      path: '/designs',
      ability: 'design',
      tag: 'design registry',
      summary: 'Create a design (key, name, description); its revisions are added next. 409 when the key is taken',
      body: designBody,
      status: 201,
      handler: ({ body }) => service.createDesign(body),
    }),
    route({
      method: 'post',
      path: '/designs/:id/revisions',
      ability: 'design',
      tag: 'design registry',
      summary:
        'Create a draft design revision from a model (the form or an uploaded JSON file): checked first, every problem listed in errors (400) ' +
        'and nothing saved; otherwise stored as the next revision number. The request body may be at most 256 KB (413)',
      params: designParams,
      body: revisionBody,
      status: 201,
      handler: ({ params, body, user, req }): Promise<DesignRevisionCreated> => {
        // express.json() allows 1 MB for every route; a revision gets a quarter of that.
        const size = Number(req.headers['content-length'] ?? Buffer.byteLength(JSON.stringify(req.body ?? null)));
        if (size > REVISION_BODY_LIMIT_BYTES) {
          throw new HttpProblem(
            413,
            'body-too-large',
            'Request body too large',
            `A design revision request may be at most 256 KB; this one is ${Math.ceil(size / 1024)} KB.`,
            { limitBytes: REVISION_BODY_LIMIT_BYTES },
          );
        }
        return service.createRevision(user, params.id, body);
      },
    }),
    route({
      method: 'get',
      path: '/designs/:id/revisions/:revisionId',
      ability: 'design',
      tag: 'design registry',
      summary: 'One design revision with its full model and notes, the model checked again now (problems, warnings), and the caution',
      params: revisionParams,
      handler: ({ params }): Promise<DesignRevisionDetail> => service.revision(params.id, params.revisionId),
    }),
    route({
      method: 'patch',
      path: '/designs/:id/revisions/:revisionId',
      ability: 'administer',
      tag: 'design registry',
      summary:
        "Release a draft revision (once; its model is checked again first, 422 if it fails) or retire a revision: status 'released' or 'retired'. " +
        '409 for any other change',
      params: revisionParams,
      body: statusBody,
      handler: ({ params, body }): Promise<DesignRevisionDetail> => service.changeStatus(params.id, params.revisionId, body.status),
    }),
  ];
}
