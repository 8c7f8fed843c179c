/**
 * Structure of a discrete-time linear model x⁺ = A·x + B·u, y = C·x: input
 * validation, eigenvalues, definiteness, controllability and observability,
 * stabilizability and detectability, and the separation-principle check of a
 * plant with a predictor-form estimator and a state-feedback regulator.
 *
 * Methods and sources:
 * - Rank test: the orthogonal staircase (controllability Hessenberg) form,
 *   Van Dooren, "The generalized eigenstructure problem in linear system
 *   theory", IEEE TAC 26(1), 1981, and Paige, "Properties of numerical
 *   algorithms related to computing controllability", IEEE TAC 26(1), 1981.
 *   Orthogonal similarities Tᵀ·A·T, Tᵀ·B split the state into a controllable
 *   part of dimension r and an uncontrollable part A_uc:
 *       Tᵀ A T = [A_c  *  ; 0  A_uc],   Tᵀ B = [B_c ; 0],
 *   each step deciding the rank of one block by its SVD against a relative
 *   tolerance. Why not the alternatives: the SVD of the controllability matrix
 *   [B, AB, …, Aⁿ⁻¹B] mixes powers of A whose sizes differ by orders of
 *   magnitude, so its rank decision fails on modest examples (Paige 1981); the
 *   PBH test rank [A − λI, B] = n per eigenvalue λ of A is exact in theory but
 *   uses the computed λ, which for a defective eigenvalue (the Jordan block at 1
 *   of every constant-velocity tracker) is only accurate to about √eps, enough
 *   to make an uncontrollable mode look controllable. The staircase uses
 *   orthogonal transformations only (backward stable), needs no eigenvalues,
 *   and gives the uncontrollable modes as eig(A_uc).
 * - Stabilizability (detectability): every uncontrollable (unobservable) mode,
 *   i.e. every eigenvalue of A_uc, has |λ| < 1; the modes with |λ| ≥ 1 are
 *   reported with their PBH margin σ_min([A − λI, B]) as evidence
 *   (Hautus, "Stabilization, controllability and observability of linear
 *   autonomous systems", Indag. Math. 32, 1970). Observability and detectability
 *   are the duals: (A, C) is observable iff (Aᵀ, Cᵀ) is controllable.
 * - Definiteness: eigenvalues of the symmetric part (M + Mᵀ)/2 after symmetric
 *   diagonal scaling D⁻¹·M·D⁻¹, D = diag(√|mᵢᵢ|), a congruence that keeps the
 *   inertia (Sylvester's law) and makes the test independent of units
 *   (Golub & Van Loan, "Matrix Computations", 4th ed., 2013, §8.1).
 * - Separation principle: the plant x⁺ = A·x − B·K·x̂ with the predictor
 *   x̂⁺ = A·x̂ − B·K·x̂ + L·(C·x − C·x̂) has the closed-loop matrix
 *   [[A, −BK], [LC, A − BK − LC]], similar (e = x − x̂) to
 *   [[A − BK, BK], [0, A − LC]], so its poles are eig(A − BK) ∪ eig(A − LC)
 *   (Anderson & Moore, "Optimal Control: Linear Quadratic Methods", 1990, §8.2;
 *   Franklin, Powell & Workman, "Digital Control of Dynamic Systems", 3rd ed.,
 *   1998, §8.5). The check computes both sides and pairs them by a bottleneck
 *   assignment (the pairing that minimises the largest distance). How closely
 *   they can agree in floating point is judged by the Bauer–Fike theorem
 *   (Bauer & Fike, Numer. Math. 2, 1960; Golub & Van Loan §7.2.2): a backward
 *   stable eigensolver returns the eigenvalues of M + E with ‖E‖ ≈ eps·‖M‖, which
 *   lie within κ(V)·‖E‖ of those of M (V the eigenvector matrix). Nearly
 *   defective loops (deadbeat designs, modes barely reached or seen) have a
 *   huge κ(V): their combined poles cannot be computed to the tolerance at all,
 *   and the check says so ('ill-conditioned') rather than call it a failure.
 *
 * Matrices come in and go out as number[][] (row-major).
 */
import { EigenvalueDecomposition, Matrix, SingularValueDecomposition } from 'ml-matrix';

