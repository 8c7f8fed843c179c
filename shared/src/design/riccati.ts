/**
 * The discrete algebraic Riccati equation (DARE)
 *     X = AᵀXA − AᵀXB(R + BᵀXB)⁻¹BᵀXA + Q,
 * solved for its stabilizing solution (ρ(A − BK) < 1, K = (R + BᵀXB)⁻¹BᵀXA)
 * by the structure-preserving doubling algorithm (SDA):
 *     Chu, Fan, Lin & Wang, "Structure-preserving algorithms for periodic
 *     discrete-time algebraic Riccati equations", Int. J. Control 77(8), 2004;
 *     Lin & Xu, "Convergence analysis of structure-preserving doubling
 *     algorithms for Riccati-type matrix equations", SIAM J. Matrix Anal. Appl.
 *     28(1), 2006.
 *
 * With G = B R⁻¹ Bᵀ the DARE reads X = Aᵀ X (I + G X)⁻¹ A + Q, and SDA iterates,
 * from A₀ = A, G₀ = G, H₀ = Q,
 *     W     = I + Gₖ Hₖ
 *     Aₖ₊₁ = Aₖ W⁻¹ Aₖ
 *     Gₖ₊₁ = Gₖ + Aₖ W⁻¹ Gₖ Aₖᵀ
 *     Hₖ₊₁ = Hₖ + Aₖᵀ Hₖ W⁻¹ Aₖ
 * Hₖ → X, Gₖ → the solution of the dual equation, Aₖ → 0, with
 * ‖Hₖ − X‖ = O(ρ(A − BK)^(2ᵏ)) (Lin & Xu 2006, Theorem 3.1).
 *
 * Why SDA (and not the Schur method of Laub 1979 / Arnold & Laub 1984, which
 * SciPy uses): it converges quadratically, each step doubling the horizon, so a
 * few tens of small solves suffice even for slow closed loops; it never
 * computes eigenvectors of the symplectic pencil, whose ordering and
 * separation degrade as closed-loop poles approach the unit circle (the
 * tracker's integrators); it keeps Gₖ and Hₖ symmetric positive semidefinite by
 * construction; and it is four lines a reader can check against the papers.
 * Its one requirement, R invertible, is the DARE's own (R + BᵀXB must be).
 *
 * A stabilizing solution exists when (A, B) is stabilizable and (A, Q^½) has
 * no unobservable mode on the unit circle (Lancaster & Rodman, "Algebraic
 * Riccati Equations", 1995, Ch. 13); those conditions are checked first
 * (structure.ts, staircase form). SDA, started from H₀ = Q, converges to the
 * smallest positive semidefinite solution, which is the stabilizing one when
 * (A, Q^½) is also detectable (Lin & Xu 2006, Theorem 3.1). When it is not (an
 * unstable mode the weight Q does not see, e.g. q = 0 on an unstable plant),
 * SDA solves the equation with Q + δI instead, whose gain stabilizes the same
 * (A, B), and Newton's method on the DARE (Hewer, "An iterative technique for
 * the computation of the steady state gains for the discrete optimal
 * regulator", IEEE TAC 16(4), 1971) refines it to the stabilizing solution of
 * the original equation:
 *     Kⱼ given, A_K = A − B Kⱼ:  Xⱼ = A_Kᵀ Xⱼ A_K + Q + Kⱼᵀ R Kⱼ    (Stein equation)
 *     Kⱼ₊₁ = (R + BᵀXⱼB)⁻¹ BᵀXⱼA
 * each Stein equation solved by the same doubling with G = 0 (Smith's method).
 * The result is checked after: relative residual and ρ(A − BK) < 1.
 *
 * Matrices come in and go out as number[][] (row-major). Every refusal is a
 * DesignError with a stable code and a message naming the matrix.
 */
import { CholeskyDecomposition, LuDecomposition, Matrix, solve } from 'ml-matrix';
import {
  DesignError,
  type DefinitenessOptions,
  type MatrixInput,
  type StructureOptions,
  formatMode,
  psdFactor,
  readMatrix,
  readSquare,
  requireCovariance,
  spectralRadius,
  structureOf,
  symmetricPart,
} from './structure';

