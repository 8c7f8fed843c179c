/**
 * Robustness margins of a discrete-time loop broken at the plant input: classical
 * gain and phase margins from a frequency sweep, and the balanced (skew σ = 0)
 * disk margin.
 *
 * Sources
 * - Disk margins: Seiler, Packard & Gahinet, "An introduction to disk margins",
 *   IEEE Control Systems Magazine 40(5), 2020. The disk
 *     D(α, σ) = { (1 + (1 − σ)/2·δ) / (1 − (1 + σ)/2·δ) : δ ∈ ℂ, |δ| < α }
 *   of multiplicative gain-and-phase variations f, and α_max = 1/‖S + (σ − 1)/2·I‖∞.
 * - Observer-based compensators in one-step predictor and current (filter) form:
 *   Franklin, Powell & Workman, "Digital Control of Dynamic Systems", 3rd ed.
 *   (1998), the chapter on state-space design (chapter number from memory).
 * - Loop-at-a-time margins and the multivariable sensitivity S = (I + L)⁻¹:
 *   Skogestad & Postlethwaite, "Multivariable Feedback Control", 2nd ed. (2005).
 * - Root and peak refinement: Brent, "Algorithms for Minimization without
 *   Derivatives" (1973): the zero finder of ch. 4 and the local minimiser of ch. 5.
 * - Complex arithmetic is local: G(e^{jθ}) by complex Gaussian elimination with
 *   partial pivoting (Golub & Van Loan, "Matrix Computations", 4th ed., 2013, §3.4);
 *   ml-matrix for the closed-loop eigenvalues and σ̄ with more than two inputs.
 *
 * Conventions
 * - Frequencies ω in rad/s with z = e^{jωΔt}; the sweep runs over θ = ωΔt ∈ (0, π],
 *   log-spaced from θ_min up to π (Nyquist, ω = π/Δt) exactly, with z = −1 there.
 * - A margin that no crossing limits is ±Infinity (JSON.stringify writes null).
 * - Negative feedback: the loop L(z) maps the signal injected at the plant input
 *   to the signal fed back with its sign flipped (the controller's −u), so the
 *   closed loop is stable when det(I + L) has no zeros outside the unit circle
 *   (checked here directly on the closed-loop state matrix).
 *
 * The loops
 * - Plant P(z) = C (zI − A)⁻¹ B, states x (n), inputs u (m), outputs y (p).
 * - State feedback (LQR), u = −K x:  L(z) = K (zI − A)⁻¹ B.
 * - Predictor estimator  x̂ₖ₊₁ = A x̂ₖ + B uₖ + L (yₖ − C x̂ₖ), uₖ = −K x̂ₖ:
 *     x̂ₖ₊₁ = (A − BK − LC) x̂ₖ + L yₖ,  −uₖ = K x̂ₖ
 *     ⇒ Kc(z) = K (zI − A + BK + LC)⁻¹ L   (no feed-through).
 * - Current (filter) estimator with gain M, x̄ the prediction:
 *     x̂ₖ = x̄ₖ + M (yₖ − C x̄ₖ),  uₖ = −K x̂ₖ,  x̄ₖ₊₁ = A x̂ₖ + B uₖ = (A − BK) x̂ₖ
 *     ⇒ x̄ₖ₊₁ = (A − BK)(I − MC) x̄ₖ + (A − BK) M yₖ,  −uₖ = K (I − MC) x̄ₖ + K M yₖ
 *     ⇒ Kc(z) = K (I − MC) (zI − (A − BK)(I − MC))⁻¹ (A − BK) M + K M.
 *   (The steady-state Kalman gains relate by L = A·M when both come from the same
 *   predicted covariance.)
 * - Loop at the plant input: Li(z) = Kc(z)·P(z) (m × m).
 *
 * Margins (each meaningful only when the nominal closed loop is stable)
 * - Gain margin: at a phase crossover ω_p, Li(e^{jω_pΔt}) = r < 0 real; the loop
 *   gain k·Li makes 1 + k r = 0 at k = −1/r. Upper margin: the smallest such k > 1;
 *   lower margin: the largest k < 1 (−∞ dB when there is none). Crossovers at
 *   ω = 0 (when Li(1) is finite) and at Nyquist count.
 * - Phase margin: at a gain crossover |Li| = 1, the smallest phase change e^{jφ}
 *   reaching −1 is |φ| = 180° − |∠Li| (∠ in (−180°, 180°]); the margin is the
 *   smallest over all crossovers (+∞ when |Li| never crosses 1).
 * - Disk margin, σ = 0. Perturb L to f·L with f = (1 + δ/2)/(1 − δ/2):
 *     1 + f L = 0 ⇔ (1 − δ/2) + (1 + δ/2) L = 0 ⇔ (1 + L)·[1 − δ·(1 − L)/(2(1 + L))] = 0,
 *   and (1 − L)/(2(1 + L)) = S − 1/2 = (S − T)/2 with S = 1/(1 + L), T = 1 − S. By
 *   the small-gain theorem the loop stays stable for every |δ| < α iff
 *     α ≤ α_max = 1 / sup_ω |S(e^{jωΔt}) − 1/2| = 2 / ‖S − T‖∞.
 *   Real δ = ±α gives the gain range [(1 − α/2)/(1 + α/2), (1 + α/2)/(1 − α/2)]
 *   ([0, ∞) once α ≥ 2); δ = ±jα gives the phase range ±2·atan(α/2).
 * - Several inputs: loop-at-a-time margins per channel i (the other loops closed),
 *   from the scalar loop l_i with S_ii = 1/(1 + l_i) ⇒ l_i = 1/S_ii − 1, and its
 *   disk margin 1/sup|S_ii − 1/2|. The multi-loop disk margin here is
 *   1/sup_ω σ̄(S − I/2): exact for a full complex perturbation, a conservative
 *   lower bound for independent per-channel variations (which would need μ;
 *   not computed).
 *
 * Limits: crossings are found as sign changes between adjacent sweep points, so
 * two crossings closer together than the grid spacing are missed, as is a
 * tangency; increase `points` for very lightly damped loops.
 */
