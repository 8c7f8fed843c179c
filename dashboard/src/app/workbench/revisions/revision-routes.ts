import type { Routes } from '@angular/router';
import { DesignRegistry } from './design-registry';
import { DesignRevisions } from './design-revisions';
import { RevisionEditor } from './revision-editor';
import { RevisionView } from './revision-view';

/** The design registry under /workbench/designs (loaded with its first page). */
export const revisionRoutes: Routes = [
  { path: '', component: DesignRegistry, title: 'Design registry · Whitecap' },
  { path: ':id', component: DesignRevisions, title: 'Design · Whitecap' },
  { path: ':id/revisions/new', component: RevisionEditor, title: 'New design revision · Whitecap' },
  { path: ':id/revisions/:revisionId', component: RevisionView, title: 'Design revision · Whitecap' },
];