/** Stable machine codes of the ways a design computation can be refused. */
export type DesignErrorCode =
  | 'dimension'
  | 'not-finite'
  | 'not-symmetric'
  | 'not-psd'
  | 'no-stabilizing-solution'
  | 'did-not-converge';

/** A design computation was refused: `code` is stable, `message` says which matrix and why. */
export class DesignError extends Error {
  override readonly name = 'DesignError';
  constructor(
    readonly code: DesignErrorCode,
    message: string,
    /** The matrix at fault, when one is ('A', 'B', 'Q', …). */
    readonly matrix?: string,
  ) {
    super(message);
  }
}

/** A matrix as plain rows. */
export type MatrixInput = readonly (readonly number[])[];

/** A complex number, for eigenvalues. */
export interface Complex {
  re: number;
  im: number;
}

/** Tolerances of the structural tests. */
export interface StructureOptions {
  /**
   * Relative rank tolerance of the staircase: a singular value counts as zero
   * when it is at most this times the norm of its matrix (A and B are scaled to
   * unit Frobenius norm first). Default 1e-10.
   */
  rankTolerance?: number;
  /**
   * A mode counts as on or outside the unit circle when |λ| ≥ 1 − unitCircleMargin
   * (defective eigenvalues are computed only to about √eps·‖A‖). Default 1e-6.
   */
  unitCircleMargin?: number;
}

export const DEFAULT_RANK_TOLERANCE = 1e-10;
export const DEFAULT_UNIT_CIRCLE_MARGIN = 1e-6;

// ---------------------------------------------------------------------------
// Validation at the boundary

/** What the shape of a matrix must be, with the reason given in messages. */
export interface ShapeRule {
  rows?: number;
  rowsBecause?: string;
  columns?: number;
  columnsBecause?: string;
}

/**
 * Reads `value` as a finite real matrix named `name`, checking its shape.
 * Throws DesignError 'dimension' (not a non-empty rectangular array, or the
 * wrong number of rows or columns) or 'not-finite'.
 */
export function readMatrix(name: string, value: unknown, rule: ShapeRule = {}): Matrix {
  if (!Array.isArray(value) || value.length === 0) {
    throw new DesignError('dimension', `${name} must be a non-empty array of rows`, name);
  }
  const rows = value.length;
  const first: unknown = value[0];
  if (!Array.isArray(first) || first.length === 0) {
    throw new DesignError('dimension', `${name} row 1 must be a non-empty array of numbers`, name);
  }
  const columns = first.length;
  value.forEach((row: unknown, i: number) => {
    if (!Array.isArray(row)) {
      throw new DesignError('dimension', `${name} row ${i + 1} is not an array`, name);
    }
    if (row.length !== columns) {
      throw new DesignError('dimension', `${name} row ${i + 1} has ${row.length} columns, row 1 has ${columns}`, name);
    }
    row.forEach((v: unknown, j: number) => {
      if (typeof v !== 'number' || !Number.isFinite(v)) {
        throw new DesignError('not-finite', `${name}[${i + 1}][${j + 1}] is ${String(v)}, not a finite number`, name);
      }
    });
  });
  if (rule.rows !== undefined && rows !== rule.rows) {
    const why = rule.rowsBecause ? ` (${rule.rowsBecause})` : '';
    throw new DesignError('dimension', `${name} has ${rows} rows, it must have ${rule.rows}${why}`, name);
  }
  if (rule.columns !== undefined && columns !== rule.columns) {
    const why = rule.columnsBecause ? ` (${rule.columnsBecause})` : '';
    throw new DesignError('dimension', `${name} has ${columns} columns, it must have ${rule.columns}${why}`, name);
  }
  return new Matrix(value as number[][]);
}

/** Reads a square matrix (rows = columns, or = n when given). */
export function readSquare(name: string, value: unknown, n?: number, because?: string): Matrix {
  const M = readMatrix(name, value, n === undefined ? {} : { rows: n, rowsBecause: because, columns: n, columnsBecause: because });
  if (M.rows !== M.columns) {
    throw new DesignError('dimension', `${name} is ${M.rows}×${M.columns}, it must be square`, name);
  }
  return M;
}

