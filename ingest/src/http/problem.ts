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

export function problemHandler(logger: Logger): ErrorRequestHandler {
  return (err, req, res, _next) => {
    let problem: HttpProblem;
    if (err instanceof HttpProblem) {
      problem = err;
    } else if (err && typeof err === 'object' && 'type' in err && err.type === 'entity.parse.failed') {
      problem = new HttpProblem(400, 'malformed-json', 'Malformed JSON', 'The request body is not valid JSON.');
    } else if (err && typeof err === 'object' && 'type' in err && err.type === 'entity.too.large') {
      problem = new HttpProblem(413, 'body-too-large', 'Request body too large');
    } else {
      logger.error({ err, path: req.path }, 'unhandled error');
      problem = new HttpProblem(500, 'internal', 'Internal error', 'Something went wrong on our side; it has been logged.');
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
