/** A time range for the estimator's charts: the last so long (moving with now), or fixed ends. */
export type TimeRange = { kind: 'last'; ms: number } | { kind: 'custom'; from: Date; to: Date };

export const RANGE_PRESETS = [
  { key: '15m', label: '15 min', ms: 15 * 60_000 },
  { key: '1h', label: '1 h', ms: 3_600_000 },
  { key: '6h', label: '6 h', ms: 6 * 3_600_000 },
  { key: '24h', label: '24 h', ms: 24 * 3_600_000 },
  { key: '7d', label: '7 d', ms: 7 * 86_400_000 },
] as const;

/** The longest range the series endpoint serves. */
export const MAX_RANGE_MS = 31 * 86_400_000;

export const DEFAULT_RANGE: TimeRange = { kind: 'last', ms: 3_600_000 };

/** The ends of a range at `now`. */
export function resolveRange(range: TimeRange, now = Date.now()): { from: Date; to: Date } {
  return range.kind === 'last' ? { from: new Date(now - range.ms), to: new Date(now) } : { from: range.from, to: range.to };
}

/** The preset key a range matches, or 'custom'. */
export function presetKey(range: TimeRange): string {
  if (range.kind === 'custom') return 'custom';
  return RANGE_PRESETS.find((p) => p.ms === range.ms)?.key ?? 'custom';
}

/** A custom range's problem in words, or null when it can be shown. */
export function customRangeProblem(from: Date | null, to: Date | null, now = Date.now()): string | null {
  if (!from || Number.isNaN(from.getTime())) return 'Enter when the range starts.';
  if (!to || Number.isNaN(to.getTime())) return 'Enter when the range ends.';
  if (from.getTime() >= to.getTime()) return 'The start must be before the end.';
  if (from.getTime() > now) return 'The start is in the future; pick a time that has passed.';
  if (to.getTime() - from.getTime() > MAX_RANGE_MS) return 'Pick a range of at most 31 days.';
  return null;
}

/** A Date as the value of an <input type="datetime-local"> (local time, minutes). */
export function toLocalInput(d: Date): string {
  const pad = (n: number) => String(n).padStart(2, '0');
  return `${d.getFullYear()}-${pad(d.getMonth() + 1)}-${pad(d.getDate())}T${pad(d.getHours())}:${pad(d.getMinutes())}`;
}

/** The value of an <input type="datetime-local"> as a Date (local time), or null when empty. */
export function fromLocalInput(value: string): Date | null {
  if (!value) return null;
  const d = new Date(value);
  return Number.isNaN(d.getTime()) ? null : d;
}
