/**
 * Validation of a design revision's model before it is stored, by form or by an
 * uploaded file: every problem is reported (never only the first), each with the path
 * of the part at fault ('A', 'Q', 'A.0.1', zero-based like a JSON path) and a sentence
 * that says what is wrong and what it must be.
 *
 * The model, with n states, m measured components, p process-noise inputs and r control inputs:
 *     x⁺ = A·x + B·u + G·w,  y = C·x + v,  w ~ N(0, Q),  v ~ N(0, R)
 *     x̂⁺ = A·x̂ + B·u + L·(y − C·x̂)   (the predictor gain L in use, optional)
 *     u = −K·x̂                        (the regulator gain K, optional; needs B)
 * Without G, the noise enters every state (G = I, p = n).
 *
 * Methods and sources: the structural tests of ./structure.ts — the orthogonal staircase
 * rank test (Van Dooren, IEEE TAC 26(1), 1981; Paige, IEEE TAC 26(1), 1981), the PBH
 * criterion for stabilizability and detectability (Hautus, Indag. Math. 32, 1970), and
 * definiteness by Sylvester's law of inertia after symmetric diagonal scaling (Golub &
 * Van Loan, "Matrix Computations", 4th ed., 2013, §8.1).
 *
 * Observability of (A, C): a pair that is not detectable (an unobservable mode with
 * |λ| ≥ 1) is a problem, since no gain keeps that mode's error bounded and the Riccati
 * equation has no stabilizing solution. A pair that is detectable but not observable (every
 * unobservable mode decays on its own, e.g. a stable unmeasured disturbance state) is a
 * warning, not a problem: a filter for it runs and converges, so refusing it would keep
 * sound designs out of the registry; but its noise cannot be estimated from innovations,
 * so the retune study refuses such a design, and the warning says so. The same split for
 * (A, B): not stabilizable is a problem, stabilizable but not controllable a warning.
 */
import {
  controllability,
  definiteness,
  detectability,
  eigenvalues,
  formatMode,
  observability,
  stabilizability,
  type Complex,
} from './structure';

/** A design revision's model, as stored (design_revisions.model). */
export interface DesignModel {
  A: number[][];
  C: number[][];
  G?: number[][];
  B?: number[][];
  Q: number[][];
  R: number[][];
  /** The predictor gain in use: x̂⁺ = A·x̂ + B·u + L·(y − C·x̂). */
  L?: number[][];
  /** The regulator gain used with it: u = −K·x̂. */
  K?: number[][];
  /** Sample period in seconds. */
  dt?: number;
}

/** One thing wrong with a model: where (a path into it) and why. */
export interface DesignProblem {
  /** 'A', 'Q', 'dt', or an entry 'A.0.1' (row 0, column 1); '' for the model as a whole. */
  path: string;
  message: string;
}

export type DesignValidation =
  | { ok: true; model: DesignModel; stateDim: number; measurementDim: number; inputDim: number | null; warnings: string[] }
  | { ok: false; problems: DesignProblem[]; warnings: string[] };

/** The largest design the registry takes (the database allows at most 16 measured components). */
export const DESIGN_LIMITS = { states: 16, measurements: 16, noiseInputs: 16, inputs: 16 } as const;

/** |qᵢⱼ − qⱼᵢ| ≤ this · maxᵢⱼ |qᵢⱼ| counts as symmetric: room for a matrix computed in floating point and written to ~10 digits. */
export const DESIGN_SYMMETRY_TOLERANCE = 1e-9;

/**
 * Shown wherever a design revision is made or released: the same words as the retune
 * study's caution (STUDY_CAUTION in ingest/src/workbench/study-service.ts).
 */
export const DESIGN_REVISION_CAUTION =
  "Advisory only: these estimates and the proposed gain must be validated in simulation and under your organisation's own safety process before they reach a machine; applicable codes and licensed engineering practice prevail.";

/** The dimensions of a design: states, measured components, noise inputs (columns of G), control inputs (columns of B). */
export type DesignDimension = 'n' | 'm' | 'p' | 'r';
export type DesignMatrixKey = 'A' | 'C' | 'G' | 'B' | 'Q' | 'R' | 'L' | 'K';

