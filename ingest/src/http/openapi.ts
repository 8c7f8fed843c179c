// The OpenAPI 3.1 document of the whole API, generated from the route table (and the few
// routes outside it: health, sign-in and sessions).
import { z, type ZodType } from 'zod';
import { ROLE_ABILITIES } from '../../../shared/src/api/api-types';
import { openApiPath, type RouteDef } from './route-table';

type Json = Record<string, unknown>;

function schemaOf(s: ZodType): Json {
  const out = z.toJSONSchema(s, { io: 'input', unrepresentable: 'any' }) as Json;
  delete out.$schema;
  return out;
}

function parameters(where: 'path' | 'query', s: ZodType | undefined): Json[] {
  if (!s) return [];
  const js = schemaOf(s) as { properties?: Record<string, Json>; required?: string[] };
  return Object.entries(js.properties ?? {}).map(([name, schema]) => ({
    name,
    in: where,
    required: where === 'path' || (js.required ?? []).includes(name),
    schema,
    ...(typeof schema.description === 'string' ? { description: schema.description } : {}),
  }));
}

const problem = { $ref: '#/components/responses/Problem' };

/** Routes served outside the table, described by hand. */
export const extraOperations: { method: string; path: string; op: Json }[] = [
  {
    method: 'get',
    path: '/health',
    op: { tags: ['service'], summary: 'Whether the database and the broker are up (200), or not (503)', security: [], responses: { 200: { description: 'up' }, 503: { description: 'a part is down' } } },
  },
  {
    method: 'post',
    path: '/auth/sign-in',
    op: {
      tags: ['auth'],
      summary: 'Sign in with e-mail and password: an access token, and a refresh token in an httpOnly cookie. Rate-limited; repeated failures lock the account for a while; refused (403) to a page of another origin',
      security: [],
      requestBody: { required: true, content: { 'application/json': { schema: { type: 'object', required: ['email', 'password'], properties: { email: { type: 'string' }, password: { type: 'string' } } } } } },
      responses: { 200: { description: 'signed in' }, 401: problem, 403: problem, 423: problem, 429: problem },
    },
  },
  {
    method: 'post',
    path: '/auth/refresh',
    op: { tags: ['auth'], summary: 'A new access token from the refresh cookie (rotated); needs the header X-Whitecap-CSRF: 1', security: [], responses: { 200: { description: 'refreshed' }, 401: problem, 403: problem } },
  },
  {
    method: 'post',
    path: '/auth/sign-out',
    op: { tags: ['auth'], summary: 'Revoke the refresh token and clear its cookie; needs the header X-Whitecap-CSRF: 1', security: [], responses: { 204: { description: 'signed out' }, 403: problem } },
  },
  { method: 'get', path: '/auth/me', op: { tags: ['auth'], summary: 'The signed-in user', responses: { 200: { description: 'the user' }, 401: problem } } },
  {
    method: 'post',
    path: '/auth/password',
    op: {
      tags: ['auth'],
      summary: 'Change my password (10 to 200 characters, at least 5 different, not a run or a common password, not my e-mail); ends my other sessions. Rate-limited like sign-in',
      requestBody: { required: true, content: { 'application/json': { schema: { type: 'object', required: ['currentPassword', 'newPassword'], properties: { currentPassword: { type: 'string' }, newPassword: { type: 'string' } } } } } },
      responses: { 204: { description: 'changed' }, 400: problem, 401: problem, 429: problem },
    },
  },
];

export function openApiDocument(routes: RouteDef[], serverUrl: string): Json {
  const paths: Record<string, Json> = {};
  for (const r of routes) {
    const p = (paths[openApiPath(r.path)] ??= {});
    const roles = (ROLE_ABILITIES[r.ability] as readonly string[]).join(', ');
    p[r.method] = {
      tags: [r.tag],
      summary: r.summary,
      description: `Needs the ability '${r.ability}' (roles: ${roles}).`,
      'x-whitecap-ability': r.ability,
      parameters: [...parameters('path', r.params), ...parameters('query', r.query)],
      ...(r.body ? { requestBody: { required: true, content: { 'application/json': { schema: schemaOf(r.body) } } } } : {}),
      responses: {
        [String(r.status ?? 200)]: { description: 'success', content: { [r.produces ?? 'application/json']: {} } },
        400: problem,
        401: problem,
        403: problem,
        404: problem,
        ...(r.body ? { 413: problem, 415: problem } : {}),
      },
    };
  }
  for (const e of extraOperations) (paths[e.path] ??= {})[e.method] = e.op;
  return {
    openapi: '3.1.0',
    info: {
      title: 'Whitecap API',
      version: '1',
      description:
        'Consistency watch for a fleet\'s state estimators. Errors are problem+json (RFC 9457). Verdicts and proposals are advisory: validate any change to an estimator or controller in simulation and under your own safety process.',
    },
    servers: [{ url: `${serverUrl}/api` }],
    security: [{ bearer: [] }],
    paths,
    components: {
      securitySchemes: { bearer: { type: 'http', scheme: 'bearer', bearerFormat: 'JWT' } },
      responses: {
        Problem: {
          description: 'problem+json',
          content: {
            'application/problem+json': {
              schema: {
                type: 'object',
                properties: { type: { type: 'string' }, title: { type: 'string' }, status: { type: 'integer' }, detail: { type: 'string' }, instance: { type: 'string' } },
              },
            },
          },
        },
      },
    },
  };
}