// ---------------------------------------------------------------------------
// Eigenvalues

/**
 * Sort order of eigenvalue lists: decreasing modulus (the slowest pole first),
 * then decreasing real part, then decreasing imaginary part.
 */
export function compareEigenvalues(a: Complex, b: Complex): number {
  return Math.hypot(b.re, b.im) - Math.hypot(a.re, a.im) || b.re - a.re || b.im - a.im;
}

/** Eigenvalues of a square real matrix (Hessenberg QR, ml-matrix), sorted by {@link compareEigenvalues}. */
export function eigenvaluesOf(M: Matrix): Complex[] {
  if (M.rows === 0) return [];
  const evd = new EigenvalueDecomposition(M);
  const re = evd.realEigenvalues;
  const im = evd.imaginaryEigenvalues;
  return re.map((r, i) => ({ re: r, im: im[i] })).sort(compareEigenvalues);
}

/** Eigenvalues of a square matrix given as rows, sorted by decreasing modulus. */
export function eigenvalues(M: MatrixInput, name = 'M'): Complex[] {
  return eigenvaluesOf(readSquare(name, M));
}

/** max |λᵢ| of a square matrix. */
export function spectralRadius(M: Matrix): number {
  return eigenvaluesOf(M).reduce((rho, z) => Math.max(rho, Math.hypot(z.re, z.im)), 0);
}

// ---------------------------------------------------------------------------
// Symmetry and definiteness

export interface DefinitenessOptions {
  /** |mᵢⱼ − mⱼᵢ| ≤ symmetryTolerance · maxᵢⱼ |mᵢⱼ|. Default 1e-10. */
  symmetryTolerance?: number;
  /** Eigenvalue threshold on the diagonally scaled symmetric part (unit diagonal). Default 1e-12. */
  definitenessTolerance?: number;
}

export const DEFAULT_SYMMETRY_TOLERANCE = 1e-10;
export const DEFAULT_DEFINITENESS_TOLERANCE = 1e-12;

export interface Definiteness {
  /** max |mᵢⱼ − mⱼᵢ| relative to max |mᵢⱼ|. */
  asymmetry: number;
  symmetric: boolean;
  /** Eigenvalues of the symmetric part (M + Mᵀ)/2, increasing. */
  eigenvalues: number[];
  /** Smallest eigenvalue of D⁻¹·((M + Mᵀ)/2)·D⁻¹, D = diag(√|mᵢᵢ|) (1 where mᵢᵢ = 0). */
  scaledMinEigenvalue: number;
  /** scaledMinEigenvalue ≥ −tolerance. */
  positiveSemidefinite: boolean;
  /** scaledMinEigenvalue > tolerance. */
  positiveDefinite: boolean;
}

/** Symmetric part (M + Mᵀ)/2. */
export function symmetricPart(M: Matrix): Matrix {
  return Matrix.add(M, M.transpose()).mul(0.5);
}

function definitenessOf(M: Matrix, opts: DefinitenessOptions = {}): Definiteness {
  const symmetryTolerance = opts.symmetryTolerance ?? DEFAULT_SYMMETRY_TOLERANCE;
  const tolerance = opts.definitenessTolerance ?? DEFAULT_DEFINITENESS_TOLERANCE;
  const n = M.rows;
  const largest = M.norm('max');
  let asymmetry = 0;
  for (let i = 0; i < n; i++) {
    for (let j = i + 1; j < n; j++) asymmetry = Math.max(asymmetry, Math.abs(M.get(i, j) - M.get(j, i)));
  }
  asymmetry = largest > 0 ? asymmetry / largest : 0;
  const Ms = symmetricPart(M);
  const eig = new EigenvalueDecomposition(Ms, { assumeSymmetric: true }).realEigenvalues.slice().sort((a, b) => a - b);
  // D⁻¹ Ms D⁻¹ with D = diag(√|mᵢᵢ|): a congruence, same inertia, unit diagonal where mᵢᵢ ≠ 0.
  const d = Array.from({ length: n }, (_, i) => Math.sqrt(Math.abs(Ms.get(i, i))) || 1);
  const scaled = new Matrix(n, n);
  for (let i = 0; i < n; i++) {
    for (let j = 0; j < n; j++) scaled.set(i, j, Ms.get(i, j) / (d[i] * d[j]));
  }
  const scaledEig = new EigenvalueDecomposition(scaled, { assumeSymmetric: true }).realEigenvalues;
  const scaledMinEigenvalue = Math.min(...scaledEig);
  return {
    asymmetry,
    symmetric: asymmetry <= symmetryTolerance,
    eigenvalues: eig,
    scaledMinEigenvalue,
    positiveSemidefinite: scaledMinEigenvalue >= -tolerance,
    positiveDefinite: scaledMinEigenvalue > tolerance,
  };
}