export interface DesignMatrixRule {
  key: DesignMatrixKey;
  required: boolean;
  rows: DesignDimension;
  columns: DesignDimension;
  /** What the matrix is, for labels. */
  meaning: string;
  /** Why it has the shape it has, for messages. */
  because: string;
}

/** The matrices of a design and the shape each must have, in the order they are checked. */
export const DESIGN_MATRICES: readonly DesignMatrixRule[] = [
  { key: 'A', required: true, rows: 'n', columns: 'n', meaning: 'state transition', because: 'one row and one column per state' },
  { key: 'C', required: true, rows: 'm', columns: 'n', meaning: 'measurement', because: 'one row per measured component, one column per state' },
  { key: 'G', required: false, rows: 'n', columns: 'p', meaning: 'process-noise input', because: 'one row per state, one column per noise input' },
  { key: 'B', required: false, rows: 'n', columns: 'r', meaning: 'control input', because: 'one row per state, one column per control input' },
  { key: 'Q', required: true, rows: 'p', columns: 'p', meaning: 'process-noise covariance', because: 'one row and column per noise input: the columns of G, or every state without G' },
  { key: 'R', required: true, rows: 'm', columns: 'm', meaning: 'measurement-noise covariance', because: 'one row and column per measured component' },
  { key: 'L', required: false, rows: 'n', columns: 'm', meaning: 'predictor gain in use', because: 'one row per state, one column per measured component' },
  { key: 'K', required: false, rows: 'r', columns: 'n', meaning: 'regulator gain', because: 'one row per control input, one column per state' },
];

const MODEL_KEYS = [...DESIGN_MATRICES.map((r) => r.key), 'dt'];

/** At most this many entry-level problems per matrix; the rest are counted in one more. */
const ENTRY_PROBLEMS_SHOWN = 3;

interface Grid {
  rows: number;
  columns: number;
  /** The entries, when the matrix is rectangular and every entry is a finite number. */
  values: number[][] | null;
}

function describe(v: unknown): string {
  if (v === null) return 'empty (null)';
  if (v === undefined) return 'missing';
  if (typeof v === 'number') return Number.isNaN(v) ? 'NaN' : String(v);
  if (typeof v === 'string') return v.trim() === '' ? 'empty' : `the text "${v.length > 24 ? `${v.slice(0, 24)}…` : v}"`;
  return Array.isArray(v) ? 'a list' : `a ${typeof v}`;
}

/** Reads a matrix as rows of finite numbers, adding a problem for each defect found (at most a few per matrix). */
function readGrid(name: string, value: unknown, problems: DesignProblem[]): Grid | null {
  if (!Array.isArray(value)) {
    problems.push({ path: name, message: `${name} must be a matrix: a list of rows, each a list of numbers (it is ${describe(value)})` });
    return null;
  }
  if (value.length === 0) {
    problems.push({ path: name, message: `${name} has no rows` });
    return null;
  }
  const widths = value.map((row: unknown) => (Array.isArray(row) ? row.length : -1));
  const columns = widths[0];
  const found: DesignProblem[] = [];
  let finite = true;
  value.forEach((row: unknown, i: number) => {
    if (!Array.isArray(row)) {
      found.push({ path: `${name}.${i}`, message: `${name} row ${i + 1} must be a list of numbers (it is ${describe(row)})` });
      return;
    }
    if (row.length === 0) {
      found.push({ path: `${name}.${i}`, message: `${name} row ${i + 1} is empty` });
      return;
    }
    if (columns > 0 && row.length !== columns) {
      found.push({ path: `${name}.${i}`, message: `${name} row ${i + 1} has ${row.length} entries, row 1 has ${columns}: every row must have as many` });
    }
    row.forEach((v: unknown, j: number) => {
      if (typeof v !== 'number' || !Number.isFinite(v)) {
        finite = false;
        found.push({ path: `${name}.${i}.${j}`, message: `${name} row ${i + 1}, column ${j + 1} must be a finite number, not ${describe(v)}` });
      }
    });
  });
  problems.push(...found.slice(0, ENTRY_PROBLEMS_SHOWN));
  if (found.length > ENTRY_PROBLEMS_SHOWN) {
    const more = found.length - ENTRY_PROBLEMS_SHOWN;
    problems.push({ path: name, message: `${more} more problem${more === 1 ? '' : 's'} like these in ${name}` });
  }
  const rectangular = columns > 0 && widths.every((w) => w === columns);
  if (!rectangular) return null;
  return { rows: value.length, columns, values: finite ? (value as number[][]) : null };
}

