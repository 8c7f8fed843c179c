/**
 * Noise covariances from a filter's innovations by autocovariance least squares
 * (ALS).
 *
 * Method: Odelson, Rajamani & Rawlings, "A new autocovariance least-squares
 * method for estimating noise covariances", Automatica 42 (2006) 303–308; the
 * positive semidefinite constraint and the identifiability condition from
 * Rajamani & Rawlings, "Estimation of the disturbance structure from data using
 * semidefinite programming and optimal weighting", Automatica 45 (2009) 142–148
 * (title and pages from memory). Citations below marked "from memory" were not
 * checked against the printed source.
 *
 * Model (the paper's symbols):
 *   x_{k+1} = A x_k + G w_k,   y_k = C x_k + v_k,   w_k ~ N(0, Q_w),  v_k ~ N(0, R_v)
 * and a stable steady-state ONE-STEP PREDICTOR with gain L:
 *   x̂_{k+1} = A x̂_k + L (y_k − C x̂_k),   innovation 𝒴_k = y_k − C x̂_k.
 * The paper writes the predictor with the filter gain, A·L_filter; here `L` is
 * the predictor gain itself. A filter-form (measurement-update) gain M, with
 * x̂_{k|k} = x̂_{k|k−1} + M (y_k − C x̂_{k|k−1}), converts as L = A·M
 * (pass `gainForm: 'filter'` and it is converted for you).
 *
 * The estimate error ε_k = x_k − x̂_k obeys
 *   ε_{k+1} = 𝒜 ε_k + G w_k − L v_k,   𝒜 = A − L C,   𝒴_k = C ε_k + v_k,
 * so its steady-state covariance P solves the Lyapunov equation
 *   P = 𝒜 P 𝒜ᵀ + G Q_w Gᵀ + L R_v Lᵀ
 * and the innovation autocovariances are
 *   C_0 = C P Cᵀ + R_v,   C_j = E[𝒴_{k+j} 𝒴_kᵀ] = C 𝒜^j P Cᵀ − C 𝒜^{j−1} L R_v  (j ≥ 1).
 * Stacking the first block column ℛ(N) = [C_0; C_1; …; C_{N−1}] (N·p × p) gives
 *   ℛ(N) = 𝒪 P Cᵀ + Γ R_v,   𝒪 = [C; C𝒜; …; C𝒜^{N−1}],   Γ = [I_p; −C L; −C𝒜 L; …; −C𝒜^{N−2} L]
 * and with vec (column stacking), vec(X Y Z) = (Zᵀ ⊗ X) vec Y:
 *   vec ℛ(N) = [ (C⊗𝒪)(I − 𝒜⊗𝒜)⁻¹(G⊗G) ,  (C⊗𝒪)(I − 𝒜⊗𝒜)⁻¹(L⊗L) + (I_p⊗Γ) ] [vec Q_w; vec R_v]
 * The ALS matrix 𝒜_N is that bracket times the parametrization of the symmetric
 * unknowns: the duplication matrix D (vec X = D vech X) for a full covariance,
 * or the selection of the diagonal (vec X = E diag X) for a diagonal one. With b
 * = vec ℛ̂(N) from the sample autocovariances the estimate is
 *   min ‖𝒜_N θ − b‖²  subject to  Q_w ⪰ 0, R_v ⪰ 0          (Rajamani & Rawlings 2009)
 * with identity weighting (the 2006 paper's choice; the 2009 paper's optimal
 * weighting is not implemented).
 *
 * Sample autocovariances (the paper's estimator, no demeaning: the innovations
 * are zero-mean under the model, and subtracting a sample mean would bias every
 * lag by O(1/n)):
 *   Ĉ_j = 1/(Σ_s (n_s − j)) · Σ_s Σ_{t=0}^{n_s−j−1} 𝒴^s_{t+j} 𝒴^{sᵀ}_t
 * over independent segments s (bench runs), never pairing samples across a
 * segment boundary; with the n − j divisor each Ĉ_j is unbiased.
 *
 * Constrained solve:
 * - Q_w and R_v both diagonal: the constraint is θ ≥ 0 and the problem is a
 *   nonnegative least-squares problem, solved exactly by the active-set algorithm
 *   of Lawson & Hanson, "Solving Least Squares Problems" (1974), ch. 23.
 *   (Clipping the unconstrained solution at zero is not the constrained minimizer
 *   in general: the columns are not orthogonal.)
 * - Otherwise: ADMM (Boyd, Parikh, Chu, Peleato & Eckstein, "Distributed
 *   optimization and statistical learning via the alternating direction method of
 *   multipliers", Found. Trends Mach. Learn. 3 (2011), §5.2 with the residual
 *   balancing of §3.4.1). The unknowns are taken in svec coordinates (off-diagonal
 *   entries scaled by √2), in which the Euclidean norm is the Frobenius norm, so
 *   the projection onto the feasible set is exact: eigenvalue clipping for a full
 *   block, clipping at zero for a diagonal one.
 *
 * Identifiability (Rajamani & Rawlings 2009: the ALS problem has a unique
 * solution if and only if 𝒜_N (with the duplication matrix) has full column
 * rank): rank from the SVD of 𝒜_N with its columns scaled to unit norm (so the
 * units of Q_w and R_v do not matter). Q_w is determined when no direction of the
 * null space moves it, i.e. rank 𝒜_N = rank 𝒜_N,R + #Q unknowns (likewise R_v).
 * From memory (check against the paper): the same paper notes that a full Q_w
 * needs G with full column rank and no more unknowns than the output spectrum
 * determines; both show up here as a rank deficiency.
 *
 * Uncertainty: moving-block bootstrap (Künsch, "The jackknife and the bootstrap
 * for general stationary observations", Ann. Statist. 17 (1989) 1217–1241, from memory) in
 * its blocks-of-blocks form: blocks of consecutive lagged products
 * z_t = (𝒴_t𝒴_tᵀ, 𝒴_{t+1}𝒴_tᵀ, …, 𝒴_{t+N−1}𝒴_tᵀ) are resampled, so every lag
 * product comes from the real series and none crosses a block or segment
 * boundary artificially. Each replicate's b* gets the same constrained solve;
 * per-entry percentile intervals. Default block length ⌈n^{1/3}⌉ (the rate of
 * Hall, Horowitz & Jing, Biometrika 82 (1995), from memory) but no shorter than
 * the memory of the lagged products (see defaultBlockLength). The intervals are
 * approximate: for a slow mistuned 4-state filter (ρ(𝒜) ≈ 0.96, 100,000
 * samples, 40 simulated runs) the nominal 90 % intervals covered the true Q_w in
 * 33 of 40 runs, the bootstrap spread being about 10 % narrower than the spread
 * across runs.
 * Deterministic for a seed: xoshiro128** (Blackman & Vigna, ACM TOMS 47, 2021)
 * seeded through splitmix32.
 */