/** Symmetry and positive (semi)definiteness of a square matrix, with tolerances. */
export function definiteness(M: MatrixInput, opts: DefinitenessOptions = {}, name = 'M'): Definiteness {
  return definitenessOf(readSquare(name, M), opts);
}

/**
 * Requires `M` symmetric and positive semidefinite (or definite), throwing
 * 'not-symmetric' or 'not-psd' naming the matrix; returns the symmetric part.
 */
export function requireCovariance(name: string, M: Matrix, positive: 'semidefinite' | 'definite', opts: DefinitenessOptions = {}): Matrix {
  const d = definitenessOf(M, opts);
  if (!d.symmetric) {
    throw new DesignError(
      'not-symmetric',
      `${name} is not symmetric: max |${name}ᵢⱼ − ${name}ⱼᵢ| is ${d.asymmetry.toExponential(2)} of its largest entry`,
      name,
    );
  }
  const ok = positive === 'definite' ? d.positiveDefinite : d.positiveSemidefinite;
  if (!ok) {
    throw new DesignError(
      'not-psd',
      `${name} must be positive ${positive}: the smallest eigenvalue of ${name} is ${d.eigenvalues[0].toPrecision(4)}` +
        ` (${d.scaledMinEigenvalue.toPrecision(4)} after scaling to unit diagonal)`,
      name,
    );
  }
  return symmetricPart(M);
}

/** A factor F with FᵀF = M for a symmetric positive semidefinite M (F = Λ₊^½·Vᵀ). */
export function psdFactor(M: Matrix): Matrix {
  const evd = new EigenvalueDecomposition(symmetricPart(M), { assumeSymmetric: true });
  const V = evd.eigenvectorMatrix;
  const lambda = evd.realEigenvalues;
  const F = V.transpose();
  for (let i = 0; i < lambda.length; i++) {
    const s = Math.sqrt(Math.max(lambda[i], 0));
    for (let j = 0; j < F.columns; j++) F.set(i, j, F.get(i, j) * s);
  }
  return F;
}

// ---------------------------------------------------------------------------
// Controllability and observability: the staircase form

/** A mode (eigenvalue) that the input cannot move or the output cannot see. */
export interface Mode extends Complex {
  modulus: number;
  /** PBH margin σ_min([A − λI, B]) (or of [A − λI; C]) with A, B (C) scaled to unit Frobenius norm; ≈ 0 for such a mode. */
  pbh: number;
}

export interface ControllabilityReport {
  controllable: boolean;
  /** Dimension of the controllable subspace (numerical rank of the controllability matrix). */
  rank: number;
  states: number;
  /** eig(A_uc): the uncontrollable modes, sorted by decreasing modulus. */
  uncontrollableModes: Mode[];
}

export interface ObservabilityReport {
  observable: boolean;
  /** Dimension of the observable subspace (numerical rank of the observability matrix). */
  rank: number;
  states: number;
  /** The unobservable modes, sorted by decreasing modulus. */
  unobservableModes: Mode[];
}

export interface StabilizabilityReport {
  stabilizable: boolean;
  /** The uncontrollable modes with |λ| ≥ 1 − unitCircleMargin: they make the pair not stabilizable. */
  unstableUncontrollableModes: Mode[];
}

export interface DetectabilityReport {
  detectable: boolean;
  /** The unobservable modes with |λ| ≥ 1 − unitCircleMargin: they make the pair not detectable. */
  unstableUnobservableModes: Mode[];
}

