/**
 * Steady-state gains from the discrete algebraic Riccati equation: the
 * Kalman filter (predictor and filter forms) and the LQR regulator, with
 * their poles.
 *
 * Sources: Anderson & Moore, "Optimal Filtering", 1979, §4.4 (steady-state
 * filter, predictor form x̂ₖ₊₁|ₖ) and "Optimal Control: Linear Quadratic
 * Methods", 1990, §2.4 and §3.3 (discrete LQR); Franklin, Powell & Workman,
 * "Digital Control of Dynamic Systems", 3rd ed., 1998, §9.2 and §9.4. The
 * Riccati equations are solved by SDA (riccati.ts).
 *
 * Model: xₖ₊₁ = A xₖ + B uₖ + G wₖ, yₖ = C xₖ + vₖ, w ~ N(0, Q), v ~ N(0, R).
 *
 * Kalman filter, predictor form (what the estimators here run between samples):
 *     x̂ₖ₊₁|ₖ = A x̂ₖ|ₖ₋₁ + L (yₖ − C x̂ₖ|ₖ₋₁)          (+ B uₖ)
 *     P = A P Aᵀ − A P Cᵀ (C P Cᵀ + R)⁻¹ C P Aᵀ + G Q Gᵀ  (dual DARE: Aᵀ, Cᵀ, G Q Gᵀ, R)
 *     S = C P Cᵀ + R        predicted innovation covariance
 *     L = A P Cᵀ S⁻¹        predictor gain, estimator poles eig(A − L C)
 *     M = P Cᵀ S⁻¹          filter-form gain: x̂ₖ|ₖ = x̂ₖ|ₖ₋₁ + M (yₖ − C x̂ₖ|ₖ₋₁), L = A M
 *     P⁺ = (I − M C) P      filtered covariance P_k|k
 * P is the steady-state predicted covariance P_k|k₋₁.
 *
 * LQR: minimise Σ xₖᵀ Q xₖ + uₖᵀ R uₖ with uₖ = −K xₖ:
 *     X = AᵀXA − AᵀXB(R + BᵀXB)⁻¹BᵀXA + Q
 *     K = (R + BᵀXB)⁻¹ BᵀXA,  regulator poles eig(A − B K)
 *
 * Eigenvalues are {re, im}[] sorted by decreasing modulus, then decreasing
 * real and imaginary parts.
 */
import { Matrix, solve } from 'ml-matrix';
import { type DareOptions, requireStabilizingSolution, solveDareData } from './riccati';
import {
  type Complex,
  type MatrixInput,
  eigenvaluesOf,
  readMatrix,
  readSquare,
  requireCovariance,
} from './structure';

/** A filter design: A n×n, C p×n, G n×g (identity when absent, then g = n), Q g×g, R p×p. */
export interface KalmanDesignInput {
  A: MatrixInput;
  C: MatrixInput;
  G?: MatrixInput;
  Q: MatrixInput;
  R: MatrixInput;
}

export interface SteadyStateKalman {
  /** Steady-state predicted covariance P = P_k|k−1 (solution of the dual DARE). */
  P: number[][];
  /** Filtered covariance P_k|k = (I − M C) P. */
  Pfiltered: number[][];
  /** Predicted innovation covariance S = C P Cᵀ + R. */
  S: number[][];
  /** Predictor-form gain L = A P Cᵀ S⁻¹. */
  L: number[][];
  /** Filter-form gain M = P Cᵀ S⁻¹. */
  M: number[][];
  /** Estimator poles eig(A − L C). */
  poles: Complex[];
  /** Doubling steps of the Riccati solve (riccati.ts). */
  iterations: number;
  /** Newton refinement steps (0 unless the noise or weight leaves an unstable mode unexcited or unseen). */
  newtonSteps: number;
  /** Relative residual of the Riccati equation at the solution. */
  residual: number;
}

export interface LqrDesign {
  /** Stabilizing solution of the control DARE. */
  X: number[][];
  /** K = (R + BᵀXB)⁻¹ BᵀXA, for u = −K x. */
  K: number[][];
  /** Regulator poles eig(A − B K). */
  poles: Complex[];
  /** Doubling steps of the Riccati solve (riccati.ts). */
  iterations: number;
  /** Newton refinement steps (0 unless the noise or weight leaves an unstable mode unexcited or unseen). */
  newtonSteps: number;
  /** Relative residual of the Riccati equation at the solution. */
  residual: number;
}

/**
 * Steady-state Kalman filter of a design: P from the dual DARE, S, the
 * predictor gain L, the filter gain M, and the estimator poles.
 * Refuses with 'no-stabilizing-solution' when (A, C) is not detectable or
 * (A, G Q^½) has an uncontrollable mode on the unit circle.
 */
