// The time window of a study or an export: the last hour, day or week (ending now), or
// fixed ends. Same shape as the estimator charts' range, with the workbench's presets.
import { customRangeProblem, fromLocalInput, resolveRange, toLocalInput, type TimeRange } from '../estimator/time-range';

export type StudyWindow = TimeRange;

export const WINDOW_PRESETS = [
  { key: '1h', label: 'Last 1 h', ms: 3_600_000 },
  { key: '24h', label: 'Last 24 h', ms: 24 * 3_600_000 },
  { key: '7d', label: 'Last 7 days', ms: 7 * 86_400_000 },
] as const;

export const DEFAULT_WINDOW: StudyWindow = { kind: 'last', ms: 24 * 3_600_000 };

/** The preset a window matches, or 'custom'. */
export function windowKey(w: StudyWindow): string {
  if (w.kind === 'custom') return 'custom';
  return WINDOW_PRESETS.find((p) => p.ms === w.ms)?.key ?? 'custom';
}

/** The window's ends at `now`. */
export function windowEnds(w: StudyWindow, now = Date.now()): { from: Date; to: Date } {
  return resolveRange(w, now);
}

export { customRangeProblem as customWindowProblem, fromLocalInput, toLocalInput };