export interface DareOptions extends StructureOptions, DefinitenessOptions {
  /** Stop when ‖Hₖ₊₁ − Hₖ‖_F ≤ tolerance·‖Hₖ₊₁‖_F. Default 1e-13. */
  tolerance?: number;
  /** Doubling steps before giving up ('did-not-converge'). Default 100 (2¹⁰⁰ steps of the horizon). */
  maxIterations?: number;
  /** Largest accepted relative residual (see {@link DareSolution.residual}). Default 1e-8. */
  residualTolerance?: number;
  /** Check stabilizability of (A, B) and the unit-circle modes of (A, Q^½) first. Default true. */
  checkStructure?: boolean;
}

export interface DareSolution {
  /** The stabilizing solution, symmetric positive semidefinite. */
  X: number[][];
  /** Doubling steps taken (with the Stein solves of any Newton steps). */
  iterations: number;
  /**
   * ‖AᵀXA − AᵀXB(R + BᵀXB)⁻¹BᵀXA + Q − X‖_F divided by the sum of the Frobenius
   * norms of the four terms: the residual relative to the size of what cancels.
   */
  residual: number;
  /** ρ(A − BK), K = (R + BᵀXB)⁻¹BᵀXA: below 1 for the stabilizing solution. */
  closedLoopSpectralRadius: number;
  /** Newton (Hewer) steps taken after SDA: 0 unless (A, Q^½) is not detectable. */
  newtonSteps: number;
}

export const DEFAULT_DARE_TOLERANCE = 1e-13;
export const DEFAULT_DARE_MAX_ITERATIONS = 100;
export const DEFAULT_DARE_RESIDUAL_TOLERANCE = 1e-8;

/** The validated DARE data, as ml-matrix matrices. */
export interface DareData {
  A: Matrix;
  B: Matrix;
  Q: Matrix;
  R: Matrix;
}

/** Validates A (n×n), B (n×m), Q (n×n, symmetric PSD), R (m×m, symmetric PD). */
export function readDare(A: MatrixInput, B: MatrixInput, Q: MatrixInput, R: MatrixInput, opts: DefinitenessOptions = {}): DareData {
  const Am = readSquare('A', A);
  const n = Am.rows;
  const Bm = readMatrix('B', B, { rows: n, rowsBecause: 'one per state of A' });
  const m = Bm.columns;
  const Qm = readSquare('Q', Q, n, `A is ${n}×${n}`);
  const Rm = readSquare('R', R, m, `B has ${m} columns`);
  return {
    A: Am,
    B: Bm,
    Q: requireCovariance('Q', Qm, 'semidefinite', opts),
    R: requireCovariance('R', Rm, 'definite', opts),
  };
}

/**
 * Refuses with 'no-stabilizing-solution' when (A, B) has an uncontrollable mode
 * with |λ| ≥ 1 or (A, Q^½) an unobservable mode on the unit circle. `wording`
 * 'filter' words the second case for the dual equation of a Kalman filter
 * (data Aᵀ, Cᵀ, G Q Gᵀ, R), where it is a mode of (A, G Q^½) the process
 * noise does not excite.
 */
export function requireStabilizingSolution(d: DareData, opts: StructureOptions, wording: 'control' | 'filter' = 'control'): void {
  const control = structureOf.controllability(d.A, d.B, opts);
  const unstable = control.uncontrollableModes.filter((mode) => structureOf.outsideUnitDisc(mode, opts));
  const plural = (modes: readonly unknown[]) => (modes.length > 1 ? 's' : '');
  if (unstable.length > 0) {
    throw new DesignError(
      'no-stabilizing-solution',
      wording === 'control'
        ? `(A, B) is not stabilizable: the mode${plural(unstable)} ${unstable.map(formatMode).join(', ')} ` +
            `cannot be moved (rank ${control.rank} of ${control.states}), so no gain makes the loop stable`
        : `(A, C) is not detectable: the mode${plural(unstable)} ${unstable.map(formatMode).join(', ')} ` +
            `cannot be seen in the measurements (observable rank ${control.rank} of ${control.states}), so no steady-state gain makes the estimator stable`,
    );
  }
  // (A, Q^½) rather than (A, Q): the same null space, half the dynamic range for the rank decision.
  const weight = structureOf.observability(d.A, psdFactor(d.Q), opts);
  const onCircle = weight.unobservableModes.filter((mode) => structureOf.onUnitCircle(mode, opts));
  if (onCircle.length > 0) {
    const modes = onCircle.map(formatMode).join(', ');
    throw new DesignError(
      'no-stabilizing-solution',
      wording === 'control'
        ? `(A, Q^½) has the unobservable mode${plural(onCircle)} ${modes} on the unit circle, so the Riccati equation has no stabilizing solution`
        : `(A, G Q^½) has the uncontrollable mode${plural(onCircle)} ${modes} on the unit circle: the process noise does not excite ` +
            `${onCircle.length > 1 ? 'them' : 'it'}, so the Riccati equation has no stabilizing solution`,
    );
  }
}

