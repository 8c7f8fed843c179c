import { z } from 'zod';
import type { AlertList } from '../../../shared/src/api/api-types';
import { idParam, paging, route, text, type RouteDef } from '../http/route-table';
import type { AlertsRepository } from './alerts-repository';
import type { AlertsService } from './alerts-service';

const listQuery = z.object({
  state: z.enum(['open', 'acknowledged', 'resolved', 'live']).optional(),
  severity: z.enum(['info', 'warning', 'critical']).optional(),
  rule: text(64).optional(),
  site: text(64).optional(),
  estimatorId: z.coerce.number().int().positive().max(2_147_483_647).optional(),
  q: text(100).optional(),
  sort: z.enum(['openedAt', 'severity', 'state', 'rule', 'unit']).default('openedAt'),
  ...paging,
  order: z.enum(['asc', 'desc']).default('desc'),
});
const noteBody = z.object({ note: z.string().trim().max(2000).optional() });
const textBody = z.object({ text: z.string().trim().min(1, 'must not be empty').max(2000) });

export function alertsRoutes(repo: AlertsRepository, service: AlertsService): RouteDef[] {
  return [
    route({
      method: 'get',
      path: '/alerts',
      ability: 'read',
      tag: 'alerts',
      summary: 'Alerts, filtered by state (live = open or acknowledged), severity, rule, site, estimator or text; sorted and paged',
      query: listQuery,
      handler: async ({ query }): Promise<AlertList> => ({ ...(await repo.list(query)), limit: query.limit, offset: query.offset }),
    }),
    route({
      method: 'get',
      path: '/alerts/:id',
      ability: 'read',
      tag: 'alerts',
      summary: 'One alert with the evidence that made it fire and its audit trail',
      params: idParam,
      handler: ({ params }) => service.detail(params.id),
    }),
    route({
      method: 'post',
      path: '/alerts/:id/acknowledge',
      ability: 'respond',
      tag: 'alerts',
      summary: 'Acknowledge an open alert (optionally with a note)',
      params: idParam,
      body: noteBody,
      handler: ({ params, body, user }) => service.acknowledge(params.id, user, body.note),
    }),
    route({
      method: 'post',
      path: '/alerts/:id/notes',
      ability: 'respond',
      tag: 'alerts',
      summary: 'Add a note to an alert\'s trail',
      params: idParam,
      body: textBody,
      status: 201,
      handler: ({ params, body, user }) => service.addNote(params.id, user, body.text),
    }),
    route({
      method: 'post',
      path: '/alerts/:id/resolve',
      ability: 'respond',
      tag: 'alerts',
      summary: 'Resolve an alert (optionally with a note)',
      params: idParam,
      body: noteBody,
      handler: ({ params, body, user }) => service.resolve(params.id, user, body.note),
    }),
  ];
}
