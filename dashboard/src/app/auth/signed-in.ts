import { inject } from '@angular/core';
import { CanActivateFn, Router } from '@angular/router';
import { Session } from './session';

/**
 * Routes behind sign-in: first tries to restore the session from the refresh cookie (a
 * reload keeps you signed in), otherwise sends the visitor to sign in and back.
 */
export const signedIn: CanActivateFn = async (_route, state) => {
  const session = inject(Session);
  const router = inject(Router);
  if (session.user()) return true;
  // restore() tries once per page load; a later sign-out leaves user() empty again.
  await session.restore();
  if (session.user()) return true;
  // The default landing page needs no return address.
  const returnUrl = state.url && state.url !== '/' && state.url !== '/fleet' ? state.url : undefined;
  return router.createUrlTree(['/sign-in'], { queryParams: returnUrl ? { returnUrl } : {} });
};