import { EigenvalueDecomposition, Matrix, SVD, pseudoInverse, solve } from 'ml-matrix';

// Builtins bound once: looking up the global `Math` per call is slow inside jest's vm contexts (nodejs/node#49283).
const { SQRT2, abs, cbrt, ceil, floor, hypot, imul, log, max, min, sqrt } = Math;

// ---------------------------------------------------------------------------
// Public types

export type Rows = ReadonlyArray<ArrayLike<number>>;
export type CovarianceStructure = 'full' | 'diagonal';

export interface AlsModel {
  /** n×n state transition. */
  A: Rows;
  /** p×n measurement matrix. */
  C: Rows;
  /** n×g process-noise input; default the n×n identity. */
  G?: Rows;
  /** n×p gain in use: the one-step predictor gain (default) or the filter gain M with `gainForm: 'filter'`. */
  L: Rows;
  /** 'predictor' (x̂_{k+1} = A x̂_k + L(y_k − C x̂_k), default) or 'filter' (L_pred = A·M). */
  gainForm?: 'predictor' | 'filter';
}

/** One run of innovation vectors 𝒴_k (each of length p), in time order. */
export type InnovationSegment = ReadonlyArray<ArrayLike<number>>;

export interface AlsBootstrapOptions {
  /** Number of bootstrap replicates (≥ 10). */
  replicates: number;
  /** Seed of the resampling (any 32-bit integer). */
  seed: number;
  /** Block length in samples; default max(⌈n^{1/3}⌉, N − 1 + τ) with τ the 1 % decay time of 𝒜 (see defaultBlockLength). */
  blockLength?: number;
  /** Two-sided interval level; default 0.9 (the 5 % and 95 % percentiles). */
  level?: number;
}

export interface AlsOptions {
  /** N, the number of lags 0…N−1 used; default 15. */
  lags?: number;
  /** Parametrization of Q_w; default 'diagonal' (fewest unknowns, best identifiability). */
  estimateQ?: CovarianceStructure;
  /** Parametrization of R_v; default 'diagonal'. */
  estimateR?: CovarianceStructure;
  /** Samples dropped at the start of each segment (filter transient); default 0. */
  burnIn?: number;
  /** Singular values below rankTolerance·σ_max of the column-scaled ALS matrix count as zero; default 1e-9. */
  rankTolerance?: number;
  bootstrap?: AlsBootstrapOptions;
}

export interface Identifiability {
  Q: boolean;
  R: boolean;
  reason: string;
  /** Entries moved by the null space of 𝒜_N (empty when both are determined), e.g. 'Q[0][1]'. */
  undetermined: string[];
}

export interface EntryIntervals {
  lower: number[][];
  upper: number[][];
}

export interface AlsIntervals {
  level: number;
  replicates: number;
  blockLength: number;
  seed: number;
  Q: EntryIntervals;
  R: EntryIntervals;
}

export interface AlsResult {
  /** Estimated Q_w (g×g), positive semidefinite. */
  Q: number[][];
  /** Estimated R_v (p×p), positive semidefinite. */
  R: number[][];
  /** ‖𝒜_N θ̂ − b‖₂ at the constrained estimate. */
  residualNorm: number;
  /** Numerical rank of the ALS matrix and its number of unknowns. */
  rank: number;
  unknowns: number;
  /** σ_max/σ_min of the ALS matrix with unit-norm columns (Infinity when σ_min = 0). */
  condition: number;
  singularValues: number[];
  identifiable: Identifiability;
  intervals?: AlsIntervals;
  /** N */
  lags: number;
  /** Samples used (after burn-in), over all segments. */
  samples: number;
  /** The unconstrained least-squares (minimum-norm) solution, for diagnosis. */
  unconstrained: { Q: number[][]; R: number[][]; residualNorm: number };
  solver: { method: 'nnls' | 'admm'; iterations: number; converged: boolean };
  /** Spectral radius of 𝒜 = A − L C. */
  spectralRadius: number;
  /** Ĉ_j from the data and C_j(Q̂_w, R̂_v) from the model, j = 0…N−1 (p×p each), for plotting. */
  autocovariances: { estimated: number[][][]; fitted: number[][][] };
}

export class AlsError extends Error {
  constructor(message: string) {
    super(message);
    this.name = 'AlsError';
  }
}

// ---------------------------------------------------------------------------
// The ALS system 𝒜_N θ = b

/** One unknown of θ: an entry (i ≥ j) of Q_w or R_v. */
export interface AlsUnknown {
  of: 'Q' | 'R';
  i: number;
  j: number;
}

export interface AlsSystem {
  n: number;
  p: number;
  g: number;
  N: number;
  estimateQ: CovarianceStructure;
  estimateR: CovarianceStructure;
  /** Predictor gain used (after conversion from a filter gain). */
  L: Matrix;
  /** 𝒜 = A − L C */
  scriptA: Matrix;
  spectralRadius: number;
  /** 𝒜_N: N·p² rows (vec ℛ(N), column-major), Q unknowns (vech or diagonal) then R unknowns. */
  matrix: Matrix;
  unknowns: AlsUnknown[];
}

