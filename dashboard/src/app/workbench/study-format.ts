// Words and numbers of a retune study, as plain functions of its data (checked in
// study-format.spec.ts): matrix entries, bootstrap intervals, identifiability,
// NIS multiples, poles, and the loop's margins with their floors.
import type { ComplexNumber, StudyMargins, StudyRequest } from '../../../../shared/src/api/api-types';

const MINUS = '−';

/** One matrix entry: four significant figures, exponent form when very small or large, a true minus sign. */
export function formatEntry(x: number | null | undefined): string {
  if (x === null || x === undefined || Number.isNaN(x)) return '—';
  if (x === Infinity) return '∞';
  if (x === -Infinity) return `${MINUS}∞`;
  if (x === 0) return '0';
  const a = Math.abs(x);
  const text = a < 1e-3 || a >= 1e5 ? a.toExponential(2).replace('e-', `e${MINUS}`).replace('e+', 'e') : String(Number(a.toPrecision(4)));
  return x < 0 ? `${MINUS}${text}` : text;
}

/** A bootstrap interval as "lo to hi" (its ends formatted as entries); a dash when there is none. */
export function formatInterval(interval: readonly [number, number] | null | undefined): string {
  if (!interval || interval.length !== 2) return '—';
  const [lo, hi] = interval;
  if (!Number.isFinite(lo) || !Number.isFinite(hi)) return '—';
  return `${formatEntry(Math.min(lo, hi))} to ${formatEntry(Math.max(lo, hi))}`;
}

export interface MatrixCell {
  text: string;
  /** The entry's bootstrap interval in words, when intervals were computed. */
  interval: string | null;
  /** Whether the interval contains zero (the data cannot tell the entry from 0). */
  spansZero: boolean;
}

/**
 * A row-major matrix as rows of cells for a table, with each entry's interval under it.
 * An entry held at 0 by the structure (a diagonal estimate's off-diagonal: 0 with the
 * interval [0, 0]) gets no interval.
 */
export function matrixCells(M: readonly (readonly number[])[], intervals?: readonly (readonly (readonly [number, number])[])[] | null): MatrixCell[][] {
  return M.map((row, i) =>
    row.map((x, j) => {
      const given = intervals?.[i]?.[j] ?? null;
      const iv = given && !(x === 0 && given[0] === 0 && given[1] === 0) ? given : null;
      return {
        text: formatEntry(x),
        interval: iv ? formatInterval(iv) : null,
        spansZero: !!iv && Math.min(iv[0], iv[1]) <= 0 && Math.max(iv[0], iv[1]) >= 0,
      };
    }),
  );
}

/** "4 × 2", the shape of a matrix. */
export function matrixShape(M: readonly (readonly number[])[]): string {
  return `${M.length} × ${M[0]?.length ?? 0}`;
}

/** A multiple, e.g. "23.4×", with two decimals near 1 so a consistent filter reads "1.00×". */
export function formatMultiple(x: number | null | undefined): string {
  if (x === null || x === undefined || !Number.isFinite(x)) return '—';
  const a = Math.abs(x);
  const text = a >= 100 ? Math.round(x).toLocaleString('en-GB') : a >= 10 ? x.toFixed(1) : x.toFixed(2);
  return `${text}×`;
}

/** A NIS mean as a multiple of its expected value m, with the mean itself. */
export function nisWords(ratio: number, m: number): string {
  if (!Number.isFinite(ratio)) return 'not available';
  return `${formatMultiple(ratio)} expected (mean NIS ${formatEntry(ratio * m)} against m = ${m})`;
}

/**
 * How far the estimated diagonal lies from the assumed one, in words: "48.2× to 51.0×
 * the assumed" (entries the design assumes to be 0 are left out).
 */
export function diagonalRatioWords(assumed: readonly (readonly number[])[], estimated: readonly (readonly number[])[]): string | null {
  const ratios: number[] = [];
  for (let i = 0; i < Math.min(assumed.length, estimated.length); i++) {
    const a = assumed[i]?.[i];
    const e = estimated[i]?.[i];
    if (a !== undefined && e !== undefined && a > 0 && Number.isFinite(e)) ratios.push(e / a);
  }
  if (!ratios.length) return null;
  const lo = Math.min(...ratios);
  const hi = Math.max(...ratios);
  const range = Math.abs(hi - lo) <= 0.005 * Math.max(Math.abs(hi), 1e-300) ? formatMultiple(lo) : `${formatMultiple(lo)} to ${formatMultiple(hi)}`;
  return `Diagonal ${range} the assumed.`;
}

/** Whether the data determine a covariance, said plainly. */
export function identifiabilityWords(name: 'Q' | 'R', identifiable: boolean, reason: string): string {
  const why = reason.trim().replace(/\.$/, '');
  if (identifiable) return `The data determine ${name}.`;
  return `The data do not determine ${name}${why ? `: ${why}` : ''}. Other values of ${name} fit these residuals equally well, so the estimate shown is one of many; do not base a gain on it alone.`;
}

/** A complex number as "0.912 + 0.104j", or a real one alone. */
export function formatComplex(z: ComplexNumber): string {
  const im = Math.abs(z.im) < 1e-12 ? 0 : z.im;
  if (im === 0) return formatEntry(z.re);
  return `${formatEntry(z.re)} ${im < 0 ? MINUS : '+'} ${formatEntry(Math.abs(im))}j`;
}