function shapeText(rows: number, columns: number): string {
  return `${rows} × ${columns}`;
}

/** The worst asymmetric pair of a square matrix, for the message. */
function worstPair(M: number[][]): { i: number; j: number } {
  let best = { i: 0, j: 1, d: -1 };
  for (let i = 0; i < M.length; i++) {
    for (let j = i + 1; j < M.length; j++) {
      const d = Math.abs(M[i][j] - M[j][i]);
      if (d > best.d) best = { i, j, d };
    }
  }
  return best;
}

function significant(x: number): string {
  return String(Number(x.toPrecision(4)));
}

function checkCovariance(name: 'Q' | 'R', M: number[][], positive: 'semidefinite' | 'definite', problems: DesignProblem[]): void {
  const d = definiteness(M, { symmetryTolerance: DESIGN_SYMMETRY_TOLERANCE }, name);
  if (!d.symmetric) {
    const { i, j } = worstPair(M);
    problems.push({
      path: name,
      message:
        `${name} must be symmetric (a covariance): row ${i + 1}, column ${j + 1} is ${M[i][j]} but row ${j + 1}, column ${i + 1} is ${M[j][i]}` +
        ` (largest difference ${d.asymmetry.toExponential(1)} of its largest entry; at most ${DESIGN_SYMMETRY_TOLERANCE.toExponential(0)} is taken as symmetric)`,
    });
  }
  const ok = positive === 'definite' ? d.positiveDefinite : d.positiveSemidefinite;
  if (!ok) {
    const why =
      positive === 'definite'
        ? 'every measured component needs some noise of its own, or the filter would trust it exactly'
        : 'a variance cannot be negative';
    problems.push({
      path: name,
      message: `${name} must be positive ${positive} (${why}): the smallest eigenvalue of ${d.symmetric ? name : `its symmetric part`} is ${significant(d.eigenvalues[0])}`,
    });
  }
}

function modeList(modes: readonly Complex[]): string {
  return modes.map((z) => formatMode(z)).join(', ');
}

function spectralRadius(M: number[][]): { rho: number; worst: Complex } {
  const eig = eigenvalues(M);
  return { rho: Math.hypot(eig[0].re, eig[0].im), worst: eig[0] };
}

function mul(X: number[][], Y: number[][]): number[][] {
  return X.map((row) => Y[0].map((_, j) => row.reduce((s, x, k) => s + x * Y[k][j], 0)));
}

function sub(X: number[][], Y: number[][]): number[][] {
  return X.map((row, i) => row.map((x, j) => x - Y[i][j]));
}

/**
 * Checks a design model given as parsed JSON (or built by a form): every problem, each with its
 * path; on success, the model with only its known parts and its dimensions, with warnings that
 * do not stop it being saved.
 */