/** Build 𝒜_N from the model. Throws AlsError on inconsistent shapes or an unstable 𝒜. */
export function buildAlsSystem(
  model: AlsModel,
  N: number,
  estimateQ: CovarianceStructure = 'diagonal',
  estimateR: CovarianceStructure = 'diagonal',
): AlsSystem {
  const { A, C, G, L } = checkedModel(model);
  if (!Number.isInteger(N) || N < 1) throw new AlsError(`lags N must be an integer ≥ 1, got ${N}`);
  checkStructure('estimateQ', estimateQ);
  checkStructure('estimateR', estimateR);
  const n = A.rows;
  const p = C.rows;
  const g = G.columns;

  // 𝒜 = A − L C
  const scriptA = Matrix.sub(A, L.mmul(C));
  const spectralRadius = spectralRadiusOf(scriptA);
  if (!(spectralRadius < 1)) {
    throw new AlsError(
      `the predictor is not stable: spectral radius of A − L·C is ${spectralRadius.toPrecision(6)} ≥ 1; ` +
        'ALS needs stationary innovations (check the gain and its form: a filter gain M must be passed with gainForm: "filter")',
    );
  }

  // 𝒪 = [C; C𝒜; …; C𝒜^{N−1}]  (N·p × n),  Γ = [I_p; −C L; −C𝒜 L; …; −C𝒜^{N−2} L]  (N·p × p)
  const O = new Matrix(N * p, n);
  const Gamma = new Matrix(N * p, p);
  Gamma.setSubMatrix(Matrix.eye(p), 0, 0);
  let CAj = C.clone(); // C𝒜^j
  for (let j = 0; j < N; j++) {
    O.setSubMatrix(CAj, j * p, 0);
    if (j + 1 < N) Gamma.setSubMatrix(CAj.mmul(L).neg(), (j + 1) * p, 0); // block j+1: −C𝒜^j L
    CAj = CAj.mmul(scriptA);
  }

  const DQ = parametrization(g, estimateQ); // vec Q_w = D_Q θ_Q
  const DR = parametrization(p, estimateR); // vec R_v = D_R θ_R

  // (I − 𝒜⊗𝒜)⁻¹ applied to (G⊗G) D_Q and (L⊗L) D_R: vec P for each unknown
  const K = Matrix.sub(Matrix.eye(n * n), scriptA.kroneckerProduct(scriptA));
  const vecPQ = solve(K, G.kroneckerProduct(G).mmul(DQ)); // LU; K is nonsingular when 𝒜 is stable
  const vecPR = solve(K, L.kroneckerProduct(L).mmul(DR));

  const CO = C.kroneckerProduct(O); // vec(𝒪 P Cᵀ) = (C ⊗ 𝒪) vec P
  const MQ = CO.mmul(vecPQ);
  const MR = Matrix.add(CO.mmul(vecPR), Matrix.eye(p).kroneckerProduct(Gamma).mmul(DR)); // + vec(Γ R_v) = (I_p ⊗ Γ) vec R_v

  const matrix = new Matrix(N * p * p, MQ.columns + MR.columns);
  matrix.setSubMatrix(MQ, 0, 0);
  matrix.setSubMatrix(MR, 0, MQ.columns);

  const unknowns: AlsUnknown[] = [
    ...unknownList('Q', g, estimateQ),
    ...unknownList('R', p, estimateR),
  ];
  return { n, p, g, N, estimateQ, estimateR, L, scriptA, spectralRadius, matrix, unknowns };
}

/** b = vec ℛ̂(N) = vec [Ĉ_0; …; Ĉ_{N−1}] (column-major), matching the rows of 𝒜_N. */
export function autocovarianceVector(Chat: ReadonlyArray<Rows>): number[] {
  const N = Chat.length;
  const p = Chat[0].length;
  const b = new Array<number>(N * p * p);
  for (let c = 0; c < p; c++) for (let j = 0; j < N; j++) for (let i = 0; i < p; i++) b[c * N * p + j * p + i] = Chat[j][i][c];
  return b;
}

/** Inverse of autocovarianceVector: the N blocks p×p of a vector in the row order of 𝒜_N. */
export function autocovarianceBlocks(b: ArrayLike<number>, N: number, p: number): number[][][] {
  const blocks: number[][][] = [];
  for (let j = 0; j < N; j++) {
    const Cj: number[][] = [];
    for (let i = 0; i < p; i++) {
      const row: number[] = [];
      for (let c = 0; c < p; c++) row.push(b[c * N * p + j * p + i]);
      Cj.push(row);
    }
    blocks.push(Cj);
  }
  return blocks;
}

/** Q_w and R_v from θ (vech or diagonal entries, Q first). */
export function covariancesFromTheta(system: AlsSystem, theta: ArrayLike<number>): { Q: number[][]; R: number[][] } {
  const Q = zeros(system.g, system.g);
  const R = zeros(system.p, system.p);
  system.unknowns.forEach((u, k) => {
    const X = u.of === 'Q' ? Q : R;
    X[u.i][u.j] = theta[k];
    X[u.j][u.i] = theta[k];
  });
  return { Q, R };
}

/** θ from Q_w and R_v (their lower triangles or diagonals, as the system is parametrized). */
export function thetaFromCovariances(system: AlsSystem, Q: Rows, R: Rows): number[] {
  return system.unknowns.map((u) => (u.of === 'Q' ? Q[u.i][u.j] : R[u.i][u.j]));
}

// ---------------------------------------------------------------------------
// Sample autocovariances

export interface SampleAutocovariances {
  /** Ĉ_j, j = 0…N−1 (p×p). */
  C: number[][][];
  /** Σ_s (n_s − j): the number of pairs behind Ĉ_j. */
  pairs: number[];
  samples: number;
}

/**
 * Ĉ_j = Σ_s Σ_t 𝒴^s_{t+j} 𝒴^{sᵀ}_t / Σ_s (n_s − j), j = 0…N−1, pairs within each segment only.
 * Throws when a vector has the wrong length or a non-finite entry, or when lag N−1 has no pair.
 */
export function innovationAutocovariances(segments: ReadonlyArray<InnovationSegment>, N: number, p?: number): SampleAutocovariances {
  const data = packSegments(segments, p, 0);
  return autocovariancesOfPacked(data, N);
}

// ---------------------------------------------------------------------------
// Estimation

const DEFAULT_LAGS = 15;
const DEFAULT_RANK_TOLERANCE = 1e-9;

/**
 * Estimate Q_w and R_v by constrained ALS from the innovations of the predictor
 * x̂_{k+1} = A x̂_k + L(y_k − C x̂_k) running on the model. `segments` are
 * independent runs (pass [innovations] for one run).
 */
export function estimateNoiseCovariances(model: AlsModel, segments: ReadonlyArray<InnovationSegment>, options: AlsOptions = {}): AlsResult {
  const N = options.lags ?? DEFAULT_LAGS;
  const estimateQ = options.estimateQ ?? 'diagonal';
  const estimateR = options.estimateR ?? 'diagonal';
  const burnIn = options.burnIn ?? 0;
  const rankTolerance = options.rankTolerance ?? DEFAULT_RANK_TOLERANCE;
  if (!Number.isInteger(burnIn) || burnIn < 0) throw new AlsError(`burnIn must be an integer ≥ 0, got ${burnIn}`);
  if (!(rankTolerance > 0 && rankTolerance < 1)) throw new AlsError(`rankTolerance must be in (0, 1), got ${rankTolerance}`);

  const system = buildAlsSystem(model, N, estimateQ, estimateR);
  const data = packSegments(segments, system.p, burnIn);
  if (data.samples < 2 * N) {
    throw new AlsError(`N = ${N} lags need at least ${2 * N} innovation samples after burn-in; got ${data.samples}`);
  }
  const sample = autocovariancesOfPacked(data, N);
  const b = autocovarianceVector(sample.C);

  const M = system.matrix;
  const solver = new ConstrainedAls(system);
  const solution = solver.solve(b);
  const theta = solution.theta;

  // unconstrained minimum-norm least squares, for diagnosis
  const thetaFree = pseudoInverse(M).mmul(Matrix.columnVector(b)).getColumn(0);
  const free = covariancesFromTheta(system, thetaFree);

  const ident = identifiability(system, rankTolerance);
  const fittedVector = M.mmul(Matrix.columnVector(theta)).getColumn(0);
  const { Q, R } = covariancesFromTheta(system, theta);

  const result: AlsResult = {
    Q,
    R,
    residualNorm: residualNorm(M, theta, b),
    rank: ident.rank,
    unknowns: system.unknowns.length,
    condition: ident.condition,
    singularValues: ident.singularValues,
    identifiable: ident.identifiable,
    lags: N,
    samples: data.samples,
    unconstrained: { Q: free.Q, R: free.R, residualNorm: residualNorm(M, thetaFree, b) },
    solver: { method: solution.method, iterations: solution.iterations, converged: solution.converged },
    spectralRadius: system.spectralRadius,
    autocovariances: { estimated: sample.C, fitted: autocovarianceBlocks(fittedVector, N, system.p) },
  };
  if (options.bootstrap) result.intervals = blockBootstrap(system, solver, data, options.bootstrap, solution);
  return result;
}

