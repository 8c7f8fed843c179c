import { HttpErrorResponse } from '@angular/common/http';

/** The problem+json body (RFC 9457) the service answers errors with. */
interface ProblemBody {
  title?: string;
  detail?: string;
  errors?: { path?: string; message?: string }[];
}

function problemOf(err: HttpErrorResponse): ProblemBody | null {
  return typeof err.error === 'object' && err.error !== null ? (err.error as ProblemBody) : null;
}

/**
 * Turns a failed call into a sentence that says what happened and what to do: the
 * service's own `detail` when it gave one, otherwise a message for the kind of failure.
 * `retry` is the advice for failures the user can only wait out.
 */
export function problemMessage(err: unknown, retry = 'Try again in a moment.'): string {
  if (!(err instanceof HttpErrorResponse)) return `Something went wrong in the dashboard. ${retry}`;
  const problem = problemOf(err);
  const detail = problem?.detail?.trim();
  switch (err.status) {
    case 0:
      return `Whitecap cannot be reached. Check your connection; ${retry.charAt(0).toLowerCase()}${retry.slice(1)}`;
    case 401:
      return 'Your session has ended. Sign in again.';
    case 403:
      return detail
        ? `${detail} Ask an administrator if your role should allow it.`
        : 'Your role does not allow this. Ask an administrator if it should.';
    case 404:
      return detail || 'That was not found; it may have been removed. Go back and pick it again.';
    case 429:
      return detail || 'Too many requests. Wait a minute, then try again.';
  }
  if (detail) return detail;
  if (err.status >= 500) return `The service had a problem (${err.status}). ${retry}`;
  return `${problem?.title || 'The request was refused'} (${err.status}). ${retry}`;
}