/** Left singular vectors (a full square orthogonal U) and singular values of M. */
function leftSvd(M: Matrix): { U: Matrix; sigma: number[] } {
  // Pad a tall block with zero columns: the same singular values (and zeros), and a full U.
  const square = M.columns < M.rows ? new Matrix(M.rows, M.rows).setSubMatrix(M, 0, 0) : M;
  const svd = new SingularValueDecomposition(square, { computeRightSingularVectors: false, autoTranspose: true });
  return { U: svd.leftSingularVectors, sigma: svd.diagonal };
}

function unitNorm(M: Matrix): { M: Matrix; norm: number } {
  const norm = M.norm('frobenius');
  return { M: norm > 0 ? M.clone().div(norm) : M.clone(), norm };
}

/**
 * σ_min([A − λI, B]) for complex λ through the real embedding
 * [[Re, −Im], [Im, Re]], whose singular values are those of the complex matrix, each twice.
 */
function pbhMarginOf(A: Matrix, B: Matrix, lambda: Complex): number {
  const n = A.rows;
  const m = B.columns;
  // Work on the transpose [A − λI, B]ᵀ, (n + m)×n, so the SVD is of a tall matrix.
  const Mt = new Matrix(2 * (n + m), 2 * n);
  for (let i = 0; i < n; i++) {
    for (let j = 0; j < n; j++) {
      // (A − λI)ᵀ = X + iY with X = Aᵀ − Re λ·I, Y = −Im λ·I; embedded as [[X, −Y], [Y, X]].
      const re = A.get(j, i) - (i === j ? lambda.re : 0);
      const im = i === j ? -lambda.im : 0;
      Mt.set(i, j, re);
      Mt.set(i, n + j, -im);
      Mt.set(n + m + i, j, im);
      Mt.set(n + m + i, n + j, re);
    }
    for (let k = 0; k < m; k++) {
      Mt.set(n + k, i, B.get(i, k));
      Mt.set(2 * n + m + k, n + i, B.get(i, k));
    }
  }
  const sigma = new SingularValueDecomposition(Mt, { computeLeftSingularVectors: false, computeRightSingularVectors: false }).diagonal;
  return Math.min(...sigma);
}

/** PBH margin σ_min([A − λI, B]) with A and B scaled to unit Frobenius norm (λ scaled with A). */
export function pbhMargin(A: MatrixInput, B: MatrixInput, lambda: Complex): number {
  const Am = readSquare('A', A);
  const Bm = readMatrix('B', B, { rows: Am.rows, rowsBecause: 'one per state of A' });
  const a = unitNorm(Am);
  const b = unitNorm(Bm);
  const s = a.norm > 0 ? a.norm : 1;
  return pbhMarginOf(a.M, b.M, { re: lambda.re / s, im: lambda.im / s });
}

/**
 * The staircase reduction of (A, B): the dimension r of the controllable
 * subspace and the uncontrollable block A_uc (in the units of A).
 */
function staircase(A: Matrix, B: Matrix, rankTolerance: number): { rank: number; Auc: Matrix; An: Matrix; Bn: Matrix; scale: number } {
  const n = A.rows;
  const { M: An, norm: scale } = unitNorm(A);
  const { M: Bn } = unitNorm(B);
  const At = An.clone(); // becomes Tᵀ·A·T, step by step
  let r = 0; // controllable states found so far
  let previous = 0; // first column of the block that feeds the remaining states
  for (let step = 0; r < n; step++) {
    // The block coupling what is already reached into the rest: B itself, then A₍rest, last block₎.
    const block = step === 0 ? Bn : At.subMatrix(r, n - 1, previous, r - 1);
    const { U, sigma } = leftSvd(block);
    const gained = sigma.filter((s) => s > rankTolerance).length;
    if (gained === 0) break;
    // T = diag(I_r, U): rows r.. ← Uᵀ·rows, columns r.. ← columns·U
    const rowsBelow = At.subMatrix(r, n - 1, 0, n - 1);
    At.setSubMatrix(U.transpose().mmul(rowsBelow), r, 0);
    const columnsRight = At.subMatrix(0, n - 1, r, n - 1);
    At.setSubMatrix(columnsRight.mmul(U), 0, r);
    previous = r;
    r += gained;
  }
  const Auc = r < n ? At.subMatrix(r, n - 1, r, n - 1).mul(scale > 0 ? scale : 1) : new Matrix(0, 0);
  return { rank: Math.min(r, n), Auc, An, Bn, scale };
}