/** ‖𝒜_N θ − b‖₂ */
export function residualNorm(M: Matrix, theta: ArrayLike<number>, b: ArrayLike<number>): number {
  let s = 0;
  for (let r = 0; r < M.rows; r++) {
    let e = -b[r];
    for (let c = 0; c < M.columns; c++) e += M.get(r, c) * theta[c];
    s += e * e;
  }
  return sqrt(s);
}

// ---------------------------------------------------------------------------
// Constrained least squares

interface ConstrainedSolution {
  theta: number[];
  method: 'nnls' | 'admm';
  iterations: number;
  converged: boolean;
  /** ADMM state (scaled coordinates) for warm starts. */
  warm?: { z: number[]; u: number[]; rho: number };
}

/**
 * min ‖𝒜_N θ − b‖² subject to Q_w ⪰ 0 and R_v ⪰ 0, for many b with the same 𝒜_N.
 * Exported for tests; use estimateNoiseCovariances.
 */
export class ConstrainedAls {
  private readonly allDiagonal: boolean;
  private readonly d: number;
  // ADMM data, in svec coordinates s = S θ scaled by α = σ_max(𝒜_N S⁻¹)
  private readonly scale: number[]; // S (1 or √2 per unknown)
  private readonly alpha: number;
  private readonly V: number[][]; // eigenvectors of H = (𝒜_N S⁻¹)ᵀ(𝒜_N S⁻¹)/α²
  private readonly lambda: number[];
  private readonly Ms: Matrix; // 𝒜_N S⁻¹ / α
  private readonly blocks: { offset: number; size: number; full: boolean }[];

  constructor(private readonly system: AlsSystem) {
    this.d = system.unknowns.length;
    this.allDiagonal = system.estimateQ === 'diagonal' && system.estimateR === 'diagonal';
    this.scale = system.unknowns.map((u) => (u.i === u.j ? 1 : SQRT2));
    const Ms = system.matrix.clone();
    for (let c = 0; c < this.d; c++) for (let r = 0; r < Ms.rows; r++) Ms.set(r, c, Ms.get(r, c) / this.scale[c]);
    const H0 = Ms.transpose().mmul(Ms);
    const e0 = new EigenvalueDecomposition(H0, { assumeSymmetric: true });
    const lambdaMax = max(...e0.realEigenvalues, 0);
    this.alpha = lambdaMax > 0 ? sqrt(lambdaMax) : 1;
    this.Ms = Ms.div(this.alpha);
    this.lambda = e0.realEigenvalues.map((l) => max(l, 0) / (this.alpha * this.alpha));
    this.V = e0.eigenvectorMatrix.to2DArray();
    const nQ = system.unknowns.filter((u) => u.of === 'Q').length;
    this.blocks = [
      { offset: 0, size: system.g, full: system.estimateQ === 'full' },
      { offset: nQ, size: system.p, full: system.estimateR === 'full' },
    ];
  }

  solve(b: ArrayLike<number>, warm?: ConstrainedSolution['warm']): ConstrainedSolution {
    return this.allDiagonal ? this.solveNnls(b) : this.solveAdmm(b, warm);
  }

  /** Lawson & Hanson (1974), ch. 23, algorithm NNLS: min ‖M θ − b‖ subject to θ ≥ 0. */
  private solveNnls(b: ArrayLike<number>): ConstrainedSolution {
    const { x: theta, iterations, converged } = nnls(this.system.matrix, b);
    return { theta, method: 'nnls', iterations, converged };
  }

  /** ADMM for min ½‖M_s s − b'‖² + I_K(z), s = z (Boyd et al. 2011, §5.2), K = PSD × PSD (or orthants) in svec coordinates. */
  private solveAdmm(bIn: ArrayLike<number>, warm?: ConstrainedSolution['warm']): ConstrainedSolution {
    const d = this.d;
    const bNorm = sqrt(Array.from(bIn).reduce((s, v) => s + v * v, 0));
    if (bNorm === 0) return { theta: new Array<number>(d).fill(0), method: 'admm', iterations: 0, converged: true };
    // scaled problem: M_s' = M_s/α, b' = b/‖b‖, s' = s·α/‖b‖
    const Ms = this.Ms;
    const q = new Array<number>(d).fill(0); // M_s'ᵀ b'
    for (let r = 0; r < Ms.rows; r++) {
      const br = bIn[r] / bNorm;
      for (let c = 0; c < d; c++) q[c] += Ms.get(r, c) * br;
    }
    const V = this.V;
    const lambda = this.lambda;
    let z = warm ? warm.z.slice() : new Array<number>(d).fill(0);
    let u = warm ? warm.u.slice() : new Array<number>(d).fill(0);
    let rho = warm ? warm.rho : 0.1;
    const epsAbs = 1e-12;
    const epsRel = 1e-10;
    const maxIterations = 50000;
    const x = new Array<number>(d).fill(0);
    const w = new Array<number>(d).fill(0);
    let iterations = 0;
    let converged = false;
    for (; iterations < maxIterations; ) {
      iterations++;
      // x = (H + ρI)⁻¹ (q + ρ(z − u)) through H = V Λ Vᵀ
      for (let k = 0; k < d; k++) {
        let s = 0;
        for (let i = 0; i < d; i++) s += V[i][k] * (q[i] + rho * (z[i] - u[i]));
        w[k] = s / (lambda[k] + rho);
      }
      for (let i = 0; i < d; i++) {
        let s = 0;
        for (let k = 0; k < d; k++) s += V[i][k] * w[k];
        x[i] = s;
      }
      // z = Π_K(x + u);  u = u + x − z
      const zOld = z;
      z = this.project(x.map((xi, i) => xi + u[i]));
      let rPrimal = 0;
      let rDual = 0;
      let nx = 0;
      let nz = 0;
      let nu = 0;
      for (let i = 0; i < d; i++) {
        u[i] += x[i] - z[i];
        rPrimal += (x[i] - z[i]) ** 2;
        rDual += (z[i] - zOld[i]) ** 2;
        nx += x[i] * x[i];
        nz += z[i] * z[i];
        nu += u[i] * u[i];
      }
      rPrimal = sqrt(rPrimal);
      rDual = rho * sqrt(rDual);
      const epsPrimal = sqrt(d) * epsAbs + epsRel * sqrt(max(nx, nz));
      const epsDual = sqrt(d) * epsAbs + epsRel * rho * sqrt(nu);
      if (rPrimal <= epsPrimal && rDual <= epsDual && iterations > 1) {
        converged = true;
        break;
      }
      // residual balancing (Boyd et al. 2011, §3.4.1): μ = 10, τ = 2; the scaled dual u = y/ρ rescales
      if (iterations % 5 === 0) {
        if (rPrimal > 10 * rDual) {
          rho *= 2;
          u = u.map((v) => v / 2);
        } else if (rDual > 10 * rPrimal) {
          rho /= 2;
          u = u.map((v) => v * 2);
        }
      }
    }
    const theta = z.map((s, i) => (s * bNorm) / this.alpha / this.scale[i]);
    return { theta, method: 'admm', iterations, converged, warm: { z, u, rho } };
  }