/** One solve of R + BᵀXB, and the Riccati right-hand side with its terms. */
function riccatiTerms(d: DareData, X: Matrix): { K: Matrix; AXA: Matrix; F: Matrix } {
  const { A, B, R } = d;
  const BtX = B.transpose().mmul(X);
  const K = solve(Matrix.add(R, BtX.mmul(B)), BtX.mmul(A)); // K = (R + BᵀXB)⁻¹ BᵀXA
  const AXA = A.transpose().mmul(X).mmul(A);
  const F = A.transpose().mmul(X).mmul(B).mmul(K); // AᵀXB (R + BᵀXB)⁻¹ BᵀXA
  return { K, AXA, F };
}

/** Relative residual of the DARE at X (see {@link DareSolution.residual}) and the gain K. */
export function dareResidual(d: DareData, X: Matrix): { residual: number; K: Matrix } {
  const { K, AXA, F } = riccatiTerms(d, X);
  const Res = Matrix.sub(AXA, F).add(d.Q).sub(X);
  const scale = AXA.norm('frobenius') + F.norm('frobenius') + d.Q.norm('frobenius') + X.norm('frobenius');
  return { residual: scale > 0 ? Res.norm('frobenius') / scale : 0, K };
}

function allFinite(M: Matrix): boolean {
  for (let i = 0; i < M.rows; i++) for (let j = 0; j < M.columns; j++) if (!Number.isFinite(M.get(i, j))) return false;
  return true;
}

/**
 * The doubling iteration from A₀ = A, G₀ = G, H₀ = H (SDA; with G = 0 it is
 * Smith's doubling for the Stein equation X = AᵀXA + H). Returns the limit of Hₖ.
 */
function doubling(A: Matrix, G: Matrix, H: Matrix, tolerance: number, maxIterations: number): { H: Matrix; iterations: number; converged: boolean } {
  const I = Matrix.eye(A.rows);
  let Ak = A.clone();
  let Gk = G.clone();
  let Hk = H.clone();
  let iterations = 0;
  while (iterations < maxIterations) {
    iterations++;
    const W = Matrix.add(I, Gk.mmul(Hk)); // W = I + Gₖ Hₖ
    const lu = new LuDecomposition(W);
    if (lu.isSingular()) break;
    const WinvA = lu.solve(Ak); // W⁻¹ Aₖ
    const WinvG = lu.solve(Gk); // W⁻¹ Gₖ
    const Anext = Ak.mmul(WinvA); // Aₖ₊₁ = Aₖ W⁻¹ Aₖ
    const Gnext = symmetricPart(Matrix.add(Gk, Ak.mmul(WinvG).mmul(Ak.transpose()))); // Gₖ₊₁ = Gₖ + Aₖ W⁻¹ Gₖ Aₖᵀ
    const Hnext = symmetricPart(Matrix.add(Hk, Ak.transpose().mmul(Hk).mmul(WinvA))); // Hₖ₊₁ = Hₖ + Aₖᵀ Hₖ W⁻¹ Aₖ
    if (!allFinite(Hnext) || !allFinite(Gnext) || !allFinite(Anext)) return { H: Hnext, iterations, converged: false };
    const change = Matrix.sub(Hnext, Hk).norm('frobenius');
    Ak = Anext;
    Gk = Gnext;
    Hk = Hnext;
    if (change <= tolerance * Hk.norm('frobenius')) return { H: Hk, iterations, converged: true };
  }
  return { H: Hk, iterations, converged: false };
}

function notConverged(iterations: number, H: Matrix, what: string): DesignError {
  return new DesignError(
    'did-not-converge',
    `the ${what} did not converge in ${iterations} steps` +
      (allFinite(H) ? '' : ' (its iterates overflowed)') +
      '; a closed-loop pole on or very near the unit circle (an unstabilizable or undetectable mode) slows or stops it',
  );
}