function modesOf(Auc: Matrix, An: Matrix, Bn: Matrix, scale: number): Mode[] {
  const s = scale > 0 ? scale : 1;
  return eigenvaluesOf(Auc).map((z) => ({
    re: z.re,
    im: z.im,
    modulus: Math.hypot(z.re, z.im),
    pbh: pbhMarginOf(An, Bn, { re: z.re / s, im: z.im / s }),
  }));
}

function controllabilityOf(A: Matrix, B: Matrix, opts: StructureOptions): ControllabilityReport {
  const { rank, Auc, An, Bn, scale } = staircase(A, B, opts.rankTolerance ?? DEFAULT_RANK_TOLERANCE);
  return { controllable: rank === A.rows, rank, states: A.rows, uncontrollableModes: modesOf(Auc, An, Bn, scale) };
}

function observabilityOf(A: Matrix, C: Matrix, opts: StructureOptions): ObservabilityReport {
  const dual = controllabilityOf(A.transpose(), C.transpose(), opts);
  return { observable: dual.controllable, rank: dual.rank, states: dual.states, unobservableModes: dual.uncontrollableModes };
}

function outsideUnitDisc(mode: Mode, opts: StructureOptions): boolean {
  return mode.modulus >= 1 - (opts.unitCircleMargin ?? DEFAULT_UNIT_CIRCLE_MARGIN);
}

/** Internal (Matrix) forms, for the Riccati solver and the gains. */
export const structureOf = {
  controllability: controllabilityOf,
  observability: observabilityOf,
  outsideUnitDisc,
  onUnitCircle(mode: Mode, opts: StructureOptions): boolean {
    return Math.abs(mode.modulus - 1) <= (opts.unitCircleMargin ?? DEFAULT_UNIT_CIRCLE_MARGIN);
  },
};

function readPair(A: MatrixInput, B: MatrixInput, bName: 'B' | 'C'): { Am: Matrix; Bm: Matrix } {
  const Am = readSquare('A', A);
  const Bm =
    bName === 'B'
      ? readMatrix('B', B, { rows: Am.rows, rowsBecause: 'one per state of A' })
      : readMatrix('C', B, { columns: Am.rows, columnsBecause: 'one per state of A' });
  return { Am, Bm };
}

/** Controllability of (A, B) by the staircase form: rank of the controllable subspace and the uncontrollable modes. */
export function controllability(A: MatrixInput, B: MatrixInput, opts: StructureOptions = {}): ControllabilityReport {
  const { Am, Bm } = readPair(A, B, 'B');
  return controllabilityOf(Am, Bm, opts);
}

/** Observability of (A, C), the dual of controllability of (Aᵀ, Cᵀ). */
export function observability(A: MatrixInput, C: MatrixInput, opts: StructureOptions = {}): ObservabilityReport {
  const { Am, Bm } = readPair(A, C, 'C');
  return observabilityOf(Am, Bm, opts);
}

/** (A, B) is stabilizable iff every uncontrollable mode has |λ| < 1 (PBH: rank [A − λI, B] = n for |λ| ≥ 1). */
export function stabilizability(A: MatrixInput, B: MatrixInput, opts: StructureOptions = {}): StabilizabilityReport {
  const report = controllability(A, B, opts);
  const bad = report.uncontrollableModes.filter((m) => outsideUnitDisc(m, opts));
  return { stabilizable: bad.length === 0, unstableUncontrollableModes: bad };
}

/** (A, C) is detectable iff every unobservable mode has |λ| < 1 (PBH: rank [A − λI; C] = n for |λ| ≥ 1). */
export function detectability(A: MatrixInput, C: MatrixInput, opts: StructureOptions = {}): DetectabilityReport {
  const report = observability(A, C, opts);
  const bad = report.unobservableModes.filter((m) => outsideUnitDisc(m, opts));
  return { detectable: bad.length === 0, unstableUnobservableModes: bad };
}

