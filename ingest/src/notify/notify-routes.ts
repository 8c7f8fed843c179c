// The notification side's API: the watch rota (everyone reads, admins edit), the rules
// per severity, webhook endpoints (admins) and the delivery log (responders read,
// admins send again).
import { randomBytes } from 'node:crypto';
import { z } from 'zod';
import type { Delivery, DeliveryList, NotificationRule, WebhookEndpoint, WebhookEndpointWithSecret } from '../../../shared/src/api/api-types';
import { HttpProblem } from '../http/problem';
import { idParam, route, text, type RouteDef } from '../http/route-table';
import { webhookUrlProblem } from './dispatcher';
import type { NotifyRepository } from './notify-repository';
import type { RotaService } from './rota-service';

const hhmm = z.string().regex(/^([01]\d|2[0-3]):[0-5]\d$/, 'must be a time HH:MM');
const rotaBody = z.object({
  name: z.string().trim().min(1, 'must not be empty').max(100),
  siteId: z.number().int().positive().nullable(),
  timeZone: z.string().trim().min(1).max(64),
  shifts: z.array(z.object({ weekday: z.number().int(), handover: z.string().max(5), userId: z.number().int().positive() })).max(100),
  backups: z.array(z.number().int().positive()).max(20),
});
const overrideBody = z.object({
  from: z.string().max(40),
  to: z.string().max(40),
  userId: z.number().int().positive(),
  note: z.string().trim().max(500).optional(),
});
const overrideParams = z.object({ id: z.coerce.number().int().positive(), overrideId: z.coerce.number().int().positive() });
const ruleParams = z.object({ severity: z.enum(['critical', 'warning', 'info']) });
const ruleBody = z
  .object({
    pages: z.boolean().optional(),
    // Fractions of a minute are allowed (5 s at least): short handoffs for drills and tests.
    handoffAfterMinutes: z.number().min(1 / 12).max(1440).optional(),
    quietFrom: hhmm.nullable().optional(),
    quietTo: hhmm.nullable().optional(),
  })
  .refine((b) => (b.quietFrom === undefined) === (b.quietTo === undefined) && (b.quietFrom === null) === (b.quietTo === null), {
    message: 'set quietFrom and quietTo together (both times, or both null for no quiet hours)',
    path: ['quietFrom'],
  });
const webhookBody = z.object({ url: z.string().trim().max(500), description: text(200).default('') });
const webhookPatch = z.object({ active: z.boolean().optional(), description: text(200).optional() });
const deliveriesQuery = z.object({
  channel: z.enum(['email', 'webhook']).optional(),
  status: z.enum(['pending', 'sent', 'failed']).optional(),
  limit: z.coerce.number().int().min(1).max(500).default(50),
  offset: z.coerce.number().int().min(0).default(0),
});

function endpointOut(e: { id: number; url: string; description: string; secret: string; active: boolean; createdAt: string }): WebhookEndpoint {
  return { id: e.id, url: e.url, description: e.description, active: e.active, createdAt: e.createdAt, secretHint: e.secret.slice(-4) };
}

