import { z } from 'zod';
import { hashDeviceSecret, newDeviceSecret } from '../broker/device-auth';
import { innovationsTopic, partitionedInnovationsTopic } from '../broker/topics';
import { HttpProblem } from '../http/problem';
import { idParam, paging, route, text, type RouteDef } from '../http/route-table';
import type { FleetAdminRepository } from './fleet-admin-repository';

export function fleetAdminRoutes(repo: FleetAdminRepository): RouteDef[] {
  return [
    route({
      method: 'get',
      path: '/sites',
      ability: 'read',
      tag: 'fleet admin',
      summary: 'Sites and how many units each has',
      handler: async () => ({ items: await repo.sites() }),
    }),
    route({
      method: 'get',
      path: '/units',
      ability: 'read',
      tag: 'fleet admin',
      summary: 'Units with their site, estimator count and live device credentials',
      query: z.object({ site: text(64).optional(), limit: paging.limit, offset: paging.offset }),
      handler: async ({ query }) => ({ ...(await repo.units(query)), limit: query.limit, offset: query.offset }),
    }),
    route({
      method: 'post',
      path: '/units/:id/credentials',
      ability: 'administer',
      tag: 'fleet admin',
      summary: 'Issue (or rotate) a unit\'s device credentials; the secret is shown only in this answer',
      params: idParam,
      status: 201,
      handler: async ({ params }) => {
        const unit = await repo.unit(params.id);
        if (!unit) throw new HttpProblem(404, 'not-found', 'No such unit', `There is no unit ${params.id}.`);
        const secret = newDeviceSecret();
        await repo.replaceCredential(unit.id, unit.key, hashDeviceSecret(secret));
        const partition = Number(unit.partition);
        return {
          username: unit.key,
          secret,
          // Where the unit publishes: the first topic on the embedded broker, the second behind an
          // external broker with partitioned workers (WHITECAP_PARTITIONED; docs/scaling.md).
          partition,
          topics: {
            innovations: innovationsTopic(unit.key, '{estimator}'),
            partitionedInnovations: partitionedInnovationsTopic(partition, unit.key, '{estimator}'),
          },
          note: 'Store the secret on the unit now: Whitecap keeps only its hash.',
        };
      },
    }),
    route({
      method: 'delete',
      path: '/units/:id/credentials',
      ability: 'administer',
      tag: 'fleet admin',
      summary: 'Revoke every live device credential of a unit (it can no longer sign in to the broker)',
      params: idParam,
      handler: async ({ params }) => {
        const unit = await repo.unit(params.id);
        if (!unit) throw new HttpProblem(404, 'not-found', 'No such unit', `There is no unit ${params.id}.`);
        return { revoked: await repo.revokeCredentials(unit.id) };
      },
    }),
  ];
}
