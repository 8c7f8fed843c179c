import { HttpErrorResponse, HttpInterceptorFn, HttpRequest } from '@angular/common/http';
import { inject } from '@angular/core';
import { from, switchMap, throwError, catchError } from 'rxjs';
import { Session } from './session';

/**
 * Adds the access token to calls to our own API. When a call answers 401 (the token ran
 * out), it refreshes the session once and retries the call with the new token.
 */
export const bearerToken: HttpInterceptorFn = (req, next) => {
  if (!req.url.startsWith('/api/')) return next(req);
  const session = inject(Session);
  const authorized = (r: HttpRequest<unknown>): HttpRequest<unknown> => {
    const token = session.token();
    return token ? r.clone({ setHeaders: { Authorization: `Bearer ${token}` } }) : r;
  };
  if (req.url.startsWith('/api/auth/')) return next(authorized(req));
  const hadToken = !!session.token();
  return next(authorized(req)).pipe(
    catchError((err: unknown) => {
      if (!(err instanceof HttpErrorResponse) || err.status !== 401 || !hadToken) return throwError(() => err);
      return from(session.refresh()).pipe(switchMap((ok) => (ok ? next(authorized(req)) : throwError(() => err))));
    }),
  );
};
