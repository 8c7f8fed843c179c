// Cohorts: the estimators on one design revision, offered from GET /api/designs.
import type { DesignSummary } from '../../../../shared/src/api/api-types';

export interface CohortOption {
  revisionId: number;
  designKey: string;
  designName: string;
  revision: number;
  status: 'draft' | 'released' | 'retired';
  estimators: number;
  stateDim: number;
  measurementDim: number;
}

export interface CohortGroup {
  designKey: string;
  designName: string;
  options: CohortOption[];
}

/** Every revision of every design, grouped by design, newest revision first. */
export function cohortGroups(designs: readonly DesignSummary[]): CohortGroup[] {
  return designs.map((d) => ({
    designKey: d.key,
    designName: d.name,
    options: [...d.revisions]
      .sort((a, b) => b.revision - a.revision)
      .map((r) => ({
        revisionId: r.id,
        designKey: d.key,
        designName: d.name,
        revision: r.revision,
        status: r.status,
        estimators: r.estimators,
        stateDim: r.stateDim,
        measurementDim: r.measurementDim,
      })),
  }));
}

/** "tractor-position rev 2 · released · 8 estimators". */
export function cohortLabel(o: CohortOption): string {
  const count = o.estimators === 1 ? '1 estimator' : `${o.estimators.toLocaleString('en-GB')} estimators`;
  return `${o.designKey} rev ${o.revision} · ${o.status} · ${count}`;
}
