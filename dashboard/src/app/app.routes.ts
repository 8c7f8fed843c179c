import { Routes } from '@angular/router';
import { allowedFor } from './auth/role-guard';
import { signedIn } from './auth/signed-in';

export const routes: Routes = [
  { path: 'sign-in', loadComponent: () => import('./auth/sign-in').then((m) => m.SignIn), title: 'Sign in · Whitecap' },
  // Public: opened from an e-mail, no sign-in (the token is the credential, and only the button uses it).
  {
    path: 'ack/:token',
    loadComponent: () => import('./notifications/acknowledge-link').then((m) => m.AcknowledgeLink),
    title: 'Acknowledge an alert · Whitecap',
  },
  {
    path: '',
    canActivate: [signedIn],
    loadComponent: () => import('./shell/shell').then((m) => m.Shell),
    children: [
      { path: '', pathMatch: 'full', redirectTo: 'fleet' },
      {
        path: 'fleet',
        loadComponent: () => import('./fleet/fleet-overview').then((m) => m.FleetOverview),
        title: 'Fleet · Whitecap',
      },
      {
        path: 'estimators/:id',
        loadComponent: () => import('./estimator/estimator-detail').then((m) => m.EstimatorDetail),
        title: 'Estimator · Whitecap',
      },
      {
        path: 'alerts',
        loadComponent: () => import('./alerts/alert-inbox').then((m) => m.AlertInbox),
        title: 'Alerts · Whitecap',
        children: [
          { path: '', children: [] },
          { path: ':id', loadComponent: () => import('./alerts/alert-detail').then((m) => m.AlertDetail) },
        ],
      },
      {
        path: 'rota',
        loadComponent: () => import('./rota/watch-rota').then((m) => m.WatchRota),
        title: 'Watch rota · Whitecap',
      },
      {
        path: 'notifications',
        canActivate: [allowedFor('respond')],
        loadComponent: () => import('./notifications/notifications').then((m) => m.Notifications),
        title: 'Notifications · Whitecap',
      },
      {
        path: 'quarantine',
        canActivate: [allowedFor('quarantine')],
        loadComponent: () => import('./quarantine/quarantine').then((m) => m.Quarantine),
        title: 'Quarantine · Whitecap',
      },
      {
        path: 'workbench',
        canActivate: [allowedFor('design')],
        children: [
          {
            path: '',
            loadComponent: () => import('./workbench/workbench').then((m) => m.Workbench),
            title: 'Workbench · Whitecap',
          },
          {
            path: 'studies/:id',
            loadComponent: () => import('./workbench/study-page').then((m) => m.StudyPage),
            title: 'Retune study · Whitecap',
          },
          { path: 'designs', loadChildren: () => import('./workbench/revisions/revision-routes').then((m) => m.revisionRoutes) },
        ],
      },
      {
        path: 'admin',
        canActivate: [allowedFor('administer')],
        loadComponent: () => import('./admin/admin').then((m) => m.Admin),
        title: 'Administration · Whitecap',
      },
    ],
  },
  { path: '**', redirectTo: '' },
];