import { EigenvalueDecomposition, LuDecomposition, Matrix, SingularValueDecomposition } from 'ml-matrix';

const { abs, atan, atan2, cos, hypot, log10, max, min, PI, sin, sqrt } = Math;

export type MarginMatrixInput = Matrix | ReadonlyArray<ReadonlyArray<number>>;

/** x_{k+1} = A x_k + B u_k, y_k = C x_k + D u_k. */
export interface StateSpace {
  A: Matrix;
  B: Matrix;
  C: Matrix;
  D: Matrix;
}

/** The estimator the regulator reads: one-step predictor (gain L) or current/filter form (gain M). */
export type EstimatorGain = { form: 'predictor'; L: MarginMatrixInput } | { form: 'filter'; M: MarginMatrixInput };

export interface LoopDesign {
  A: MarginMatrixInput;
  B: MarginMatrixInput;
  /** Needed with an estimator. */
  C?: MarginMatrixInput;
  /** Regulator gain, u = −K x̂ (m × n). */
  K: MarginMatrixInput;
  /** Omitted: the state-feedback (LQR) loop K (zI − A)⁻¹ B. */
  estimator?: EstimatorGain;
  /** Sample time Δt, s. */
  dt: number;
}

export interface SweepOptions {
  /** Points of the log-spaced sweep, Nyquist included (default 2000). */
  points?: number;
  /** Lowest swept frequency, rad/s (default 10⁻⁴·π/Δt). */
  omegaMin?: number;
}

export interface GainMargin {
  /** Upper gain margin, dB ≥ 0 (+∞ when no phase crossover raises the gain to instability). */
  upper: number;
  upperFrequency: number | null;
  /** Lower gain margin, dB ≤ 0 (−∞ when the gain may fall to zero). */
  lower: number;
  lowerFrequency: number | null;
  /** Channel of the worst value (loop-at-a-time); 0 for a single input. */
  upperChannel: number;
  lowerChannel: number;
}

export interface PhaseMargin {
  /** Degrees ≥ 0, +∞ when |L| never crosses 1. */
  value: number;
  frequency: number | null;
  channel: number;
}

export interface DiskMargin {
  /** α_max of the balanced (σ = 0) disk. */
  alpha: number;
  /** Gain factors [(1 − α/2)/(1 + α/2), (1 + α/2)/(1 − α/2)], [0, ∞] once α ≥ 2. */
  gainRange: [number, number];
  gainRangeDb: [number, number];
  /** ±2·atan(α/2), degrees. */
  phaseDeg: number;
  /** Frequency of the peak of |S − 1/2| (σ̄ for several inputs), rad/s. */
  frequency: number;
}

export interface PhaseCrossover {
  frequency: number;
  /** The gain factor k that puts the loop through −1 there (1 + k·L = 0). */
  gain: number;
  db: number;
}

export interface GainCrossover {
  frequency: number;
  /** 180° − |∠L| at this crossover. */
  phaseMarginDeg: number;
}

export interface LoopSweep {
  /** rad/s, log-spaced, ending at π/Δt. */
  omega: number[];
  magnitudeDb: number[];
  /** Unwrapped along the sweep, starting in (−180°, 180°]. */
  phaseDeg: number[];
  /** Real and imaginary parts, for a Nyquist plot. */
  re: number[];
  im: number[];
}

export interface ChannelMargins {
  channel: number;
  gainMarginDb: GainMargin | null;
  phaseMarginDeg: PhaseMargin | null;
  /** Loop-at-a-time disk margin of this channel. */
  diskMargin: DiskMargin | null;
  phaseCrossovers: PhaseCrossover[];
  gainCrossovers: GainCrossover[];
  /** The channel's loop: Li itself for a single input, l_i = 1/S_ii − 1 otherwise. */
  sweep: LoopSweep;
}

export interface LoopMargins {
  dt: number;
  inputs: number;
  closedLoopStable: boolean;
  /** max |λ| of the closed-loop state matrix. */
  closedLoopSpectralRadius: number;
  closedLoopPoles: { re: number; im: number }[];
  /** Worst over channels (loop-at-a-time); null when the closed loop is unstable. */
  gainMarginDb: GainMargin | null;
  phaseMarginDeg: PhaseMargin | null;
  /** Single input: the disk margin of Li. Several: the multi-loop bound 1/sup σ̄(S − I/2). */
  diskMargin: DiskMargin | null;
  channels: ChannelMargins[];
  /** Channel 0's sweep (the loop itself for a single input), for Bode and Nyquist plots. */
  sweep: LoopSweep;
  notes: string[];
}

export class MarginInputError extends Error {
  override name = 'MarginInputError';
}

// ---------------------------------------------------------------------------
// Building the loops

function toMatrix(name: string, value: MarginMatrixInput): Matrix {
  const M = value instanceof Matrix ? value.clone() : new Matrix(value.map((row) => [...row]));
  if (M.rows === 0 || M.columns === 0) throw new MarginInputError(`${name} is empty`);
  for (let i = 0; i < M.rows; i++) {
    for (let j = 0; j < M.columns; j++) {
      if (!Number.isFinite(M.get(i, j))) throw new MarginInputError(`${name}[${i}][${j}] is not a finite number`);
    }
  }
  return M;
}

function expectShape(name: string, M: Matrix, rows: number, columns: number, meaning: string): void {
  if (M.rows !== rows || M.columns !== columns) {
    throw new MarginInputError(`${name} is ${M.rows}×${M.columns}, expected ${rows}×${columns} (${meaning})`);
  }
}

function block(rows: Matrix[][]): Matrix {
  const heights = rows.map((r) => r[0].rows);
  const widths = rows[0].map((M) => M.columns);
  const out = Matrix.zeros(
    heights.reduce((a, b) => a + b, 0),
    widths.reduce((a, b) => a + b, 0),
  );
  let r0 = 0;
  rows.forEach((row, i) => {
    let c0 = 0;
    row.forEach((M, j) => {
      if (M.rows !== heights[i] || M.columns !== widths[j]) throw new Error('block: inconsistent block sizes');
      out.setSubMatrix(M, r0, c0);
      c0 += widths[j];
    });
    r0 += heights[i];
  });
  return out;
}