export function steadyStateKalman(design: KalmanDesignInput, opts: DareOptions = {}): SteadyStateKalman {
  const A = readSquare('A', design.A);
  const n = A.rows;
  const C = readMatrix('C', design.C, { columns: n, columnsBecause: 'one per state of A' });
  const p = C.rows;
  const G = design.G === undefined ? Matrix.eye(n) : readMatrix('G', design.G, { rows: n, rowsBecause: 'one per state of A' });
  const g = G.columns;
  const Q = requireCovariance('Q', readSquare('Q', design.Q, g, design.G === undefined ? `A is ${n}×${n} and there is no G` : `G has ${g} columns`), 'semidefinite', opts);
  const R = requireCovariance('R', readSquare('R', design.R, p, `C has ${p} rows`), 'definite', opts);

  // The dual DARE: A → Aᵀ, B → Cᵀ, Q → G Q Gᵀ, R → R.
  const dual = { A: A.transpose(), B: C.transpose(), Q: G.mmul(Q).mmul(G.transpose()), R };
  // (A, C) detectable ⇔ (Aᵀ, Cᵀ) stabilizable: the dual's first condition, worded for the filter.
  if (opts.checkStructure ?? true) requireStabilizingSolution(dual, opts, 'filter');
  const { X: P, solution } = solveDareData(dual, { ...opts, checkStructure: false });

  const S = Matrix.add(C.mmul(P).mmul(C.transpose()), R); // S = C P Cᵀ + R
  const Ssym = Matrix.add(S, S.transpose()).mul(0.5);
  const M = solve(Ssym, C.mmul(P)).transpose(); // M = P Cᵀ S⁻¹ (P, S symmetric)
  const L = A.mmul(M); // L = A P Cᵀ S⁻¹
  const Pf = Matrix.sub(Matrix.eye(n), M.mmul(C)).mmul(P); // P_k|k = (I − M C) P
  return {
    P: P.to2DArray(),
    Pfiltered: Matrix.add(Pf, Pf.transpose()).mul(0.5).to2DArray(),
    S: Ssym.to2DArray(),
    L: L.to2DArray(),
    M: M.to2DArray(),
    poles: eigenvaluesOf(Matrix.sub(A, L.mmul(C))),
    iterations: solution.iterations,
    newtonSteps: solution.newtonSteps,
    residual: solution.residual,
  };
}

/**
 * Discrete LQR: X from the control DARE (A, B, Q, R), K = (R + BᵀXB)⁻¹ BᵀXA,
 * regulator poles eig(A − B K). Q n×n symmetric PSD (state weight), R m×m
 * symmetric PD (input weight).
 */
export function lqr(A: MatrixInput, B: MatrixInput, Q: MatrixInput, R: MatrixInput, opts: DareOptions = {}): LqrDesign {
  const Am = readSquare('A', A);
  const n = Am.rows;
  const Bm = readMatrix('B', B, { rows: n, rowsBecause: 'one per state of A' });
  const m = Bm.columns;
  const Qm = requireCovariance('Q', readSquare('Q', Q, n, `A is ${n}×${n}`), 'semidefinite', opts);
  const Rm = requireCovariance('R', readSquare('R', R, m, `B has ${m} columns`), 'definite', opts);
  const { X, K, solution } = solveDareData({ A: Am, B: Bm, Q: Qm, R: Rm }, opts);
  return {
    X: X.to2DArray(),
    K: K.to2DArray(),
    poles: eigenvaluesOf(Matrix.sub(Am, Bm.mmul(K))),
    iterations: solution.iterations,
    newtonSteps: solution.newtonSteps,
    residual: solution.residual,
  };
}

/** Estimator poles eig(A − L C) for a given predictor gain L (n×p), e.g. the gain in use. */
export function estimatorPoles(A: MatrixInput, C: MatrixInput, L: MatrixInput): Complex[] {
  const Am = readSquare('A', A);
  const n = Am.rows;
  const Cm = readMatrix('C', C, { columns: n, columnsBecause: 'one per state of A' });
  const Lm = readMatrix('L', L, { rows: n, rowsBecause: 'one per state of A', columns: Cm.rows, columnsBecause: 'one per measurement, the rows of C' });
  return eigenvaluesOf(Matrix.sub(Am, Lm.mmul(Cm)));
}

/** Regulator poles eig(A − B K) for a given gain K (m×n). */
export function regulatorPoles(A: MatrixInput, B: MatrixInput, K: MatrixInput): Complex[] {
  const Am = readSquare('A', A);
  const n = Am.rows;
  const Bm = readMatrix('B', B, { rows: n, rowsBecause: 'one per state of A' });
  const Km = readMatrix('K', K, { rows: Bm.columns, rowsBecause: 'one per input, the columns of B', columns: n, columnsBecause: 'one per state of A' });
  return eigenvaluesOf(Matrix.sub(Am, Bm.mmul(Km)));
}
