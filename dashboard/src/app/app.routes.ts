import { Routes } from '@angular/router';
import { signedIn } from './auth/signed-in';

export const routes: Routes = [
  { path: 'sign-in', loadComponent: () => import('./auth/sign-in').then((m) => m.SignIn), title: 'Sign in · Whitecap' },
  {
    path: '',
    canActivate: [signedIn],
    loadComponent: () => import('./shell/shell').then((m) => m.Shell),
    children: [
      { path: '', pathMatch: 'full', loadComponent: () => import('./shell/welcome').then((m) => m.Welcome), title: 'Whitecap' },
    ],
  },
  { path: '**', redirectTo: '' },
];