interface CheckedPlant {
  A: Matrix;
  B: Matrix;
  C: Matrix | null;
  K: Matrix;
  n: number;
  m: number;
}

function checkPlant(design: Omit<LoopDesign, 'dt' | 'estimator'>, needC: boolean): CheckedPlant {
  const A = toMatrix('A', design.A);
  const n = A.rows;
  expectShape('A', A, n, n, 'square, n × n');
  const B = toMatrix('B', design.B);
  if (B.rows !== n) throw new MarginInputError(`B has ${B.rows} rows, expected n = ${n} (rows of A)`);
  const m = B.columns;
  const K = toMatrix('K', design.K);
  expectShape('K', K, m, n, `inputs m = ${m} × states n = ${n}`);
  let C: Matrix | null = null;
  if (design.C !== undefined) {
    C = toMatrix('C', design.C);
    if (C.columns !== n) throw new MarginInputError(`C has ${C.columns} columns, expected n = ${n} (rows of A)`);
  } else if (needC) {
    throw new MarginInputError('C is required for a loop with an estimator');
  }
  return { A, B, C, K, n, m };
}

/** L(z) = K (zI − A)⁻¹ B, the loop of state feedback u = −K x broken at the plant input. */
export function stateFeedbackLoop(plant: { A: MarginMatrixInput; B: MarginMatrixInput; K: MarginMatrixInput }): StateSpace {
  const { A, B, K, m } = checkPlant(plant, false);
  return { A, B, C: K, D: Matrix.zeros(m, m) };
}

/**
 * Kc(z), the observer-based controller from y to −u (m × p): predictor form
 * K (zI − A + BK + LC)⁻¹ L, or filter form K(I − MC)(zI − (A − BK)(I − MC))⁻¹(A − BK)M + KM.
 */
export function observerController(design: Omit<LoopDesign, 'dt'> & { estimator: EstimatorGain }): StateSpace {
  const { A, B, C, K, n } = checkPlant(design, true);
  const Cm = C as Matrix;
  const p = Cm.rows;
  const ABK = A.clone().sub(B.mmul(K)); // A − BK
  if (design.estimator.form === 'predictor') {
    const L = toMatrix('L', design.estimator.L);
    expectShape('L', L, n, p, `states n = ${n} × outputs p = ${p}`);
    return { A: ABK.clone().sub(L.mmul(Cm)), B: L, C: K, D: Matrix.zeros(K.rows, p) };
  }
  const M = toMatrix('M', design.estimator.M);
  expectShape('M', M, n, p, `states n = ${n} × outputs p = ${p}`);
  const IMC = Matrix.eye(n).sub(M.mmul(Cm)); // I − MC
  return { A: ABK.mmul(IMC), B: ABK.mmul(M), C: K.mmul(IMC), D: K.mmul(M) };
}

/** Series connection y = G2(G1(u)): x = [x1; x2]. */
function series(G1: StateSpace, G2: StateSpace): StateSpace {
  const n1 = G1.A.rows;
  const n2 = G2.A.rows;
  return {
    A: block([
      [G1.A, Matrix.zeros(n1, n2)],
      [G2.B.mmul(G1.C), G2.A],
    ]),
    B: block([[G1.B], [G2.B.mmul(G1.D)]]),
    C: block([[G2.D.mmul(G1.C), G2.C]]),
    D: G2.D.mmul(G1.D),
  };
}

/**
 * The loop broken at the plant input, Li(z) = Kc(z)·P(z) with an estimator, or
 * K (zI − A)⁻¹ B without one; states [x; controller state].
 */
export function plantInputLoop(design: Omit<LoopDesign, 'dt'>): StateSpace {
  if (!design.estimator) return stateFeedbackLoop(design);
  const { A, B, C } = checkPlant(design, true);
  const Cm = C as Matrix;
  const P: StateSpace = { A, B, C: Cm, D: Matrix.zeros(Cm.rows, B.columns) };
  return series(P, observerController({ ...design, estimator: design.estimator }));
}

function checkStateSpace(sys: StateSpace): { n: number; m: number; p: number } {
  const n = sys.A.rows;
  expectShape('loop A', sys.A, n, n, 'square');
  const m = sys.B.columns;
  if (sys.B.rows !== n) throw new MarginInputError(`loop B has ${sys.B.rows} rows, expected ${n}`);
  const p = sys.C.rows;
  expectShape('loop C', sys.C, p, n, `outputs × states ${n}`);
  expectShape('loop D', sys.D, p, m, `outputs ${p} × inputs ${m}`);
  return { n, m, p };
}

// ---------------------------------------------------------------------------
// Frequency response

interface Complex {
  re: number;
  im: number;
}

/**
 * G(e^{jθ}) = D + C (e^{jθ} I − A)⁻¹ B, row-major p × m; null where e^{jθ}I − A is
 * singular. The complex system (zI − A) X = B is solved by Gaussian elimination with
 * partial pivoting on the modulus (Golub & Van Loan, "Matrix Computations", 4th ed.,
 * 2013, §3.4), written here on typed arrays: one solve per frequency, thousands per sweep.
 */
class ResponseAt {
  readonly n: number;
  readonly m: number;
  readonly p: number;
  private readonly A: Float64Array;
  private readonly B: Float64Array;
  private readonly C: Float64Array;
  private readonly D: Float64Array;
  // work arrays: E = zI − A (n × n), X (n × m), real and imaginary parts
  private readonly Er: Float64Array;
  private readonly Ei: Float64Array;
  private readonly Xr: Float64Array;
  private readonly Xi: Float64Array;