  /** Euclidean projection onto K in svec coordinates: eigenvalue clipping per full block, max(0, ·) per diagonal block. */
  private project(s: number[]): number[] {
    const out = s.slice();
    for (const block of this.blocks) {
      const k = block.size;
      if (!block.full) {
        for (let i = 0; i < k; i++) out[block.offset + i] = max(0, s[block.offset + i]);
        continue;
      }
      // smat: vech order (column-major lower triangle), off-diagonals carry √2
      const X = new Matrix(k, k);
      let idx = block.offset;
      for (let j = 0; j < k; j++) {
        for (let i = j; i < k; i++) {
          const v = i === j ? s[idx] : s[idx] / SQRT2;
          X.set(i, j, v);
          X.set(j, i, v);
          idx++;
        }
      }
      const P = projectPsd(X);
      idx = block.offset;
      for (let j = 0; j < k; j++) {
        for (let i = j; i < k; i++) {
          out[idx] = i === j ? P.get(i, j) : P.get(i, j) * SQRT2;
          idx++;
        }
      }
    }
    return out;
  }
}

/**
 * Nonnegative least squares, Lawson & Hanson, "Solving Least Squares Problems"
 * (1974), ch. 23: min ‖M x − b‖₂ subject to x ≥ 0, by the active-set method.
 * The passive-set subproblems are solved by the SVD (minimum norm), so dependent
 * columns do not break it.
 */
export function nnls(M: Matrix, b: ArrayLike<number>, maxIterations = 0): { x: number[]; iterations: number; converged: boolean } {
  const rows = M.rows;
  const n = M.columns;
  if (b.length !== rows) throw new AlsError(`nnls: b has ${b.length} entries, M has ${rows} rows`);
  const limit = maxIterations > 0 ? maxIterations : 30 * max(n, 1);
  const bv = Matrix.columnVector(Array.from(b));
  // tolerance on the gradient: 10·ε·‖M‖₁·max(rows, n)·‖b‖ (Lawson & Hanson use 10·ε·‖M‖·max(rows, n) on a scaled problem)
  let norm1 = 0;
  for (let c = 0; c < n; c++) norm1 = max(norm1, M.getColumn(c).reduce((a, v) => a + abs(v), 0));
  const bNorm = sqrt(Array.from(b).reduce((a, v) => a + v * v, 0));
  const tol = 10 * Number.EPSILON * norm1 * max(rows, n) * max(bNorm, Number.MIN_VALUE);
  const x = new Array<number>(n).fill(0);
  const passive = new Array<boolean>(n).fill(false);
  // w = Mᵀ(b − M x), the negative gradient
  const gradient = (): number[] => {
    const r = Matrix.sub(bv, M.mmul(Matrix.columnVector(x)));
    return M.transpose().mmul(r).getColumn(0);
  };
  const solvePassive = (): number[] => {
    const P = passive.map((on, j) => (on ? j : -1)).filter((j) => j >= 0);
    const z = new Array<number>(n).fill(0);
    if (P.length === 0) return z;
    const MP = M.subMatrixColumn(P);
    const zP = pseudoInverse(MP).mmul(bv).getColumn(0);
    P.forEach((j, k) => (z[j] = zP[k]));
    return z;
  };
  let iterations = 0;
  let converged = false;
  for (;;) {
    const w = gradient();
    let t = -1;
    let wMax = tol;
    for (let j = 0; j < n; j++) if (!passive[j] && w[j] > wMax) (wMax = w[j]), (t = j);
    if (t < 0) {
      converged = true; // KKT: w_j ≤ tol for every j held at 0, w_j = 0 on P
      break;
    }
    if (iterations >= limit) break;
    passive[t] = true;
    for (;;) {
      iterations++;
      const z = solvePassive();
      let feasible = true;
      for (let j = 0; j < n; j++) if (passive[j] && z[j] <= 0) feasible = false;
      if (feasible) {
        for (let j = 0; j < n; j++) x[j] = z[j];
        break;
      }
      // step back to the boundary: α = min over passive j with z_j ≤ 0 of x_j/(x_j − z_j)
      let alpha = Infinity;
      let blocking = -1;
      for (let j = 0; j < n; j++) {
        if (passive[j] && z[j] <= 0) {
          const step = x[j] / (x[j] - z[j]);
          if (step < alpha) (alpha = step), (blocking = j);
        }
      }
      // x ← x + α(z − x); the blocking entry lands on 0 exactly, and every passive entry at or below 0 leaves P
      for (let j = 0; j < n; j++) x[j] += alpha * (z[j] - x[j]);
      x[blocking] = 0;
      for (let j = 0; j < n; j++) {
        if (passive[j] && x[j] <= 0) {
          passive[j] = false;
          x[j] = 0;
        }
      }
      if (iterations >= limit) break;
    }
  }
  return { x, iterations, converged };
}

