// The API's routes, declared as data: method, path, the ability a caller needs, and the
// zod schemas of its input. One table serves three purposes: the Express routers are
// built from it, every route's authorization is checked from it (and tested for every
// entry), and the OpenAPI document is generated from it.
import type { Request, RequestHandler, Response, Router } from 'express';
import { z, type ZodType } from 'zod';
import { can, type Ability, type Role, type User } from '../../../shared/src/api/api-types';
import { HttpProblem } from './problem';

type AuthedRequest = Request & { user?: User };

export interface RouteContext<P, Q, B> {
  user: User;
  params: P;
  query: Q;
  body: B;
  req: Request;
  res: Response;
}

export interface RouteDef<P = any, Q = any, B = any> {
  method: 'get' | 'post' | 'patch' | 'delete';
  /** Express path relative to /api, e.g. '/alerts/:id'. */
  path: string;
  /** What the caller must be allowed to do. */
  ability: Ability;
  tag: string;
  summary: string;
  params?: ZodType<P>;
  query?: ZodType<Q>;
  body?: ZodType<B>;
  /** HTTP status of a success (default 200). */
  status?: number;
  /** Response media type for the document (default application/json). */
  produces?: string;
  /**
   * Returns the JSON body; or writes the response itself (streams, CSV, events) and
   * returns undefined with `raw: true`.
   */
  handler: (ctx: RouteContext<P, Q, B>) => unknown | Promise<unknown>;
  raw?: boolean;
}

/** Declares a route with its input types inferred from its schemas. */
export function route<P = unknown, Q = unknown, B = unknown>(def: RouteDef<P, Q, B>): RouteDef<P, Q, B> {
  return def;
}

function invalid(where: string, error: z.ZodError): HttpProblem {
  const errors = error.issues.map((i) => ({ where, path: i.path.join('.'), message: i.message }));
  const first = errors[0];
  return new HttpProblem(
    400,
    'invalid-request',
    'Invalid request',
    `${where}${first.path ? ` ${first.path}` : ''}: ${first.message}`,
    { errors },
  );
}

/** Checks the caller's role against a route's ability (after authentication). */
export function allow(ability: Ability): RequestHandler {
  return (req, _res, next) => {
    const role = (req as AuthedRequest).user?.role as Role | undefined;
    if (!can(role, ability)) {
      return next(
        new HttpProblem(403, 'forbidden', 'Not allowed', `Your role (${role ?? 'none'}) may not do this; it needs '${ability}'.`),
      );
    }
    next();
  };
}

/** How deep a JSON body or query may nest (a design model is three levels: object, rows, entries). */
export const MAX_INPUT_DEPTH = 32;

/**
 * What no route takes, whatever its schema: nesting deeper than MAX_INPUT_DEPTH (a validator
 * or checker that recurses would run out of stack) and the NUL character (PostgreSQL cannot
 * store it in text). Walks the value without recursion; null when the value is acceptable.
 */
export function unacceptable(value: unknown, where: string): HttpProblem | null {
  const stack: { v: unknown; path: (string | number)[] }[] = [{ v: value, path: [] }];
  while (stack.length > 0) {
    const { v, path } = stack.pop()!;
    const problem = (message: string) =>
      new HttpProblem(400, 'invalid-request', 'Invalid request', `${where}${path.length ? ` ${path.join('.')}` : ''}: ${message}`, {
        errors: [{ where, path: path.join('.'), message }],
      });
    if (typeof v === 'string') {
      if (v.includes('\u0000')) return problem('must not contain the NUL character');
    } else if (v !== null && typeof v === 'object') {
      if (path.length >= MAX_INPUT_DEPTH) return problem(`nested more than ${MAX_INPUT_DEPTH} levels deep`);
      for (const [k, child] of Object.entries(v)) {
        if (k.includes('\u0000')) return problem('must not contain the NUL character');
        stack.push({ v: child, path: [...path, Array.isArray(v) ? Number(k) : k] });
      }
    }
  }
  return null;
}

/** Whether the request carries a body (a length above zero, or chunks). */
function hasBody(req: Request): boolean {
  return req.headers['transfer-encoding'] !== undefined || (req.headers['content-length'] !== undefined && req.headers['content-length'] !== '0');
}

/** Mounts the routes on a router: authentication, then the role check, then validation, then the handler. */
export function mountRoutes(router: Router, defs: RouteDef[], authenticate: RequestHandler): void {
  for (const def of defs) {
    router[def.method](def.path, authenticate, allow(def.ability), async (req: Request, res: Response) => {
      // A route that takes JSON reads nothing else: a form or text body is refused, not taken for an empty object.
      if (def.body && hasBody(req) && !req.is('application/json')) {
        throw new HttpProblem(415, 'unsupported-media-type', 'Send JSON', 'The request body must be application/json.');
      }
      const parse = <T>(schema: ZodType<T> | undefined, value: unknown, where: string): T => {
        if (!schema) return value as T;
        const refused = unacceptable(value, where);
        if (refused) throw refused;
        const r = schema.safeParse(value ?? {});
        if (!r.success) throw invalid(where, r.error);
        return r.data;
      };
      const params = parse(def.params, req.params, 'path');
      const query = parse(def.query, req.query, 'query');
      const body = parse(def.body, req.body, 'body');
      const result = await def.handler({ user: (req as AuthedRequest).user as User, params, query, body, req, res });
      if (def.raw) return;
      res.status(def.status ?? 200);
      if (result === undefined) res.end();
      else res.json(result);
    });
  }
}

/** Express path '/alerts/:id' → OpenAPI path '/alerts/{id}'. */
export function openApiPath(path: string): string {
  return path.replace(/:([A-Za-z0-9_]+)/g, '{$1}');
}

// Shared input pieces.
/** A row id in a path. Ids are PostgreSQL integers (int4); larger ones are refused here rather than by the database. */
export const idParam = z.object({ id: z.coerce.number().int().positive().max(2_147_483_647) });
export const paging = {
  limit: z.coerce.number().int().min(1).max(500).default(50),
  offset: z.coerce.number().int().min(0).default(0),
  order: z.enum(['asc', 'desc']).default('asc'),
};
export const text = (max = 200) => z.string().trim().max(max);