  constructor(sys: StateSpace) {
    ({ n: this.n, m: this.m, p: this.p } = checkStateSpace(sys));
    const flat = (M: Matrix) => Float64Array.from(M.to1DArray());
    [this.A, this.B, this.C, this.D] = [sys.A, sys.B, sys.C, sys.D].map(flat);
    this.Er = new Float64Array(this.n * this.n);
    this.Ei = new Float64Array(this.n * this.n);
    this.Xr = new Float64Array(this.n * this.m);
    this.Xi = new Float64Array(this.n * this.m);
  }

  theta(theta: number): { re: Float64Array; im: Float64Array } | null {
    const { n, m, p, Er, Ei, Xr, Xi } = this;
    // z = e^{jθ}, exact at θ = 0 and θ = π
    const c = theta === 0 ? 1 : theta === PI ? -1 : cos(theta);
    const s = theta === 0 || theta === PI ? 0 : sin(theta);
    for (let k = 0; k < n * n; k++) {
      Er[k] = -this.A[k];
      Ei[k] = 0;
    }
    for (let i = 0; i < n; i++) {
      Er[i * n + i] += c;
      Ei[i * n + i] = s;
    }
    Xr.set(this.B);
    Xi.fill(0);
    // forward elimination: row k's pivot is the largest |E_ik|, i ≥ k
    for (let k = 0; k < n; k++) {
      let pivot = k;
      let size = hypot(Er[k * n + k], Ei[k * n + k]);
      for (let i = k + 1; i < n; i++) {
        const v = hypot(Er[i * n + k], Ei[i * n + k]);
        if (v > size) {
          size = v;
          pivot = i;
        }
      }
      if (size === 0) return null;
      if (pivot !== k) {
        swapRows(Er, n, k, pivot, k);
        swapRows(Ei, n, k, pivot, k);
        swapRows(Xr, m, k, pivot, 0);
        swapRows(Xi, m, k, pivot, 0);
      }
      // 1/E_kk
      const d = Er[k * n + k] * Er[k * n + k] + Ei[k * n + k] * Ei[k * n + k];
      const ir = Er[k * n + k] / d;
      const ii = -Ei[k * n + k] / d;
      for (let i = k + 1; i < n; i++) {
        // l = E_ik / E_kk; row_i −= l·row_k
        const lr = Er[i * n + k] * ir - Ei[i * n + k] * ii;
        const li = Er[i * n + k] * ii + Ei[i * n + k] * ir;
        if (lr === 0 && li === 0) continue;
        for (let j = k + 1; j < n; j++) {
          const ar = Er[k * n + j];
          const ai = Ei[k * n + j];
          Er[i * n + j] -= lr * ar - li * ai;
          Ei[i * n + j] -= lr * ai + li * ar;
        }
        for (let j = 0; j < m; j++) {
          const br = Xr[k * m + j];
          const bi = Xi[k * m + j];
          Xr[i * m + j] -= lr * br - li * bi;
          Xi[i * m + j] -= lr * bi + li * br;
        }
      }
    }
    // back substitution
    for (let k = n - 1; k >= 0; k--) {
      const d = Er[k * n + k] * Er[k * n + k] + Ei[k * n + k] * Ei[k * n + k];
      const ir = Er[k * n + k] / d;
      const ii = -Ei[k * n + k] / d;
      for (let j = 0; j < m; j++) {
        let br = Xr[k * m + j];
        let bi = Xi[k * m + j];
        for (let q = k + 1; q < n; q++) {
          const ar = Er[k * n + q];
          const ai = Ei[k * n + q];
          const xr = Xr[q * m + j];
          const xi = Xi[q * m + j];
          br -= ar * xr - ai * xi;
          bi -= ar * xi + ai * xr;
        }
        Xr[k * m + j] = br * ir - bi * ii;
        Xi[k * m + j] = br * ii + bi * ir;
      }
    }
    const re = Float64Array.from(this.D);
    const im = new Float64Array(p * m);
    for (let i = 0; i < p; i++) {
      for (let j = 0; j < m; j++) {
        let r = 0;
        let q = 0;
        for (let k = 0; k < n; k++) {
          const Cik = this.C[i * n + k];
          r += Cik * Xr[k * m + j];
          q += Cik * Xi[k * m + j];
        }
        re[i * m + j] += r;
        im[i * m + j] = q;
      }
    }
    for (let k = 0; k < re.length; k++) if (!Number.isFinite(re[k]) || !Number.isFinite(im[k])) return null;
    return { re, im };
  }
}

function swapRows(X: Float64Array, columns: number, a: number, b: number, from: number): void {
  for (let j = from; j < columns; j++) {
    const t = X[a * columns + j];
    X[a * columns + j] = X[b * columns + j];
    X[b * columns + j] = t;
  }
}

export interface ComplexMatrix {
  re: number[][];
  im: number[][];
}

/** G(e^{jωΔt}) at each ω (rad/s); entries are NaN where the resolvent is singular (a pole on the unit circle). */
export function frequencyResponse(sys: StateSpace, omega: readonly number[], dt: number): ComplexMatrix[] {
  assertDt(dt);
  const G = new ResponseAt(sys);
  return omega.map((w) => {
    const theta = thetaOf(w, dt);
    const g = G.theta(theta);
    const re: number[][] = [];
    const im: number[][] = [];
    for (let i = 0; i < G.p; i++) {
      re.push([]);
      im.push([]);
      for (let j = 0; j < G.m; j++) {
        re[i].push(g ? g.re[i * G.m + j] : NaN);
        im[i].push(g ? g.im[i * G.m + j] : NaN);
      }
    }
    return { re, im };
  });
}

function assertDt(dt: number): void {
  if (!(dt > 0) || !Number.isFinite(dt)) throw new MarginInputError(`dt must be a positive finite sample time, got ${dt}`);
}

/** θ = ωΔt, snapped to π at the Nyquist frequency so that z = −1 exactly. */
function thetaOf(omega: number, dt: number): number {
  const theta = omega * dt;
  return abs(theta - PI) <= 4 * Number.EPSILON * PI ? PI : theta;
}

// ---------------------------------------------------------------------------
// Brent (1973): zero (ch. 4) and localmin (ch. 5)