export interface PoleRow {
  text: string;
  modulus: string;
  /** Inside the unit circle: the estimator's error decays. */
  stable: boolean;
}

/** Poles for a table: the value, its distance from the origin, and whether it lies inside the unit circle. */
export function poleRows(poles: readonly ComplexNumber[]): PoleRow[] {
  return poles.map((z) => {
    const r = Math.hypot(z.re, z.im);
    return { text: formatComplex(z), modulus: formatEntry(r), stable: r < 1 };
  });
}

/** The largest pole modulus (the slowest error decay), or null without poles. */
export function spectralRadius(poles: readonly ComplexNumber[]): number | null {
  return poles.length ? Math.max(...poles.map((z) => Math.hypot(z.re, z.im))) : null;
}

// ---------------------------------------------------------------------------
// Margins

export type MarginKind = 'gainUpper' | 'gainLower' | 'phase' | 'disk';

export const MARGIN_LABELS: Record<MarginKind, string> = {
  gainUpper: 'Gain margin, increase',
  gainLower: 'Gain margin, decrease',
  phase: 'Phase margin',
  disk: 'Disk margin',
};

export interface MarginFloors {
  gainDb: number;
  phaseDeg: number;
  diskAlpha: number;
}

/** The floors the warnings use: the request's, else the service's defaults (6 dB, 30°, α 0.4). */
export function marginFloors(request: Pick<StudyRequest, 'marginFloor'>): MarginFloors {
  return {
    gainDb: request.marginFloor?.gainDb ?? 6,
    phaseDeg: request.marginFloor?.phaseDeg ?? 30,
    diskAlpha: request.marginFloor?.diskAlpha ?? 0.4,
  };
}

export function marginValue(m: StudyMargins, kind: MarginKind): number | null {
  switch (kind) {
    case 'gainUpper':
      return m.gainMarginUpperDb;
    case 'gainLower':
      return m.gainMarginLowerDb;
    case 'phase':
      return m.phaseMarginDeg;
    case 'disk':
      return m.diskAlpha;
  }
}

/**
 * The gain and phase variations the disk of size α covers (balanced disk, skew 0):
 * gain factors (1 − α/2)/(1 + α/2) to (1 + α/2)/(1 − α/2), phase ±2·atan(α/2).
 * From α ≥ 2 the gain can grow without bound.
 */
export function diskVariations(alpha: number): { gainDb: number; phaseDeg: number } {
  const gainDb = alpha >= 2 ? Infinity : 20 * Math.log10((1 + alpha / 2) / (1 - alpha / 2));
  return { gainDb, phaseDeg: (2 * Math.atan(alpha / 2) * 180) / Math.PI };
}

function signed(x: number, digits: number): string {
  const text = Math.abs(x).toFixed(digits);
  return x < 0 ? `${MINUS}${text}` : `+${text}`;
}

/** One margin in words: its value with units; "unlimited" when nothing limits it; "not meaningful" when the loop is unstable. */
export function marginWords(kind: MarginKind, value: number | null, closedLoopStable: boolean): string {
  if (!closedLoopStable) return 'not meaningful (closed loop unstable)';
  if (value === null || !Number.isFinite(value)) return 'unlimited';
  switch (kind) {
    case 'gainUpper':
    case 'gainLower':
      return `${signed(value, 1)} dB`;
    case 'phase':
      return `${value.toFixed(1)}°`;
    case 'disk': {
      const v = diskVariations(value);
      const gain = Number.isFinite(v.gainDb) ? `±${v.gainDb.toFixed(1)} dB` : 'any increase';
      return `α = ${value.toFixed(2)} (gain ${gain}, phase ±${v.phaseDeg.toFixed(0)}°)`;
    }
  }
}

/** The floor of one margin in words. */
export function floorWords(kind: MarginKind, floors: MarginFloors): string {
  switch (kind) {
    case 'gainUpper':
      return `at least +${floors.gainDb} dB`;
    case 'gainLower':
      return `at most ${MINUS}${floors.gainDb} dB`;
    case 'phase':
      return `at least ${floors.phaseDeg}°`;
    case 'disk':
      return `α at least ${floors.diskAlpha}`;
  }
}

export type MarginStanding = 'meets' | 'below-floor' | 'not-meaningful';

/** Whether a margin meets its floor (an unlimited margin always does; an unstable loop has none). */
export function marginStanding(kind: MarginKind, value: number | null, closedLoopStable: boolean, floors: MarginFloors): MarginStanding {
  if (!closedLoopStable) return 'not-meaningful';
  if (value === null || !Number.isFinite(value)) return 'meets';
  switch (kind) {
    case 'gainUpper':
      return value >= floors.gainDb ? 'meets' : 'below-floor';
    case 'gainLower':
      return -value >= floors.gainDb ? 'meets' : 'below-floor';
    case 'phase':
      return value >= floors.phaseDeg ? 'meets' : 'below-floor';
    case 'disk':
      return value >= floors.diskAlpha ? 'meets' : 'below-floor';
  }
}
