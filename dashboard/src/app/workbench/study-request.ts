// The "Run study" form's rules, as a plain function: what the designer chose, checked,
// turned into the StudyRequest the service takes.
import type { StudyRequest } from '../../../../shared/src/api/api-types';
import type { PickedEstimator } from './estimator-picker';
import { windowEnds, type StudyWindow } from './study-window';

export type StudySource = 'cohort' | 'estimators' | 'uploads';
export type CovarianceStructure = 'diagonal' | 'full';

export interface StudyDraft {
  source: StudySource;
  revisionId: number | null;
  picked: readonly PickedEstimator[];
  /** Residual uploads chosen with source 'uploads'. */
  uploadIds?: readonly number[];
  window: StudyWindow | null;
  /** As typed. */
  lags: string;
  estimateQ: CovarianceStructure;
  estimateR: CovarianceStructure;
  title: string;
}

export const LAGS_MIN = 2;
export const LAGS_MAX = 60;
export const DEFAULT_LAGS = 15;

export type StudyRequestCheck = { ok: true; request: StudyRequest } | { ok: false; problems: string[] };

/** Checks a draft and builds the request; the problems are sentences that say what to change. */
export function studyRequest(draft: StudyDraft, now = Date.now()): StudyRequestCheck {
  const problems: string[] = [];
  if (draft.source === 'cohort' && draft.revisionId === null) problems.push('Choose the design revision whose estimators to study.');
  if (draft.source === 'estimators') {
    if (!draft.picked.length) problems.push('Choose at least one estimator.');
    const revisions = new Set(draft.picked.map((e) => `${e.designKey} rev ${e.revision}`));
    if (revisions.size > 1) {
      problems.push(`The chosen estimators run ${[...revisions].join(', ')}; a study covers one design revision, so keep the estimators of one.`);
    }
  }
  if (draft.source === 'uploads' && !draft.uploadIds?.length) problems.push('Choose at least one upload.');
  if (!draft.window) problems.push('Fix the custom window, or pick a preset.');
  const lagsText = draft.lags.trim();
  const lags = lagsText === '' ? DEFAULT_LAGS : Number(lagsText);
  if (!Number.isInteger(lags) || lags < LAGS_MIN || lags > LAGS_MAX) problems.push(`Lags must be a whole number from ${LAGS_MIN} to ${LAGS_MAX}.`);
  const title = draft.title.trim();
  if (title.length > 200) problems.push('Keep the title to 200 characters.');
  if (problems.length || !draft.window) return { ok: false, problems };

  const { from, to } = windowEnds(draft.window, now);
  const request: StudyRequest = {
    from: from.toISOString(),
    to: to.toISOString(),
    lags,
    estimateQ: draft.estimateQ,
    estimateR: draft.estimateR,
  };
  if (draft.source === 'cohort') request.designRevisionId = draft.revisionId!;
  else if (draft.source === 'uploads') request.uploadIds = [...draft.uploadIds!];
  else request.estimatorIds = draft.picked.map((e) => e.id);
  if (title) request.title = title;
  return { ok: true, request };
}