/** A zero of f in [a, b] given f(a)·f(b) ≤ 0. */
function brentZero(f: (x: number) => number, a: number, b: number, fa: number, fb: number): number {
  const eps = Number.EPSILON;
  let c = a;
  let fc = fa;
  let d = b - a;
  let e = d;
  for (let iteration = 0; iteration < 200; iteration++) {
    if ((fb > 0 && fc > 0) || (fb < 0 && fc < 0)) {
      c = a;
      fc = fa;
      d = b - a;
      e = d;
    }
    if (abs(fc) < abs(fb)) {
      a = b;
      b = c;
      c = a;
      fa = fb;
      fb = fc;
      fc = fa;
    }
    const tol = 2 * eps * abs(b);
    const mid = 0.5 * (c - b);
    if (abs(mid) <= tol || fb === 0) return b;
    if (abs(e) < tol || abs(fa) <= abs(fb)) {
      d = mid;
      e = d;
    } else {
      let s = fb / fa;
      let p: number;
      let q: number;
      if (a === c) {
        p = 2 * mid * s; // secant
        q = 1 - s;
      } else {
        q = fa / fc; // inverse quadratic interpolation
        const r = fb / fc;
        p = s * (2 * mid * q * (q - r) - (b - a) * (r - 1));
        q = (q - 1) * (r - 1) * (s - 1);
      }
      if (p > 0) q = -q;
      else p = -p;
      s = e;
      e = d;
      if (2 * p < 3 * mid * q - abs(tol * q) && p < abs(0.5 * s * q)) {
        d = p / q;
      } else {
        d = mid;
        e = d;
      }
    }
    a = b;
    fa = fb;
    b += abs(d) > tol ? d : mid > 0 ? tol : -tol;
    fb = f(b);
  }
  return b;
}

/** A local minimum of f on [a, b] (golden section with parabolic steps). */
function brentMinimum(f: (x: number) => number, a: number, b: number): { x: number; fx: number } {
  const golden = 0.5 * (3 - sqrt(5));
  const eps = sqrt(Number.EPSILON);
  let v = a + golden * (b - a);
  let w = v;
  let x = v;
  let d = 0;
  let e = 0;
  let fx = f(x);
  let fv = fx;
  let fw = fx;
  for (let iteration = 0; iteration < 200; iteration++) {
    const xm = 0.5 * (a + b);
    const tol1 = eps * abs(x) + 1e-300;
    const tol2 = 2 * tol1;
    if (abs(x - xm) <= tol2 - 0.5 * (b - a)) break;
    let useGolden = true;
    if (abs(e) > tol1) {
      let r = (x - w) * (fx - fv);
      let q = (x - v) * (fx - fw);
      let p = (x - v) * q - (x - w) * r;
      q = 2 * (q - r);
      if (q > 0) p = -p;
      q = abs(q);
      r = e;
      e = d;
      if (!(abs(p) >= abs(0.5 * q * r) || p <= q * (a - x) || p >= q * (b - x))) {
        d = p / q; // parabolic step
        const u = x + d;
        if (u - a < tol2 || b - u < tol2) d = xm - x >= 0 ? tol1 : -tol1;
        useGolden = false;
      }
    }
    if (useGolden) {
      e = x >= xm ? a - x : b - x;
      d = golden * e;
    }
    const u = x + (abs(d) >= tol1 ? d : d >= 0 ? tol1 : -tol1);
    const fu = f(u);
    if (fu <= fx) {
      if (u >= x) a = x;
      else b = x;
      v = w;
      fv = fw;
      w = x;
      fw = fx;
      x = u;
      fx = fu;
    } else {
      if (u < x) a = u;
      else b = u;
      if (fu <= fw || w === x) {
        v = w;
        fv = fw;
        w = u;
        fw = fu;
      } else if (fu <= fv || v === x || v === w) {
        v = u;
        fv = fu;
      }
    }
  }
  return { x, fx };
}

// ---------------------------------------------------------------------------
// Small complex helpers

/** 1/z − 1, the loop-at-a-time l_i from S_ii. */
function loopFromSensitivity(S: Complex): Complex {
  const d = S.re * S.re + S.im * S.im;
  return { re: S.re / d - 1, im: -S.im / d };
}

function finiteOrNull(v: Complex): Complex | null {
  return Number.isFinite(v.re) && Number.isFinite(v.im) ? v : null;
}

/** σ̄ of a complex m × m matrix (row-major): closed form for m ≤ 2, else the SVD of the real embedding [[Re, −Im], [Im, Re]]. */
function largestSingularValue(re: Float64Array, im: Float64Array, m: number): number {
  if (m === 1) return hypot(re[0], im[0]);
  if (m === 2) {
    // H = MᴴM = [h11 h12; h̄12 h22]: λmax = (h11 + h22)/2 + √(((h11 − h22)/2)² + |h12|²)
    const h11 = re[0] * re[0] + im[0] * im[0] + re[2] * re[2] + im[2] * im[2];
    const h22 = re[1] * re[1] + im[1] * im[1] + re[3] * re[3] + im[3] * im[3];
    // h12 = Σ_k conj(M_k1)·M_k2
    const h12r = re[0] * re[1] + im[0] * im[1] + re[2] * re[3] + im[2] * im[3];
    const h12i = re[0] * im[1] - im[0] * re[1] + re[2] * im[3] - im[2] * re[3];
    return sqrt((h11 + h22) / 2 + hypot((h11 - h22) / 2, h12r, h12i));
  }
  const E = new Matrix(2 * m, 2 * m);
  for (let i = 0; i < m; i++) {
    for (let j = 0; j < m; j++) {
      E.set(i, j, re[i * m + j]);
      E.set(m + i, m + j, re[i * m + j]);
      E.set(i, m + j, -im[i * m + j]);
      E.set(m + i, j, im[i * m + j]);
    }
  }
  const svd = new SingularValueDecomposition(E, { computeLeftSingularVectors: false, computeRightSingularVectors: false });
  return svd.diagonal[0];
}

function db(gain: number): number {
  return 20 * log10(gain);
}

