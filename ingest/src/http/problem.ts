// Errors in one shape: problem+json (RFC 9457), with a stable type per kind of error.
import type { ErrorRequestHandler, RequestHandler } from 'express';
import type { Logger } from '../logger';

export const PROBLEM_BASE = 'https://whitecap.invalid/problems/';

export class HttpProblem extends Error {
  constructor(
    readonly status: number,
    readonly kind: string,
    readonly title: string,
    readonly detail?: string,
    readonly extra: Record<string, unknown> = {},
  ) {
    super(detail ?? title);
  }
}

export const notFound: RequestHandler = (req, _res, next) => {
  next(new HttpProblem(404, 'not-found', 'Not found', `No resource at ${req.method} ${req.path}`));
};

/** How the parse error raised by refusePrototypeKeys begins (told apart from malformed JSON below). */
export const FORBIDDEN_KEY_MESSAGE = 'Forbidden key in JSON';

/**
 * express.json()'s reviver: refuses `__proto__` and `constructor.prototype` anywhere in a
 * body (the parse fails, and the request gets a 400), so no code below ever meets them.
 */
export function refusePrototypeKeys(key: string, value: unknown): unknown {
  if (key === '__proto__' || (key === 'constructor' && value !== null && typeof value === 'object' && 'prototype' in value)) {
    throw new SyntaxError(`${FORBIDDEN_KEY_MESSAGE}: ${key}`);
  }
  return value;
}

/** Errors of the request's own making that libraries raise with an HTTP status (body parser, router, static files). */
function clientError(err: unknown): HttpProblem | null {
  if (!err || typeof err !== 'object') return null;
  const e = err as { status?: unknown; statusCode?: unknown; type?: unknown; message?: unknown };
  const status = typeof e.status === 'number' ? e.status : typeof e.statusCode === 'number' ? e.statusCode : NaN;
  if (e.type === 'entity.parse.failed') {
    if (typeof e.message === 'string' && e.message.startsWith(FORBIDDEN_KEY_MESSAGE)) {
      return new HttpProblem(400, 'forbidden-key', 'Key not allowed', 'A JSON body may not use the keys __proto__ or constructor.prototype.');
    }
    return new HttpProblem(400, 'malformed-json', 'Malformed JSON', 'The request body is not valid JSON.');
  }
  if (e.type === 'entity.too.large') return new HttpProblem(413, 'body-too-large', 'Request body too large');
  if (e.type === 'charset.unsupported') return new HttpProblem(415, 'unsupported-media-type', 'Unsupported charset', 'Send JSON as UTF-8.');
  if (e.type === 'encoding.unsupported') return new HttpProblem(415, 'unsupported-media-type', 'Unsupported content encoding', 'Send the body uncompressed, or as gzip, deflate or br.');
  if (!(status >= 400 && status < 500)) return null;
  return new HttpProblem(status, status === 404 ? 'not-found' : 'bad-request', status === 404 ? 'Not found' : 'Bad request', 'The request could not be read.');
}

/**
 * PostgreSQL's data exceptions that only a value from the request can cause once it has passed
 * validation (an id past int4, text with a NUL byte, a malformed number): the request's fault,
 * so a 400 rather than a 500. Logged, so that a missing check can be added where it belongs.
 */
const DATA_EXCEPTIONS = new Set(['22P02', '22003', '22021', '22001', '22007', '22008']);

export function problemHandler(logger: Logger): ErrorRequestHandler {
  return (err, req, res, _next) => {
    let problem: HttpProblem;
    const code = err && typeof err === 'object' && 'code' in err ? String((err as { code: unknown }).code) : '';
    if (err instanceof HttpProblem) {
      problem = err;
    } else if (DATA_EXCEPTIONS.has(code) && 'severity' in err) {
      logger.warn({ code, path: req.path, message: (err as Error).message }, 'the database refused a value from a request');
      problem = new HttpProblem(400, 'invalid-value', 'Invalid value', 'A value in the request is out of range or cannot be stored.');
    } else {
      const client = clientError(err);
      if (client) {
        problem = client;
      } else {
        logger.error({ err, path: req.path }, 'unhandled error');
        problem = new HttpProblem(500, 'internal', 'Internal error', 'Something went wrong on our side; it has been logged.');
      }
    }
    if (res.headersSent) {
      res.destroy();
      return;
    }
    res
      .status(problem.status)
      .type('application/problem+json')
      .json({
        type: PROBLEM_BASE + problem.kind,
        title: problem.title,
        status: problem.status,
        ...(problem.detail ? { detail: problem.detail } : {}),
        instance: req.originalUrl,
        ...problem.extra,
      });
  };
}