/** "λ = 1", "λ = 0.9 ± 0.4i" for messages. */
export function formatMode(z: Complex): string {
  const re = Number(z.re.toPrecision(6));
  if (z.im === 0) return `λ = ${re}`;
  return `λ = ${re} ${z.im < 0 ? '−' : '+'} ${Number(Math.abs(z.im).toPrecision(6))}i`;
}

// ---------------------------------------------------------------------------
// Matching two spectra, and the separation check

export interface SpectrumMatching {
  /** max over pairs |aᵢ − b_π(i)|, minimised over the pairings π (bottleneck assignment). */
  largestMismatch: number;
  /** pairs[i] = index into b of the partner of a[i]. */
  pairs: number[];
}

/**
 * Pairs two lists of eigenvalues so that the largest distance is smallest
 * (bottleneck assignment: bisection on the sorted distances, a perfect matching
 * by augmenting paths at each threshold; Kuhn 1955).
 */
export function matchSpectra(a: readonly Complex[], b: readonly Complex[]): SpectrumMatching {
  const N = a.length;
  if (b.length !== N) {
    throw new DesignError('dimension', `cannot match ${N} eigenvalues with ${b.length}`);
  }
  if (N === 0) return { largestMismatch: 0, pairs: [] };
  const d = a.map((x) => b.map((y) => Math.hypot(x.re - y.re, x.im - y.im)));
  const thresholds = Array.from(new Set(d.flat())).sort((x, y) => x - y);
  const perfect = (t: number): number[] | null => {
    const partnerOfB = new Array<number>(N).fill(-1);
    const augment = (i: number, seen: boolean[]): boolean => {
      for (let j = 0; j < N; j++) {
        if (d[i][j] > t || seen[j]) continue;
        seen[j] = true;
        if (partnerOfB[j] < 0 || augment(partnerOfB[j], seen)) {
          partnerOfB[j] = i;
          return true;
        }
      }
      return false;
    };
    for (let i = 0; i < N; i++) if (!augment(i, new Array<boolean>(N).fill(false))) return null;
    const pairs = new Array<number>(N);
    partnerOfB.forEach((i, j) => (pairs[i] = j));
    return pairs;
  };
  let lo = 0;
  let hi = thresholds.length - 1; // a perfect matching always exists at the largest distance
  while (lo < hi) {
    const mid = (lo + hi) >> 1;
    if (perfect(thresholds[mid])) hi = mid;
    else lo = mid + 1;
  }
  return { largestMismatch: thresholds[lo], pairs: perfect(thresholds[lo])! };
}

export interface SeparationOptions {
  /** 'agree' when largestMismatch ≤ tolerance · max(1, max |λ|). Default 1e-8. */
  tolerance?: number;
}

/**
 * 'agree': the combined poles equal the union to the tolerance; 'ill-conditioned':
 * they do not, but roundoff explains the gap (the combined poles cannot be
 * computed that accurately; trust the union); 'disagree': a gap roundoff does
 * not explain (gains from another model, or a loop that is not this one).
 */
export type SeparationVerdict = 'agree' | 'ill-conditioned' | 'disagree';

export interface SeparationReport {
  /** [[A, −BK], [LC, A − BK − LC]], 2n×2n. */
  combined: number[][];
  /** eig of the combined matrix. */
  combinedPoles: Complex[];
  /** eig(A − BK). */
  regulatorPoles: Complex[];
  /** eig(A − LC). */
  estimatorPoles: Complex[];
  /** Largest distance between a combined pole and its partner in eig(A − BK) ∪ eig(A − LC), optimally paired. */
  largestMismatch: number;
  /** largestMismatch / max(1, max |λ|). */
  relativeMismatch: number;
  /**
   * Bauer–Fike estimate of the eigenvalue roundoff on both sides:
   * eps·(κ(V_comb)·‖M‖_F + max(κ(V_BK)·‖A − BK‖_F, κ(V_LC)·‖A − LC‖_F)), κ of the
   * eigenvector matrix with unit columns. Infinity for a defective matrix.
   */
  roundoffEstimate: number;
  verdict: SeparationVerdict;
  /** verdict === 'agree'. */
  agree: boolean;
}

