import { z } from 'zod';
import type { Clock } from '../clock';
import { paging, route, text, type RouteDef } from '../http/route-table';
import type { QuarantineRepository } from './quarantine-repository';

export function quarantineRoutes(repo: QuarantineRepository, clock: Clock): RouteDef[] {
  return [
    route({
      method: 'get',
      path: '/quarantine',
      ability: 'quarantine',
      tag: 'quarantine',
      summary: 'Rejected payloads and samples with their reasons, newest first',
      query: z.object({ unit: text(64).optional(), reason: text(64).optional(), q: text(100).optional(), limit: paging.limit, offset: paging.offset }),
      handler: async ({ query }) => ({ ...(await repo.list(query)), limit: query.limit, offset: query.offset }),
    }),
    route({
      method: 'get',
      path: '/quarantine/summary',
      ability: 'quarantine',
      tag: 'quarantine',
      summary: 'How often, by unit and reason, over the last hours',
      query: z.object({ hours: z.coerce.number().int().min(1).max(24 * 31).default(24) }),
      handler: ({ query }) => repo.summary(clock.now() - query.hours * 3_600_000),
    }),
  ];
}