export function notifyRoutes(repo: NotifyRepository, rotas: RotaService): RouteDef[] {
  return [
    route({ method: 'get', path: '/rotas', ability: 'read', tag: 'watch rota', summary: 'Watch rotas with who is on watch now and next', handler: () => rotas.list() }),
    route({
      method: 'post',
      path: '/rotas',
      ability: 'administer',
      tag: 'watch rota',
      summary: 'Create a watch rota (the whole fleet, or one site)',
      body: rotaBody,
      status: 201,
      handler: ({ body }) => rotas.create(body),
    }),
    route({
      method: 'patch',
      path: '/rotas/:id',
      ability: 'administer',
      tag: 'watch rota',
      summary: 'Replace a watch rota: name, scope, time zone, weekly shifts and backups',
      params: idParam,
      body: rotaBody,
      handler: ({ params, body }) => rotas.update(params.id, body),
    }),
    route({
      method: 'delete',
      path: '/rotas/:id',
      ability: 'administer',
      tag: 'watch rota',
      summary: 'Delete a watch rota',
      params: idParam,
      status: 204,
      handler: async ({ params }) => {
        await rotas.remove(params.id);
        return undefined;
      },
    }),
    route({
      method: 'post',
      path: '/rotas/:id/overrides',
      ability: 'administer',
      tag: 'watch rota',
      summary: 'Put someone on watch for a while (a swapped shift); the latest override wins',
      params: idParam,
      body: overrideBody,
      status: 201,
      handler: ({ params, body, user }) => rotas.addOverride(params.id, body, user.id),
    }),
    route({
      method: 'delete',
      path: '/rotas/:id/overrides/:overrideId',
      ability: 'administer',
      tag: 'watch rota',
      summary: 'Remove an override',
      params: overrideParams,
      handler: ({ params }) => rotas.removeOverride(params.id, params.overrideId),
    }),
    route({
      method: 'get',
      path: '/notification-rules',
      ability: 'read',
      tag: 'notifications',
      summary: 'Which severities page, their handoff time and quiet hours',
      handler: (): Promise<NotificationRule[]> => repo.rules(),
    }),
    route({
      method: 'patch',
      path: '/notification-rules/:severity',
      ability: 'administer',
      tag: 'notifications',
      summary: 'Change what one severity does',
      params: ruleParams,
      body: ruleBody,
      handler: async ({ params, body }): Promise<NotificationRule> => {
        await repo.updateRule(params.severity, body);
        return (await repo.rules()).find((r) => r.severity === params.severity)!;
      },
    }),
    route({
      method: 'get',
      path: '/webhooks',
      ability: 'administer',
      tag: 'notifications',
      summary: 'Registered webhook endpoints',
      handler: async (): Promise<WebhookEndpoint[]> => (await repo.webhooks()).map(endpointOut),
    }),
    route({
      method: 'post',
      path: '/webhooks',
      ability: 'administer',
      tag: 'notifications',
      summary: 'Register a webhook endpoint (https, or http to this machine); the signing secret is shown once',
      body: webhookBody,
      status: 201,
      handler: async ({ body, user }): Promise<WebhookEndpointWithSecret> => {
        const problem = webhookUrlProblem(body.url);
        if (problem) {
          throw new HttpProblem(400, 'invalid-request', 'Invalid request', `url: ${problem}`, { errors: [{ where: 'body', path: 'url', message: problem }] });
        }
        const secret = randomBytes(32).toString('base64url');
        let id: number;
        try {
          id = await repo.addWebhook({ url: body.url, description: body.description, secret, createdBy: user.id });
        } catch (err) {
          if ((err as { code?: string }).code === '23505') throw new HttpProblem(409, 'webhook-exists', 'Already registered', 'This URL is registered already.');
          throw err;
        }
        const created = (await repo.webhooks()).find((w) => w.id === id)!;
        return { ...endpointOut(created), secret };
      },
    }),
    route({
      method: 'patch',
      path: '/webhooks/:id',
      ability: 'administer',
      tag: 'notifications',
      summary: 'Pause or resume a webhook endpoint, or change its description',
      params: idParam,
      body: webhookPatch,
      handler: async ({ params, body }): Promise<WebhookEndpoint> => {
        if (!(await repo.updateWebhook(params.id, body))) throw new HttpProblem(404, 'not-found', 'No such endpoint', `There is no webhook endpoint ${params.id}.`);
        return endpointOut((await repo.webhooks()).find((w) => w.id === params.id)!);
      },
    }),
    route({
      method: 'delete',
      path: '/webhooks/:id',
      ability: 'administer',
      tag: 'notifications',
      summary: 'Remove a webhook endpoint (its undelivered events go with it)',
      params: idParam,
      status: 204,
      handler: async ({ params }) => {
        if (!(await repo.deleteWebhook(params.id))) throw new HttpProblem(404, 'not-found', 'No such endpoint', `There is no webhook endpoint ${params.id}.`);
        return undefined;
      },
    }),
    route({
      method: 'get',
      path: '/deliveries',
      ability: 'respond',
      tag: 'notifications',
      summary: 'Every e-mail and webhook call with its outcome, newest first',
      query: deliveriesQuery,
      handler: async ({ query }): Promise<DeliveryList> => ({ ...(await repo.deliveries(query)), limit: query.limit, offset: query.offset }),
    }),
    route({
      method: 'post',
      path: '/deliveries/:id/retry',
      ability: 'administer',
      tag: 'notifications',
      summary: 'Send a failed delivery again',
      params: idParam,
      handler: async ({ params }): Promise<Delivery> => {
        if (!(await repo.retry(params.id))) throw new HttpProblem(409, 'delivery-state', 'Cannot retry', 'Only a failed or waiting delivery can be sent again.');
        return (await repo.delivery(params.id))!;
      },
    }),
  ];
}