function degrees(radians: number): number {
  return (radians * 180) / PI;
}

/** Disk of gain and phase variations of a balanced disk margin α (σ = 0). */
export function diskFromAlpha(alpha: number, frequency: number): DiskMargin {
  const h = alpha / 2;
  const gainRange: [number, number] = alpha >= 2 ? [0, Infinity] : [(1 - h) / (1 + h), (1 + h) / (1 - h)];
  return {
    alpha,
    gainRange,
    gainRangeDb: [db(gainRange[0]), db(gainRange[1])],
    phaseDeg: degrees(2 * atan(h)), // ±2·atan(α/2)
    frequency,
  };
}

// ---------------------------------------------------------------------------
// The sweep and the margins

function sweepThetas(points: number, thetaMin: number): number[] {
  const thetas: number[] = [];
  const ratio = log10(PI / thetaMin);
  for (let k = 0; k < points - 1; k++) thetas.push(thetaMin * 10 ** ((ratio * k) / (points - 1)));
  thetas.push(PI);
  return thetas;
}

/** Gain and phase crossovers of a scalar loop l(θ) over a θ grid (which may start at 0). */
function scalarMargins(
  l: (theta: number) => Complex | null,
  grid: number[],
  values: (Complex | null)[],
  dt: number,
): { phaseCrossovers: PhaseCrossover[]; gainCrossovers: GainCrossover[] } {
  const phaseCrossovers: PhaseCrossover[] = [];
  const gainCrossovers: GainCrossover[] = [];
  const addPhaseCrossover = (theta: number, v: Complex) => {
    // l real negative: 1 + k·l = 0 at k = −1/l
    if (!(v.re < 0) || abs(v.im) > 1e-8 * hypot(v.re, v.im)) return;
    const k = -1 / v.re;
    phaseCrossovers.push({ frequency: theta / dt, gain: k, db: db(k) });
  };
  const addGainCrossover = (theta: number, v: Complex) => {
    const phase = degrees(atan2(v.im, v.re)); // (−180°, 180°]
    gainCrossovers.push({ frequency: theta / dt, phaseMarginDeg: 180 - abs(phase) });
  };
  // sin∠l = Im l/|l| changes sign at phase crossovers; |l| − 1 at gain crossovers
  const sinPhase = (v: Complex) => v.im / hypot(v.re, v.im);
  const excess = (v: Complex) => hypot(v.re, v.im) - 1;
  const refine = (a: number, b: number, fa: number, fb: number, g: (v: Complex) => number): { theta: number; v: Complex } | null => {
    const theta = brentZero(
      (t) => {
        const v = l(t);
        return v ? g(v) : NaN;
      },
      a,
      b,
      fa,
      fb,
    );
    const v = l(theta);
    return v && Number.isFinite(theta) ? { theta, v } : null;
  };
  for (let k = 0; k < grid.length; k++) {
    const v = values[k];
    if (!v) continue;
    const endpoint = grid[k] === 0 || grid[k] === PI;
    if (endpoint) addPhaseCrossover(grid[k], v); // l is real at z = ±1
    else if (v.im === 0) addPhaseCrossover(grid[k], v);
    if (excess(v) === 0) addGainCrossover(grid[k], v);
    if (k + 1 >= grid.length || !values[k + 1]) continue;
    const u = values[k + 1] as Complex;
    const [a, b] = [grid[k], grid[k + 1]];
    if (!endpoint && grid[k + 1] !== PI) {
      const [fa, fb] = [sinPhase(v), sinPhase(u)];
      if (fa * fb < 0) {
        const root = refine(a, b, fa, fb, sinPhase);
        if (root) addPhaseCrossover(root.theta, root.v);
      }
    }
    const [ga, gb] = [excess(v), excess(u)];
    if (ga * gb < 0) {
      const root = refine(a, b, ga, gb, excess);
      if (root) addGainCrossover(root.theta, root.v);
    }
  }
  return { phaseCrossovers, gainCrossovers };
}

function worstGain(crossovers: PhaseCrossover[], channel: number): GainMargin {
  const margin: GainMargin = {
    upper: Infinity,
    upperFrequency: null,
    lower: -Infinity,
    lowerFrequency: null,
    upperChannel: channel,
    lowerChannel: channel,
  };
  for (const c of crossovers) {
    if (c.gain > 1 && c.db < margin.upper) {
      margin.upper = c.db;
      margin.upperFrequency = c.frequency;
    }
    if (c.gain < 1 && c.db > margin.lower) {
      margin.lower = c.db;
      margin.lowerFrequency = c.frequency;
    }
  }
  return margin;
}

function worstPhase(crossovers: GainCrossover[], channel: number): PhaseMargin {
  const margin: PhaseMargin = { value: Infinity, frequency: null, channel };
  for (const c of crossovers) {
    if (c.phaseMarginDeg < margin.value) {
      margin.value = c.phaseMarginDeg;
      margin.frequency = c.frequency;
    }
  }
  return margin;
}

/** sup_θ h(θ) over the grid, refined around each local maximum within 10 % of the largest. */
function peak(h: (theta: number) => number, grid: number[], values: number[]): { theta: number; value: number } {
  let best = { theta: grid[0], value: -Infinity };
  values.forEach((v, k) => {
    if (v > best.value) best = { theta: grid[k], value: v };
  });
  const threshold = 0.9 * best.value;
  for (let k = 0; k < grid.length; k++) {
    const v = values[k];
    if (!(v >= threshold)) continue;
    const left = k > 0 ? values[k - 1] : -Infinity;
    const right = k + 1 < grid.length ? values[k + 1] : -Infinity;
    if (v < left || v < right) continue;
    const a = grid[max(0, k - 1)];
    const b = grid[min(grid.length - 1, k + 1)];
    if (b <= a) continue;
    const found = brentMinimum((t) => -h(t), a, b);
    if (-found.fx > best.value) best = { theta: found.x, value: -found.fx };
  }
  return best;
}

