import { inject } from '@angular/core';
import { CanActivateFn, Router } from '@angular/router';
import { Session } from './session';

/** Routes behind sign-in send a signed-out visitor to the sign-in screen. */
export const signedIn: CanActivateFn = () => {
  return inject(Session).user() ? true : inject(Router).createUrlTree(['/sign-in']);
};