function projectPsd(X: Matrix): Matrix {
  const e = new EigenvalueDecomposition(X, { assumeSymmetric: true });
  const V = e.eigenvectorMatrix;
  const lam = e.realEigenvalues.map((l) => max(l, 0));
  return V.clone().mulRowVector(lam).mmul(V.transpose()); // V Λ₊ Vᵀ (mulRowVector works in place)
}

// ---------------------------------------------------------------------------
// Identifiability

function identifiability(system: AlsSystem, rankTolerance: number) {
  const M = system.matrix;
  const d = M.columns;
  const nQ = system.unknowns.filter((u) => u.of === 'Q').length;
  const nR = d - nQ;
  // columns to unit norm: rank decisions independent of the units of Q_w and R_v
  const scaled = M.clone();
  for (let c = 0; c < d; c++) {
    const norm = sqrt(scaled.getColumn(c).reduce((s, v) => s + v * v, 0));
    if (norm > 0) for (let r = 0; r < scaled.rows; r++) scaled.set(r, c, scaled.get(r, c) / norm);
  }
  const full = svdOf(scaled);
  const sigmaMax = full.sigma[0] ?? 0;
  const threshold = rankTolerance * sigmaMax;
  const rankOf = (sigma: number[]) => sigma.filter((s) => s > threshold).length;
  const rank = rankOf(full.sigma);
  const rankQ = nQ > 0 ? rankOf(svdOf(scaled.subMatrix(0, scaled.rows - 1, 0, nQ - 1)).sigma) : 0;
  const rankR = nR > 0 ? rankOf(svdOf(scaled.subMatrix(0, scaled.rows - 1, nQ, d - 1)).sigma) : 0;
  const Qok = rank === rankR + nQ; // no null-space direction moves Q_w
  const Rok = rank === rankQ + nR;
  const sigmaMin = full.sigma[d - 1] ?? 0;
  const condition = sigmaMin > 0 ? sigmaMax / sigmaMin : Infinity;

  // entries moved by the null space
  const undetermined: string[] = [];
  if (rank < d) {
    for (let k = 0; k < d; k++) {
      let weight = 0;
      for (let c = 0; c < d; c++) if (!(full.sigma[c] > threshold)) weight += full.V.get(k, c) ** 2;
      if (sqrt(weight) > 1e-6) {
        const u = system.unknowns[k];
        undetermined.push(`${u.of}[${u.i}][${u.j}]`);
      }
    }
  }
  let reason: string;
  if (Qok && Rok) {
    reason =
      `Q and R are determined by the autocovariances: the ALS matrix has full column rank (${rank} of ${d} unknowns, ` +
      `condition ${formatCondition(condition)} with unit-norm columns).`;
  } else {
    const what = !Qok && !Rok ? 'determine neither Q nor R' : !Qok ? 'do not determine Q' : 'do not determine R';
    reason =
      `The data ${what}: the ALS matrix has rank ${rank} for ${d} unknowns, and changes of ` +
      `${undetermined.join(', ')} along its null space leave every innovation autocovariance unchanged ` +
      '(Rajamani & Rawlings 2009: unique only when the ALS matrix has full column rank). ' +
      'The estimate shown is one of many that fit equally well; estimate fewer unknowns ' +
      "(estimateQ: 'diagonal', a G with independent columns) or measure more components.";
  }
  return {
    rank,
    condition,
    singularValues: full.sigma,
    identifiable: { Q: Qok, R: Rok, reason, undetermined },
  };
}

function formatCondition(c: number): string {
  return Number.isFinite(c) ? c.toExponential(2) : '∞';
}

/** Singular values (descending) and right singular vectors of X, padding rows so that the full V is returned. */
function svdOf(X: Matrix): { sigma: number[]; V: Matrix } {
  let Y = X;
  if (X.rows < X.columns) {
    Y = new Matrix(X.columns, X.columns);
    Y.setSubMatrix(X, 0, 0);
  }
  const svd = new SVD(Y, { computeLeftSingularVectors: false, computeRightSingularVectors: true, autoTranspose: false });
  return { sigma: svd.diagonal.slice(0, X.columns), V: svd.rightSingularVectors };
}

// ---------------------------------------------------------------------------
// Block bootstrap

/** Innovations after burn-in, one row-major Float64Array per segment. */
interface PackedInnovations {
  p: number;
  segments: Float64Array[];
  lengths: number[];
  samples: number;
}

function packSegments(segments: ReadonlyArray<InnovationSegment>, pIn: number | undefined, burnIn: number): PackedInnovations {
  if (!Array.isArray(segments) || segments.length === 0) throw new AlsError('innovations: expected a non-empty array of segments');
  let p = pIn;
  const packed: Float64Array[] = [];
  const lengths: number[] = [];
  segments.forEach((segment, s) => {
    if (!segment || typeof segment.length !== 'number') throw new AlsError(`innovations: segment ${s} is not an array of vectors`);
    const n = max(0, segment.length - burnIn);
    if (p === undefined && segment.length > 0) p = segment[0].length;
    const pp = p ?? 0;
    const out = new Float64Array(n * pp);
    for (let t = 0; t < segment.length; t++) {
      const y = segment[t];
      if (!y || y.length !== pp) {
        throw new AlsError(`innovations: segment ${s}, sample ${t} has ${y ? y.length : 'no'} components, expected p = ${pp}`);
      }
      for (let i = 0; i < pp; i++) {
        if (!Number.isFinite(y[i])) throw new AlsError(`innovations: segment ${s}, sample ${t}, component ${i} is not finite`);
        if (t >= burnIn) out[(t - burnIn) * pp + i] = y[i];
      }
    }
    if (n > 0) {
      packed.push(out);
      lengths.push(n);
    }
  });
  if (p === undefined || p < 1) throw new AlsError('innovations: no samples');
  return { p, segments: packed, lengths, samples: lengths.reduce((a, v) => a + v, 0) };
}

function autocovariancesOfPacked(data: PackedInnovations, N: number): SampleAutocovariances {
  const { p } = data;
  if (!Number.isInteger(N) || N < 1) throw new AlsError(`lags N must be an integer ≥ 1, got ${N}`);
  const sums = new Float64Array(N * p * p); // index j·p² + i·p + c: Σ 𝒴_{t+j,i} 𝒴_{t,c}
  const pairs = new Array<number>(N).fill(0);
  data.segments.forEach((Y, s) => {
    const n = data.lengths[s];
    for (let j = 0; j < N && j < n; j++) {
      pairs[j] += n - j;
      const base = j * p * p;
      for (let t = 0; t + j < n; t++) {
        const a = (t + j) * p;
        const c0 = t * p;
        for (let i = 0; i < p; i++) {
          const yi = Y[a + i];
          for (let c = 0; c < p; c++) sums[base + i * p + c] += yi * Y[c0 + c];
        }
      }
    }
  });
  if (pairs[N - 1] === 0) {
    throw new AlsError(`N = ${N} lags: no segment is longer than ${N - 1} samples, so lag ${N - 1} has no pair`);
  }
  return { C: blocksFromSums(sums, pairs, N, p), pairs, samples: data.samples };
}

