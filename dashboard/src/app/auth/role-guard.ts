import { inject } from '@angular/core';
import { MatSnackBar } from '@angular/material/snack-bar';
import { CanActivateFn, Router } from '@angular/router';
import type { Ability } from '../../../../shared/src/api/api-types';
import { Session } from './session';

const WHAT: Record<Ability, string> = {
  read: 'read the fleet',
  respond: 'respond to alerts',
  quarantine: 'see the quarantine',
  administer: 'administer Whitecap',
  design: "use the designer's workbench",
};

/** Lets a route open only for roles with the ability; others land on the fleet overview, told why. */
export function allowedFor(ability: Ability): CanActivateFn {
  return () => {
    const session = inject(Session);
    if (session.can(ability)) return true;
    inject(MatSnackBar).open(
      `Your role (${session.role() ?? 'none'}) cannot ${WHAT[ability]}, so you are on the fleet overview. Ask an administrator if you need access.`,
      'Dismiss',
      { duration: 8000, politeness: 'assertive' },
    );
    return inject(Router).createUrlTree(['/fleet']);
  };
}