export function validateDesignModel(input: unknown): DesignValidation {
  const problems: DesignProblem[] = [];
  const warnings: string[] = [];
  if (typeof input !== 'object' || input === null || Array.isArray(input)) {
    problems.push({ path: '', message: `The model must be an object with the matrices A, C, Q and R (and optionally G, B, L, K and dt); it is ${describe(input)}` });
    return { ok: false, problems, warnings };
  }
  const raw = input as Record<string, unknown>;
  for (const key of Object.keys(raw)) {
    if (!MODEL_KEYS.includes(key)) {
      problems.push({ path: key, message: `"${key}" is not part of a design model, which has ${MODEL_KEYS.join(', ')} (names are case-sensitive)` });
    }
  }

  // 1. Each matrix on its own: present when required, rectangular, finite entries.
  const grids = new Map<DesignMatrixKey, Grid | null>();
  for (const rule of DESIGN_MATRICES) {
    const value = raw[rule.key];
    if (value === undefined || value === null) {
      if (rule.required) problems.push({ path: rule.key, message: `${rule.key} (the ${rule.meaning} matrix) is required` });
      continue;
    }
    grids.set(rule.key, readGrid(rule.key, value, problems));
  }
  const given = (key: DesignMatrixKey) => grids.has(key);
  const grid = (key: DesignMatrixKey) => grids.get(key) ?? null;

  // 2. The dimensions, each from the matrix that defines it.
  const A = grid('A');
  let n: number | null = null;
  if (A) {
    if (A.rows !== A.columns) problems.push({ path: 'A', message: `A is ${shapeText(A.rows, A.columns)}; it must be square (one row and one column per state)` });
    else n = A.rows;
  }
  const m = grid('C')?.rows ?? null;
  const p = given('G') ? (grid('G')?.columns ?? null) : n;
  const r = given('B') ? (grid('B')?.columns ?? null) : null;
  const dims: Record<DesignDimension, number | null> = { n, m, p, r };
  const limits: [DesignDimension, number, string, DesignMatrixKey][] = [
    ['n', DESIGN_LIMITS.states, 'states', 'A'],
    ['m', DESIGN_LIMITS.measurements, 'measured components', 'C'],
    ['p', DESIGN_LIMITS.noiseInputs, 'noise inputs', 'G'],
    ['r', DESIGN_LIMITS.inputs, 'control inputs', 'B'],
  ];
  let withinLimits = true;
  for (const [dim, limit, words, key] of limits) {
    const v = dims[dim];
    if (v !== null && v > limit && !(dim === 'p' && !given('G'))) {
      withinLimits = false;
      problems.push({ path: key, message: `${key} gives ${v} ${words}; a design may have at most ${limit}` });
    }
  }
  if (n !== null && n > DESIGN_LIMITS.states) withinLimits = false;

  // 3. Each matrix's shape against the dimensions.
  const shaped = new Map<DesignMatrixKey, number[][]>();
  for (const rule of DESIGN_MATRICES) {
    const g = grid(rule.key);
    if (!g) continue;
    const rows = dims[rule.rows];
    const columns = dims[rule.columns];
    let fits = true;
    if (rule.key !== 'A') {
      const rowsWrong = rows !== null && g.rows !== rows;
      const columnsWrong = columns !== null && g.columns !== columns;
      if (rowsWrong || columnsWrong) {
        fits = false;
        const want = `${rows ?? '?'} × ${columns ?? '?'}`;
        problems.push({ path: rule.key, message: `${rule.key} is ${shapeText(g.rows, g.columns)}; it must be ${want} (${rule.because})` });
      }
      if (rows === null || columns === null) fits = false;
    } else {
      fits = n !== null;
    }
    if (fits && g.values) shaped.set(rule.key, g.values);
  }
  if (given('K') && !given('B')) {
    problems.push({ path: 'K', message: 'K is a regulator gain (u = −K·x̂): it needs B, the matrix through which u acts on the state' });
  }
  let dt: number | undefined;
  if (raw.dt !== undefined && raw.dt !== null) {
    if (typeof raw.dt !== 'number' || !Number.isFinite(raw.dt) || raw.dt <= 0) {
      problems.push({ path: 'dt', message: `dt (the sample period, in seconds) must be a number greater than 0, not ${describe(raw.dt)}` });
    } else {
      dt = raw.dt;
    }
  }

  // 4. What the numbers mean: covariances, and the structure of (A, C) and (A, B).
  const Qv = shaped.get('Q');
  if (Qv) checkCovariance('Q', Qv, 'semidefinite', problems);
  const Rv = shaped.get('R');
  if (Rv) checkCovariance('R', Rv, 'definite', problems);
  const Av = shaped.get('A');
  const Cv = shaped.get('C');
  const Bv = shaped.get('B');
  if (withinLimits && Av && Cv) {
    const obs = observability(Av, Cv);
    if (!obs.observable) {
      const det = detectability(Av, Cv);
      const seen = `the observable part has dimension ${obs.rank} of ${obs.states} states`;
      if (!det.detectable) {
        const bad = det.unstableUnobservableModes;
        problems.push({
          path: 'C',
          message:
            `(A, C) is not observable, nor even detectable: the measurements never see the mode${bad.length === 1 ? '' : 's'} ${modeList(bad)}, ` +
            `which do${bad.length === 1 ? 'es' : ''} not decay (|λ| ≥ 1), so no filter gain keeps ${bad.length === 1 ? 'its' : 'their'} error bounded (${seen}). ` +
            'Measure more components (rows of C) or leave out the states the measurements cannot see.',
        });
      } else {
        warnings.push(
          `(A, C) is detectable but not observable: the measurements never see the mode${obs.unobservableModes.length === 1 ? '' : 's'} ${modeList(obs.unobservableModes)}, ` +
            `which decay${obs.unobservableModes.length === 1 ? 's' : ''} on ${obs.unobservableModes.length === 1 ? 'its' : 'their'} own (${seen}). ` +
            'A filter runs, but a retune study cannot estimate the noise driving those modes from field residuals and will refuse this design.',
        );
      }
    }
  }
  if (withinLimits && Av && Bv) {
    const stab = stabilizability(Av, Bv);
    if (!stab.stabilizable) {
      const bad = stab.unstableUncontrollableModes;
      problems.push({
        path: 'B',
        message:
          `(A, B) is not stabilizable: the inputs cannot move the mode${bad.length === 1 ? '' : 's'} ${modeList(bad)}, ` +
          `which do${bad.length === 1 ? 'es' : ''} not decay (|λ| ≥ 1), so no regulator gain can steady ${bad.length === 1 ? 'it' : 'them'}.`,
      });
    } else {
      const ctrl = controllability(Av, Bv);
      if (!ctrl.controllable) {
        warnings.push(
          `(A, B) is stabilizable but not controllable: the inputs cannot move the mode${ctrl.uncontrollableModes.length === 1 ? '' : 's'} ` +
            `${modeList(ctrl.uncontrollableModes)}, which decay${ctrl.uncontrollableModes.length === 1 ? 's' : ''} on ${ctrl.uncontrollableModes.length === 1 ? 'its' : 'their'} own ` +
            `(the controllable part has dimension ${ctrl.rank} of ${ctrl.states} states).`,
        );
      }
    }
  }
  // The gains stored with the design, as warnings: a draft may hold a gain still being worked on.
  const Lv = shaped.get('L');
  if (withinLimits && Av && Cv && Lv) {
    const { rho, worst } = spectralRadius(sub(Av, mul(Lv, Cv)));
    if (rho >= 1) {
      warnings.push(`The predictor gain L does not make the filter converge: A − L·C has the pole ${formatMode(worst)} (|λ| = ${significant(rho)} ≥ 1).`);
    }
  }
  const Kv = shaped.get('K');
  if (withinLimits && Av && Bv && Kv) {
    const { rho, worst } = spectralRadius(sub(Av, mul(Bv, Kv)));
    if (rho >= 1) {
      warnings.push(`The regulator gain K does not stabilize the loop: A − B·K has the pole ${formatMode(worst)} (|λ| = ${significant(rho)} ≥ 1).`);
    }
  }

  if (problems.length > 0 || n === null || m === null) {
    return { ok: false, problems, warnings };
  }
  const model: DesignModel = { A: Av!, C: Cv!, Q: Qv!, R: Rv! };
  for (const key of ['G', 'B', 'L', 'K'] as const) {
    const v = shaped.get(key);
    if (v) model[key] = v;
  }
  if (dt !== undefined) model.dt = dt;
  return { ok: true, model, stateDim: n, measurementDim: m, inputDim: r, warnings };
}