function blocksFromSums(sums: Float64Array, pairs: ArrayLike<number>, N: number, p: number): number[][][] {
  const C: number[][][] = [];
  for (let j = 0; j < N; j++) {
    const Cj: number[][] = [];
    for (let i = 0; i < p; i++) {
      const row: number[] = [];
      for (let c = 0; c < p; c++) row.push(sums[j * p * p + i * p + c] / pairs[j]);
      Cj.push(row);
    }
    C.push(Cj);
  }
  return C;
}

/**
 * Sums of the lagged products z_t over ranges of t, from prefix sums kept every
 * `stride` samples (memory (n/stride)·N·p²) plus at most stride−1 products
 * recomputed at each end.
 */
class LaggedProductSums {
  private readonly prefix: Float64Array[] = [];
  private readonly stride: number;
  private readonly dim: number;
  private readonly tmpA: Float64Array;
  private readonly tmpB: Float64Array;

  constructor(
    private readonly data: PackedInnovations,
    private readonly N: number,
  ) {
    const { p } = data;
    this.dim = N * p * p;
    const budget = 1 << 21; // doubles (16 MB)
    this.stride = max(1, ceil((data.samples * this.dim) / budget));
    this.tmpA = new Float64Array(this.dim);
    this.tmpB = new Float64Array(this.dim);
    data.segments.forEach((_, s) => {
      const n = data.lengths[s];
      const checkpoints = floor(n / this.stride) + 1;
      const P = new Float64Array(checkpoints * this.dim);
      const running = new Float64Array(this.dim);
      for (let t = 0; t < n; t++) {
        if (t % this.stride === 0) P.set(running, (t / this.stride) * this.dim);
        this.addProducts(s, t, running);
      }
      if (n % this.stride === 0) P.set(running, (n / this.stride) * this.dim);
      this.prefix.push(P);
    });
  }

  /** out += z_t (lag products with t + j inside the segment). */
  private addProducts(s: number, t: number, out: Float64Array): void {
    const { p } = this.data;
    const Y = this.data.segments[s];
    const n = this.data.lengths[s];
    const c0 = t * p;
    for (let j = 0; j < this.N && t + j < n; j++) {
      const a = (t + j) * p;
      const base = j * p * p;
      for (let i = 0; i < p; i++) {
        const yi = Y[a + i];
        for (let c = 0; c < p; c++) out[base + i * p + c] += yi * Y[c0 + c];
      }
    }
  }

  private prefixAt(s: number, t: number, out: Float64Array): void {
    const k = floor(t / this.stride);
    out.set(this.prefix[s].subarray(k * this.dim, (k + 1) * this.dim));
    for (let u = k * this.stride; u < t; u++) this.addProducts(s, u, out);
  }

  /** out += Σ_{t=a}^{b−1} z_t in segment s; pairs[j] += number of lag-j products in the range. */
  addRange(s: number, a: number, b: number, out: Float64Array, pairs: number[]): void {
    this.prefixAt(s, b, this.tmpB);
    this.prefixAt(s, a, this.tmpA);
    for (let k = 0; k < this.dim; k++) out[k] += this.tmpB[k] - this.tmpA[k];
    const n = this.data.lengths[s];
    for (let j = 0; j < this.N; j++) pairs[j] += max(0, min(b, n - j) - a);
  }
}

function blockBootstrap(
  system: AlsSystem,
  solver: ConstrainedAls,
  data: PackedInnovations,
  options: AlsBootstrapOptions,
  pointSolution: ConstrainedSolution,
): AlsIntervals {
  const { N, p, g } = system;
  const { replicates, seed } = options;
  const level = options.level ?? 0.9;
  if (!Number.isInteger(replicates) || replicates < 10) throw new AlsError(`bootstrap.replicates must be an integer ≥ 10, got ${replicates}`);
  if (!Number.isFinite(seed)) throw new AlsError(`bootstrap.seed must be a finite number, got ${seed}`);
  if (!(level > 0 && level < 1)) throw new AlsError(`bootstrap.level must be in (0, 1), got ${level}`);
  const blockLength = options.blockLength ?? defaultBlockLength(data.samples, N, system.spectralRadius);
  if (!Number.isInteger(blockLength) || blockLength < 1) throw new AlsError(`bootstrap.blockLength must be an integer ≥ 1, got ${blockLength}`);

  const sums = new LaggedProductSums(data, N);
  // every admissible block (segment s, start a), block length min(ℓ, n_s): blocks never cross a segment boundary
  const starts: { s: number; a: number; length: number }[] = [];
  data.lengths.forEach((n, s) => {
    const length = min(blockLength, n);
    for (let a = 0; a + length <= n; a++) starts.push({ s, a, length });
  });
  const random = new Xoshiro128(seed);
  const draws: { Q: number[][]; R: number[][] }[] = [];
  const z = new Float64Array(N * p * p);
  for (let r = 0; r < replicates; r++) {
    z.fill(0);
    const pairs = new Array<number>(N).fill(0);
    let covered = 0;
    while (covered < data.samples) {
      const block = starts[random.below(starts.length)];
      sums.addRange(block.s, block.a, block.a + block.length, z, pairs);
      covered += block.length;
    }
    // a replicate whose blocks are all shorter than N has no pair at some lag: reuse the lag's full-sample pairing weight 0 → skip
    if (pairs.some((c) => c === 0)) continue;
    const bStar = autocovarianceVector(blocksFromSums(z, pairs, N, p));
    const solution = solver.solve(bStar, pointSolution.warm);
    draws.push(covariancesFromTheta(system, solution.theta));
  }
  if (draws.length < 10) throw new AlsError('bootstrap: too few usable replicates (blocks shorter than the lags); use longer segments or blocks');
  const lowerP = (1 - level) / 2;
  const upperP = 1 - lowerP;
  const interval = (size: number, pick: (d: { Q: number[][]; R: number[][] }) => number[][]): EntryIntervals => {
    const lower = zeros(size, size);
    const upper = zeros(size, size);
    for (let i = 0; i < size; i++) {
      for (let j = 0; j < size; j++) {
        const values = draws.map((d) => pick(d)[i][j]).sort((a, b) => a - b);
        lower[i][j] = quantileSorted(values, lowerP);
        upper[i][j] = quantileSorted(values, upperP);
      }
    }
    return { lower, upper };
  };
  return {
    level,
    replicates: draws.length,
    blockLength,
    seed,
    Q: interval(g, (d) => d.Q),
    R: interval(p, (d) => d.R),
  };
}