function unwrapDegrees(values: number[]): number[] {
  const out: number[] = [];
  let offset = 0;
  values.forEach((v, k) => {
    if (k > 0 && Number.isFinite(v) && Number.isFinite(values[k - 1])) {
      const step = v + offset - out[k - 1];
      offset -= 360 * Math.round(step / 360);
    }
    out.push(v + offset);
  });
  return out;
}

function sweepOf(omega: number[], values: (Complex | null)[]): LoopSweep {
  const re = values.map((v) => (v ? v.re : NaN));
  const im = values.map((v) => (v ? v.im : NaN));
  return {
    omega,
    re,
    im,
    magnitudeDb: values.map((v) => (v ? db(hypot(v.re, v.im)) : Infinity)),
    phaseDeg: unwrapDegrees(values.map((v) => (v ? degrees(atan2(v.im, v.re)) : NaN))),
  };
}

/**
 * Margins of a discrete loop L(z) (m × m, negative feedback u = −L·u) with sample
 * time dt: closed-loop stability, a log-spaced sweep up to π/dt with crossovers
 * refined by Brent's method, loop-at-a-time gain, phase and disk margins per
 * channel, and the disk margin (multi-loop bound for several inputs).
 */
export function loopMargins(loop: StateSpace, dt: number, options: SweepOptions = {}): LoopMargins {
  assertDt(dt);
  const { n, m, p } = checkStateSpace(loop);
  if (m !== p) throw new MarginInputError(`the loop must be square: ${p} outputs, ${m} inputs`);
  const points = options.points ?? 2000;
  if (!Number.isInteger(points) || points < 16) throw new MarginInputError(`points must be an integer ≥ 16, got ${points}`);
  const thetaMin = (options.omegaMin ?? (1e-4 * PI) / dt) * dt;
  if (!(thetaMin > 0 && thetaMin < PI)) throw new MarginInputError(`omegaMin must lie in (0, π/dt), got ${options.omegaMin}`);

  // Closed loop u = −L u: E = (I + D)⁻¹, A_cl = A − B E C; S = (I + L)⁻¹ = E − E C (zI − A_cl)⁻¹ B E
  const IpD = Matrix.eye(m).add(loop.D);
  const luD = new LuDecomposition(IpD);
  if (luD.isSingular()) throw new MarginInputError('I + D is singular: the feedback loop is not well posed');
  const E = luD.solve(Matrix.eye(m));
  const Acl = loop.A.clone().sub(loop.B.mmul(E).mmul(loop.C));
  const sensitivity: StateSpace = { A: Acl, B: loop.B.mmul(E), C: E.mmul(loop.C).mul(-1), D: E };
  const closedLoopPoles: Complex[] = [];
  let closedLoopSpectralRadius = 0;
  if (n > 0) {
    const eig = new EigenvalueDecomposition(Acl);
    eig.realEigenvalues.forEach((re, k) => {
      const im = eig.imaginaryEigenvalues[k];
      closedLoopPoles.push({ re, im });
      closedLoopSpectralRadius = max(closedLoopSpectralRadius, hypot(re, im));
    });
  }
  const closedLoopStable = closedLoopSpectralRadius < 1;

  const Li = new ResponseAt(loop);
  const S = new ResponseAt(sensitivity);
  const thetas = sweepThetas(points, thetaMin);
  const grid = [0, ...thetas];
  const Sgrid = grid.map((t) => S.theta(t));
  const omega = thetas.map((t) => t / dt);
  const notes: string[] = [];

  const channelLoop = (i: number) =>
    m === 1
      ? (t: number): Complex | null => {
          const v = Li.theta(t);
          return v ? { re: v.re[0], im: v.im[0] } : null;
        }
      : (t: number): Complex | null => {
          const v = S.theta(t);
          if (!v) return null;
          return finiteOrNull(loopFromSensitivity({ re: v.re[i * m + i], im: v.im[i * m + i] }));
        };
  const diskDistance = (i: number | null) => (v: { re: Float64Array; im: Float64Array } | null) => {
    if (!v) return NaN;
    if (i !== null) return hypot(v.re[i * m + i] - 0.5, v.im[i * m + i]); // |S_ii − 1/2|
    const re = Float64Array.from(v.re);
    for (let k = 0; k < m; k++) re[k * m + k] -= 0.5;
    return largestSingularValue(re, v.im, m); // σ̄(S − I/2)
  };
  const diskOf = (distance: (v: { re: Float64Array; im: Float64Array } | null) => number): DiskMargin => {
    const top = peak(
      (t) => distance(S.theta(t)),
      grid,
      Sgrid.map((v) => distance(v)),
    );
    return diskFromAlpha(1 / top.value, top.theta / dt);
  };

  const channels: ChannelMargins[] = [];
  for (let i = 0; i < m; i++) {
    const l = channelLoop(i);
    const values = m === 1 ? grid.map((t) => l(t)) : Sgrid.map((v) => (v ? finiteOrNull(loopFromSensitivity({ re: v.re[i * m + i], im: v.im[i * m + i] })) : null));
    const { phaseCrossovers, gainCrossovers } = scalarMargins(l, grid, values, dt);
    channels.push({
      channel: i,
      gainMarginDb: closedLoopStable ? worstGain(phaseCrossovers, i) : null,
      phaseMarginDeg: closedLoopStable ? worstPhase(gainCrossovers, i) : null,
      diskMargin: closedLoopStable ? diskOf(diskDistance(i)) : null,
      phaseCrossovers,
      gainCrossovers,
      sweep: sweepOf(omega, values.slice(1)),
    });
  }

  let gainMarginDb: GainMargin | null = null;
  let phaseMarginDeg: PhaseMargin | null = null;
  let diskMargin: DiskMargin | null = null;
  if (closedLoopStable) {
    gainMarginDb = { ...(channels[0].gainMarginDb as GainMargin) };
    phaseMarginDeg = { ...(channels[0].phaseMarginDeg as PhaseMargin) };
    for (const c of channels.slice(1)) {
      const g = c.gainMarginDb as GainMargin;
      if (g.upper < gainMarginDb.upper) Object.assign(gainMarginDb, { upper: g.upper, upperFrequency: g.upperFrequency, upperChannel: c.channel });
      if (g.lower > gainMarginDb.lower) Object.assign(gainMarginDb, { lower: g.lower, lowerFrequency: g.lowerFrequency, lowerChannel: c.channel });
      const ph = c.phaseMarginDeg as PhaseMargin;
      if (ph.value < phaseMarginDeg.value) phaseMarginDeg = { ...ph };
    }
    diskMargin = m === 1 ? (channels[0].diskMargin as DiskMargin) : diskOf(diskDistance(null));
    if (m > 1) {
      notes.push(
        'Gain and phase margins are loop-at-a-time (one channel varied, the others closed); the disk margin is the multi-loop bound 1/sup σ̄(S − I/2), exact for a full complex perturbation and conservative for independent per-channel variations.',
      );
    }
  } else {
    notes.push(
      `The nominal closed loop is unstable (spectral radius ${closedLoopSpectralRadius.toPrecision(6)} ≥ 1): gain, phase and disk margins are not meaningful and are not reported.`,
    );
  }

  return {
    dt,
    inputs: m,
    closedLoopStable,
    closedLoopSpectralRadius,
    closedLoopPoles,
    gainMarginDb,
    phaseMarginDeg,
    diskMargin,
    channels,
    sweep: channels[0].sweep,
    notes,
  };
}