/** κ₂ of the eigenvector matrix with unit-norm (complex) columns: the Bauer–Fike factor. */
function eigenvectorCondition(M: Matrix): number {
  const evd = new EigenvalueDecomposition(M);
  const V = evd.eigenvectorMatrix.clone();
  const im = evd.imaginaryEigenvalues;
  const n = V.columns;
  // A complex pair λ, λ̄ is stored as the columns u, w of u ± i·w; scale both by 1/‖u + i·w‖.
  for (let j = 0; j < n; j++) {
    const pair = im[j] !== 0 && j + 1 < n && im[j + 1] === -im[j];
    const columns = pair ? [j, j + 1] : [j];
    let sq = 0;
    for (const c of columns) for (let i = 0; i < n; i++) sq += V.get(i, c) ** 2;
    const norm = Math.sqrt(sq);
    if (norm === 0) return Infinity;
    for (const c of columns) for (let i = 0; i < n; i++) V.set(i, c, V.get(i, c) / norm);
    if (pair) j++;
  }
  const sigma = new SingularValueDecomposition(V, { computeLeftSingularVectors: false, computeRightSingularVectors: false }).diagonal;
  const smallest = Math.min(...sigma);
  return smallest > 0 ? Math.max(...sigma) / smallest : Infinity;
}

/**
 * The separation-principle check for the predictor-form estimator driving
 * u = −K·x̂: eig([[A, −BK], [LC, A − BK − LC]]) against eig(A − BK) ∪ eig(A − LC).
 * A (n×n), B (n×m), C (p×n), K (m×n), L (n×p).
 */
export function separationCheck(
  A: MatrixInput,
  B: MatrixInput,
  C: MatrixInput,
  K: MatrixInput,
  L: MatrixInput,
  opts: SeparationOptions = {},
): SeparationReport {
  const Am = readSquare('A', A);
  const n = Am.rows;
  const Bm = readMatrix('B', B, { rows: n, rowsBecause: 'one per state of A' });
  const m = Bm.columns;
  const Cm = readMatrix('C', C, { columns: n, columnsBecause: 'one per state of A' });
  const p = Cm.rows;
  const Km = readMatrix('K', K, { rows: m, rowsBecause: 'one per input, the columns of B', columns: n, columnsBecause: 'one per state of A' });
  const Lm = readMatrix('L', L, { rows: n, rowsBecause: 'one per state of A', columns: p, columnsBecause: 'one per measurement, the rows of C' });
  const BK = Bm.mmul(Km);
  const LC = Lm.mmul(Cm);
  const AminusBK = Matrix.sub(Am, BK);
  const AminusLC = Matrix.sub(Am, LC);
  // Combined loop: [x; x̂]⁺ = [[A, −BK], [LC, A − BK − LC]]·[x; x̂]
  const combined = new Matrix(2 * n, 2 * n);
  combined.setSubMatrix(Am, 0, 0);
  combined.setSubMatrix(BK.clone().neg(), 0, n);
  combined.setSubMatrix(LC, n, 0);
  combined.setSubMatrix(Matrix.sub(AminusBK, LC), n, n);
  const combinedPoles = eigenvaluesOf(combined);
  const regulatorPoles = eigenvaluesOf(AminusBK);
  const estimatorPoles = eigenvaluesOf(AminusLC);
  const union = [...regulatorPoles, ...estimatorPoles];
  const { largestMismatch } = matchSpectra(combinedPoles, union);
  const size = Math.max(1, ...union.map((z) => Math.hypot(z.re, z.im)));
  const relativeMismatch = largestMismatch / size;
  const roundoffEstimate =
    Number.EPSILON *
    (eigenvectorCondition(combined) * combined.norm('frobenius') +
      Math.max(eigenvectorCondition(AminusBK) * AminusBK.norm('frobenius'), eigenvectorCondition(AminusLC) * AminusLC.norm('frobenius')));
  const verdict: SeparationVerdict =
    relativeMismatch <= (opts.tolerance ?? 1e-8) ? 'agree' : largestMismatch <= roundoffEstimate ? 'ill-conditioned' : 'disagree';
  return {
    combined: combined.to2DArray(),
    combinedPoles,
    regulatorPoles,
    estimatorPoles,
    largestMismatch,
    relativeMismatch,
    roundoffEstimate,
    verdict,
    agree: verdict === 'agree',
  };
}