/**
 * Default block length: ⌈n^{1/3}⌉ (the rate of Hall, Horowitz & Jing 1995), but no shorter than
 * the memory of the lagged products, N − 1 lags plus τ = ⌈ln 0.01 / ln ρ(𝒜)⌉ steps for the
 * innovation autocorrelation to decay to 1 % (our heuristic: with slow filters n^{1/3} blocks
 * cut the dependence and the intervals come out too narrow), and at most n/10 (≥ 10 blocks).
 */
export function defaultBlockLength(samples: number, N: number, spectralRadius: number): number {
  const tau = spectralRadius > 0 ? ceil(log(0.01) / log(spectralRadius)) : 1;
  const memory = N - 1 + tau;
  return max(1, min(max(ceil(cbrt(samples)), memory), floor(samples / 10)));
}

/** Sample quantile, linear interpolation between order statistics (Hyndman & Fan 1996, type 7). */
function quantileSorted(sorted: number[], prob: number): number {
  const h = (sorted.length - 1) * prob;
  const lo = floor(h);
  const hi = min(lo + 1, sorted.length - 1);
  return sorted[lo] + (h - lo) * (sorted[hi] - sorted[lo]);
}

/** xoshiro128** (Blackman & Vigna, ACM TOMS 47, 2021), seeded through splitmix32. */
class Xoshiro128 {
  private readonly s = new Uint32Array(4);

  constructor(seed: number) {
    let x = seed >>> 0;
    for (let i = 0; i < 4; i++) {
      x = (x + 0x9e3779b9) >>> 0;
      let z = x;
      z = imul(z ^ (z >>> 16), 0x85ebca6b) >>> 0;
      z = imul(z ^ (z >>> 13), 0xc2b2ae35) >>> 0;
      this.s[i] = z ^ (z >>> 16);
    }
  }

  nextUint32(): number {
    const s = this.s;
    const result = imul(rotl(imul(s[1], 5), 7), 9) >>> 0;
    const t = s[1] << 9;
    s[2] ^= s[0];
    s[3] ^= s[1];
    s[1] ^= s[2];
    s[0] ^= s[3];
    s[2] ^= t;
    s[3] = rotl(s[3], 11);
    return result;
  }

  /** Uniform integer in [0, k), k ≤ 2³², without modulo bias (rejection). */
  below(k: number): number {
    const limit = 4294967296 - (4294967296 % k);
    for (;;) {
      const r = this.nextUint32();
      if (r < limit) return r % k;
    }
  }
}

function rotl(x: number, k: number): number {
  return (x << k) | (x >>> (32 - k));
}

// ---------------------------------------------------------------------------
// Model checks and small helpers

function checkedModel(model: AlsModel): { A: Matrix; C: Matrix; G: Matrix; L: Matrix } {
  const A = toMatrix('A', model.A);
  const n = A.rows;
  if (A.columns !== n) throw new AlsError(`A must be square, got ${A.rows}×${A.columns}`);
  const C = toMatrix('C', model.C);
  if (C.columns !== n) throw new AlsError(`C must have n = ${n} columns (A is ${n}×${n}), got ${C.rows}×${C.columns}`);
  const p = C.rows;
  const G = model.G === undefined ? Matrix.eye(n) : toMatrix('G', model.G);
  if (G.rows !== n) throw new AlsError(`G must have n = ${n} rows, got ${G.rows}×${G.columns}`);
  const gain = toMatrix('L', model.L);
  if (gain.rows !== n || gain.columns !== p) throw new AlsError(`L must be n×p = ${n}×${p}, got ${gain.rows}×${gain.columns}`);
  const form = model.gainForm ?? 'predictor';
  if (form !== 'predictor' && form !== 'filter') throw new AlsError(`gainForm must be 'predictor' or 'filter', got ${String(form)}`);
  // filter gain M → predictor gain L = A·M
  const L = form === 'filter' ? A.mmul(gain) : gain;
  return { A, C, G, L };
}

function toMatrix(name: string, rows: Rows): Matrix {
  if (!Array.isArray(rows) || rows.length === 0) throw new AlsError(`${name} must be a non-empty array of rows`);
  const cols = rows[0]?.length ?? 0;
  if (cols === 0) throw new AlsError(`${name} must have at least one column`);
  const M = new Matrix(rows.length, cols);
  rows.forEach((row, i) => {
    if (!row || row.length !== cols) throw new AlsError(`${name}: row ${i} has ${row ? row.length : 0} entries, expected ${cols}`);
    for (let j = 0; j < cols; j++) {
      if (!Number.isFinite(row[j])) throw new AlsError(`${name}[${i}][${j}] is not finite`);
      M.set(i, j, row[j]);
    }
  });
  return M;
}

function checkStructure(name: string, s: string): void {
  if (s !== 'full' && s !== 'diagonal') throw new AlsError(`${name} must be 'full' or 'diagonal', got ${String(s)}`);
}

/** D (k² × k(k+1)/2, vec X = D vech X, vech column-major lower triangle) or the diagonal selection E (k² × k). */
function parametrization(k: number, structure: CovarianceStructure): Matrix {
  if (structure === 'diagonal') {
    const E = new Matrix(k * k, k);
    for (let i = 0; i < k; i++) E.set(i * k + i, i, 1);
    return E;
  }
  const D = new Matrix(k * k, (k * (k + 1)) / 2);
  let col = 0;
  for (let j = 0; j < k; j++) {
    for (let i = j; i < k; i++) {
      D.set(j * k + i, col, 1); // vec index of X_ij (column-major)
      D.set(i * k + j, col, 1); // and of X_ji
      col++;
    }
  }
  return D;
}

function unknownList(of: 'Q' | 'R', k: number, structure: CovarianceStructure): AlsUnknown[] {
  const list: AlsUnknown[] = [];
  if (structure === 'diagonal') for (let i = 0; i < k; i++) list.push({ of, i, j: i });
  else for (let j = 0; j < k; j++) for (let i = j; i < k; i++) list.push({ of, i, j });
  return list;
}

function spectralRadiusOf(X: Matrix): number {
  const e = new EigenvalueDecomposition(X);
  return e.realEigenvalues.reduce((r, re, i) => max(r, hypot(re, e.imaginaryEigenvalues[i])), 0);
}

function zeros(r: number, c: number): number[][] {
  return Array.from({ length: r }, () => new Array<number>(c).fill(0));
}