/** Margins of the loop broken at the plant input for a regulator K with an optional estimator. */
export function plantInputMargins(design: LoopDesign, options: SweepOptions = {}): LoopMargins {
  assertDt(design.dt);
  return loopMargins(plantInputLoop(design), design.dt, options);
}

// ---------------------------------------------------------------------------
// Comparing a current and a proposed design

export interface MarginFloor {
  /** Both sides: upper ≥ +floor dB, lower ≤ −floor dB. */
  gainMarginDb: number;
  phaseMarginDeg: number;
  diskAlpha: number;
}

/**
 * Floors in common use (6 dB gain, 30° phase; a disk α of 0.4, i.e. about
 * ±3.5 dB and ±22.6° together): widespread practice, no published source.
 */
export const DEFAULT_MARGIN_FLOOR: MarginFloor = { gainMarginDb: 6, phaseMarginDeg: 30, diskAlpha: 0.4 };

export type MarginKind = 'stability' | 'gain-upper' | 'gain-lower' | 'phase' | 'disk';

export interface MarginWarning {
  margin: MarginKind;
  /** null when that loop is unstable. */
  current: number | null;
  proposed: number | null;
  floor: number | null;
  /** The proposed value is smaller than the current one (false: already below the floor). */
  reduced: boolean;
  message: string;
}

function format(value: number | null, unit: string): string {
  if (value === null) return 'not meaningful (unstable loop)';
  if (!Number.isFinite(value)) return value > 0 ? `∞ ${unit}` : `-∞ ${unit}`;
  return `${value.toFixed(unit === '' ? 3 : 1)}${unit === '°' || unit === '' ? unit : ' ' + unit}`;
}

/**
 * Plain warnings when the proposed design leaves a margin below its floor:
 * "reduces" when it is smaller than the current design's, "stays below" when the
 * current design was no better. Margins compared are the worst over channels.
 */
export function compareMargins(current: LoopMargins, proposed: LoopMargins, floor: Partial<MarginFloor> = {}): MarginWarning[] {
  const f: MarginFloor = { ...DEFAULT_MARGIN_FLOOR, ...floor };
  const warnings: MarginWarning[] = [];
  if (!proposed.closedLoopStable) {
    warnings.push({
      margin: 'stability',
      current: current.closedLoopSpectralRadius,
      proposed: proposed.closedLoopSpectralRadius,
      floor: null,
      reduced: current.closedLoopStable,
      message: `The proposed design makes the closed loop unstable (spectral radius ${proposed.closedLoopSpectralRadius.toPrecision(4)}${
        current.closedLoopStable ? `, ${current.closedLoopSpectralRadius.toPrecision(4)} now` : '; the current loop is unstable too'
      }).`,
    });
    return warnings;
  }
  // Each margin as "bigger is safer": the lower gain margin by its size in dB.
  const rows: { margin: MarginKind; name: string; unit: string; floor: number; pick: (x: LoopMargins) => number | null }[] = [
    { margin: 'gain-upper', name: 'Upper gain margin', unit: 'dB', floor: f.gainMarginDb, pick: (x) => x.gainMarginDb?.upper ?? null },
    { margin: 'gain-lower', name: 'Lower gain margin', unit: 'dB', floor: f.gainMarginDb, pick: (x) => (x.gainMarginDb ? -x.gainMarginDb.lower : null) },
    { margin: 'phase', name: 'Phase margin', unit: '°', floor: f.phaseMarginDeg, pick: (x) => x.phaseMarginDeg?.value ?? null },
    { margin: 'disk', name: 'Disk margin α', unit: '', floor: f.diskAlpha, pick: (x) => x.diskMargin?.alpha ?? null },
  ];
  for (const row of rows) {
    const now = row.pick(current);
    const next = row.pick(proposed) as number;
    if (!(next < row.floor)) continue;
    const reduced = now === null || (Number.isFinite(now) ? next < now - 1e-9 * max(1, abs(now)) : next < now);
    const sign = row.margin === 'gain-lower' ? -1 : 1;
    const shown = (v: number | null) => format(v === null ? null : sign * v, row.unit);
    const floorShown = format(sign * row.floor, row.unit);
    const message = reduced
      ? `${row.name} ${now === null ? `becomes ${shown(next)} (the current loop is unstable)` : `falls from ${shown(now)} to ${shown(next)}`}, short of the ${floorShown} floor.`
      : `${row.name} stays short of the ${floorShown} floor: ${shown(now)} now, ${shown(next)} proposed.`;
    warnings.push({ margin: row.margin, current: now === null ? null : sign * now, proposed: sign * next, floor: sign * row.floor, reduced, message });
  }
  return warnings;
}
