import { HttpErrorResponse } from '@angular/common/http';

/** One field the service refused, from a problem+json body's `errors`. */
export interface ProblemIssue {
  /** Dotted path into the request body, e.g. 'shifts.2.handover' ('' for the whole body). */
  path: string;
  message: string;
}

/** The field-level problems of a refused call (empty when the service named none). */
export function problemIssues(err: unknown): ProblemIssue[] {
  if (!(err instanceof HttpErrorResponse) || typeof err.error !== 'object' || err.error === null) return [];
  const errors = (err.error as { errors?: unknown }).errors;
  if (!Array.isArray(errors)) return [];
  return errors
    .filter((e): e is { path?: unknown; message?: unknown } => !!e && typeof e === 'object')
    .map((e) => ({ path: typeof e.path === 'string' ? e.path : '', message: typeof e.message === 'string' ? e.message : 'not accepted' }));
}

/** The last part of a problem's `type` URL (the stable kind, e.g. 'link-expired'); null when there is none. */
export function problemKind(err: unknown): string | null {
  if (!(err instanceof HttpErrorResponse) || typeof err.error !== 'object' || err.error === null) return null;
  const type = (err.error as { type?: unknown }).type;
  if (typeof type !== 'string' || !type) return null;
  return type.split('/').filter(Boolean).pop() ?? null;
}