/** SDA (and, for an undetectable (A, Q^½), Newton's refinement) on validated data; returns the stabilizing X with its checks. */
export function solveDareData(d: DareData, opts: DareOptions = {}): { X: Matrix; K: Matrix; solution: DareSolution } {
  const tolerance = opts.tolerance ?? DEFAULT_DARE_TOLERANCE;
  const maxIterations = opts.maxIterations ?? DEFAULT_DARE_MAX_ITERATIONS;
  const residualTolerance = opts.residualTolerance ?? DEFAULT_DARE_RESIDUAL_TOLERANCE;
  if (opts.checkStructure ?? true) requireStabilizingSolution(d, opts);

  const { A, B, Q, R } = d;
  const n = A.rows;
  // G = B R⁻¹ Bᵀ = (B L⁻ᵀ)(B L⁻ᵀ)ᵀ with R = L Lᵀ: symmetric PSD by construction.
  const Lr = new CholeskyDecomposition(R).lowerTriangularMatrix;
  const BLt = solve(Lr, B.transpose()).transpose(); // B L⁻ᵀ
  const G = BLt.mmul(BLt.transpose());
  // SDA converges to the stabilizing solution when (A, Q^½) is detectable; otherwise start Newton from Q + δI.
  const unseen = structureOf
    .observability(A, psdFactor(Q), opts)
    .unobservableModes.filter((mode) => structureOf.outsideUnitDisc(mode, opts));
  const scale = Q.norm('frobenius') || R.norm('frobenius') / Math.max(B.norm('frobenius') ** 2, Number.MIN_VALUE);
  const H0 = unseen.length === 0 ? Q : Matrix.add(Q, Matrix.eye(n).mul(scale));
  const sda = doubling(A, G, H0, tolerance, maxIterations);
  if (!sda.converged) throw notConverged(sda.iterations, sda.H, 'doubling iteration');
  let X = sda.H;
  let iterations = sda.iterations;
  let newtonSteps = 0;
  if (unseen.length > 0) {
    // Hewer's Newton iteration on the original Q, from the stabilizing gain of Q + δI.
    let K = dareResidual(d, X).K;
    let converged = false;
    while (newtonSteps < maxIterations && !converged) {
      newtonSteps++;
      const AK = Matrix.sub(A, B.mmul(K)); // A_K = A − B Kⱼ
      const W = Matrix.add(Q, K.transpose().mmul(R).mmul(K)); // Q + Kⱼᵀ R Kⱼ
      const stein = doubling(AK, new Matrix(n, n), symmetricPart(W), tolerance, maxIterations); // Xⱼ = A_Kᵀ Xⱼ A_K + W
      iterations += stein.iterations;
      if (!stein.converged) throw notConverged(iterations, stein.H, 'Newton iteration (Stein equation)');
      converged = Matrix.sub(stein.H, X).norm('frobenius') <= tolerance * stein.H.norm('frobenius');
      X = stein.H;
      K = dareResidual(d, X).K; // Kⱼ₊₁ = (R + BᵀXⱼB)⁻¹ BᵀXⱼA
    }
    if (!converged) throw notConverged(newtonSteps, X, 'Newton iteration');
  }
  const { residual, K } = dareResidual(d, X);
  const closedLoopSpectralRadius = spectralRadius(Matrix.sub(A, B.mmul(K)));
  if (!(residual <= residualTolerance)) {
    throw new DesignError(
      'did-not-converge',
      `the Riccati solution has relative residual ${residual.toExponential(2)}, above the tolerance ${residualTolerance.toExponential(0)}`,
    );
  }
  if (!(closedLoopSpectralRadius < 1)) {
    throw new DesignError(
      'no-stabilizing-solution',
      `the solution found is not stabilizing: ρ(A − BK) = ${closedLoopSpectralRadius.toPrecision(8)} ≥ 1`,
    );
  }
  return { X, K, solution: { X: X.to2DArray(), iterations, residual, closedLoopSpectralRadius, newtonSteps } };
}

/**
 * The stabilizing solution X of X = AᵀXA − AᵀXB(R + BᵀXB)⁻¹BᵀXA + Q by SDA.
 * A n×n, B n×m, Q n×n symmetric PSD, R m×m symmetric PD.
 * Throws DesignError: 'dimension', 'not-finite', 'not-symmetric', 'not-psd',
 * 'no-stabilizing-solution', 'did-not-converge'.
 */
export function solveDare(A: MatrixInput, B: MatrixInput, Q: MatrixInput, R: MatrixInput, opts: DareOptions = {}): DareSolution {
  return solveDareData(readDare(A, B, Q, R, opts), opts).solution;
}
