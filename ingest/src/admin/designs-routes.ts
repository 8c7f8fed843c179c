import type { Knex } from 'knex';
import type { DesignSummary } from '../../../shared/src/api/api-types';
import { route, type RouteDef } from '../http/route-table';

export function designsRoutes(knex: Knex): RouteDef[] {
  return [
    route({
      method: 'get',
      path: '/designs',
      ability: 'read',
      tag: 'fleet admin',
      summary: 'Designs with their revisions and how many estimators run each',
      handler: async (): Promise<{ items: DesignSummary[] }> => {
        const designs = await knex('designs').orderBy('key').select('id', 'key', 'name', 'description');
        const revisions = await knex('design_revisions as r')
          .leftJoin('estimators as e', 'e.design_revision_id', 'r.id')
          .groupBy('r.id')
          .orderBy('r.revision')
          .select('r.id', 'r.design_id', 'r.revision', 'r.status', 'r.state_dim', 'r.measurement_dim', 'r.created_at', knex.raw('count(e.id)::int as estimators'));
        return {
          items: designs.map((d) => ({
            id: Number(d.id),
            key: d.key,
            name: d.name,
            description: d.description,
            revisions: revisions
              .filter((r) => Number(r.design_id) === Number(d.id))
              .map((r) => ({
                id: Number(r.id),
                revision: Number(r.revision),
                status: r.status,
                stateDim: Number(r.state_dim),
                measurementDim: Number(r.measurement_dim),
                estimators: Number(r.estimators),
                createdAt: new Date(r.created_at).toISOString(),
              })),
          })),
        };
      },
    }),
  ];
}
