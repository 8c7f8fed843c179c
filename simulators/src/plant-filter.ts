/**
 * A simulated plant with a discrete Kalman filter running on it: pure, seeded, no I/O.
 *
 * Plant:  x_k = A·x_{k−1} + G·w_k,  w_k ~ N(0, Q_true)
 *         z_k = C·x_k + v_k,        v_k ~ N(0, R_true)   (plus any injected fault)
 * Filter (Kalman, "A new approach to linear filtering and prediction problems", 1960;
 * in the notation of Bar-Shalom, Li & Kirubarajan, "Estimation with Applications to
 * Tracking and Navigation", 2001, §5.2), with its own assumed Q and R:
 *   predict   x̂⁻ = A·x̂,  P⁻ = A·P·Aᵀ + G·Q·Gᵀ
 *   innovate  ν = z − C·x̂⁻,  S = C·P⁻·Cᵀ + R
 *   gain      K = P⁻·Cᵀ·S⁻¹
 *   update    x̂ = x̂⁻ + K·ν,  P = (I − K·C)·P⁻·(I − K·C)ᵀ + K·R·Kᵀ   (Joseph form)
 * Each step emits one innovation sample {seq, t, nu, S} and, when asked, the reference
 * error e = x − x̂ with the filter's P (for NEES). The full Riccati recursion runs every
 * step on small typed arrays (simulators/bench/generator-bench.ts measures its speed).
 */
import { isActive, type ScheduledMeasurementFault } from './faults';
import type { PlantDesign } from './plant-models';
import type { SimulatedSample } from './payload';
import { SeededRandom } from './random';
import {
  cholesky,
  choleskySolveInPlace,
  fromRows,
  multiply,
  multiplyTransposed,
  multiplyVector,
  symmetrize,
  toRows,
} from './small-matrix';

export interface PlantFilterOptions {
  design: PlantDesign;
  seed: number;
  /** Measurement and filter faults, each on its own schedule. */
  faults?: readonly ScheduledMeasurementFault[];
  /** Epoch milliseconds of the start (sample 0); schedules in seconds count from here. Default 0. */
  startTime?: number;
  /** Sequence number of the first sample (default 1). */
  firstSeq?: number;
  /** Emit e and P with every sample (default true). */
  reference?: boolean;
}

export class PlantFilter {
  /** State dimension n, measurement dimension m, process noise dimension p. */
  readonly n: number;
  readonly m: number;
  readonly p: number;
  readonly design: PlantDesign;

  private readonly random: SeededRandom;
  private readonly faults: readonly ScheduledMeasurementFault[];
  private readonly startTime: number;
  private readonly dtMs: number;
  private readonly reference: boolean;
  private nextSeq: number;
  private steps = 0;

  // model (row-major)
  private readonly A: Float64Array;
  private readonly C: Float64Array;
  /** G·Q·Gᵀ as the filter assumes it (n×n). */
  private readonly GQGt: Float64Array;
  /** The filter's R (m×m). */
  private readonly R: Float64Array;
  /** The plant's G (n×p) and the Cholesky factors of the true Q (p×p) and R (m×m). */
  private readonly G: Float64Array;
  private readonly LQtrue: Float64Array;
  private readonly LRtrue: Float64Array;

  // state
  /** True state x. */
  private readonly x: Float64Array;
  /** Estimate x̂ and covariance P after the last update. */
  private readonly xHat: Float64Array;
  private readonly P: Float64Array;
  /** Gain K of the last update (n×m). */
  private readonly K: Float64Array;
  private frozenZ: Float64Array | null = null;
  private readonly lastZ: Float64Array;

  // scratch
  private readonly eps: Float64Array;
  private readonly w: Float64Array;
  private readonly Gw: Float64Array;
  private readonly v: Float64Array;
  private readonly tmpN: Float64Array;
  private readonly z: Float64Array;
  private readonly xPred: Float64Array;
  private readonly PPred: Float64Array;
  private readonly AP: Float64Array;
  private readonly PCt: Float64Array;
  private readonly S: Float64Array;
  private readonly LS: Float64Array;
  private readonly nu: Float64Array;
  private readonly row: Float64Array;
  private readonly IKC: Float64Array;
  private readonly T: Float64Array;
  private readonly KR: Float64Array;

  constructor(options: PlantFilterOptions) {
    const { design } = options;
    const n = design.truth.A.length;
    const m = design.truth.C.length;
    const p = design.truth.G[0]?.length ?? 0;
    this.n = n;
    this.m = m;
    this.p = p;
    this.design = design;
    this.random = new SeededRandom(options.seed);
    this.faults = options.faults ?? [];
    for (const f of this.faults) {
      if (f.kind === 'bias' && f.component >= m) {
        throw new RangeError(`bias on component ${f.component}, but the measurement has ${m} components`);
      }
    }
    this.startTime = options.startTime ?? 0;
    this.dtMs = design.dt * 1000;
    this.reference = options.reference ?? true;
    this.nextSeq = options.firstSeq ?? 1;

    const { truth, filter } = design;
    this.A = fromRows(truth.A, n, n, 'A');
    if (fromRows(filter.A, n, n, 'filter A').some((a, i) => a !== this.A[i])) {
      throw new RangeError('the filter and the plant must share A (only Q and R may differ)');
    }
    this.C = fromRows(truth.C, m, n, 'C');
    this.G = fromRows(truth.G, n, p, 'G');
    const Gf = fromRows(filter.G, n, p, 'filter G');
    const Qf = fromRows(filter.Q, p, p, 'filter Q');
    const GQ = new Float64Array(n * p);
    multiply(Gf, Qf, n, p, p, GQ);
    this.GQGt = new Float64Array(n * n);
    multiplyTransposed(GQ, Gf, n, p, n, this.GQGt);
    this.R = fromRows(filter.R, m, m, 'filter R');
    this.LQtrue = new Float64Array(p * p);
    cholesky(fromRows(truth.Q, p, p, 'Q'), p, this.LQtrue);
    this.LRtrue = new Float64Array(m * m);
    cholesky(fromRows(truth.R, m, m, 'R'), m, this.LRtrue);

    this.xHat = Float64Array.from(design.x0);
    if (this.xHat.length !== n) throw new RangeError(`x0 must have ${n} components, got ${this.xHat.length}`);
    this.P = fromRows(design.P0, n, n, 'P0');
    // the true initial state x ~ N(x̂₀, P₀)
    const LP0 = new Float64Array(n * n);
    cholesky(this.P, n, LP0);
    this.eps = new Float64Array(Math.max(n, m, p));
    this.x = new Float64Array(n);
    this.tmpN = new Float64Array(n);
    this.fillGaussian(n);
    multiplyVector(LP0, this.eps, n, n, this.tmpN);
    for (let i = 0; i < n; i++) this.x[i] = this.xHat[i] + this.tmpN[i];

    this.K = new Float64Array(n * m);
    this.lastZ = new Float64Array(m);
    this.w = new Float64Array(p);
    this.Gw = new Float64Array(n);
    this.v = new Float64Array(m);
    this.z = new Float64Array(m);
    this.xPred = new Float64Array(n);
    this.PPred = new Float64Array(n * n);
    this.AP = new Float64Array(n * n);
    this.PCt = new Float64Array(n * m);
    this.S = new Float64Array(m * m);
    this.LS = new Float64Array(m * m);
    this.nu = new Float64Array(m);
    this.row = new Float64Array(m);
    this.IKC = new Float64Array(n * n);
    this.T = new Float64Array(n * n);
    this.KR = new Float64Array(n * m);
  }

  /** Sequence number the next sample will carry. */
  get seq(): number {
    return this.nextSeq;
  }

  /** The gain K = P⁻·Cᵀ·S⁻¹ of the last update (n×m). */
  gain(): number[][] {
    return toRows(this.K, this.n, this.m);
  }

  /** The filter's covariance P after the last update (n×n). */
  covariance(): number[][] {
    return toRows(this.P, this.n, this.n);
  }

  /**
   * Runs the plant and the filter one step and returns the innovation sample.
   * `t` (epoch ms) stamps the sample and places it on the fault schedules; by default
   * the model clock, startTime + k·dt.
   */
  next(t?: number): SimulatedSample {
    const { n, m, p } = this;
    this.steps += 1;
    const seq = this.nextSeq++;
    const time = t ?? this.startTime + this.steps * this.dtMs;
    const elapsedS = (time - this.startTime) / 1000;

    // faults in force for this sample
    let noiseFactor = 1;
    let qScale = 1;
    let stuck = false;
    for (const f of this.faults) {
      if (!isActive(f.when, seq, elapsedS)) continue;
      if (f.kind === 'noise') noiseFactor *= f.factor;
      else if (f.kind === 'qlow') qScale /= f.factor;
      else if (f.kind === 'stuck') stuck = true;
    }

    // plant: x = A·x + G·w, w = L_Q·ε
    this.fillGaussian(p);
    multiplyVector(this.LQtrue, this.eps, p, p, this.w);
    multiplyVector(this.G, this.w, n, p, this.Gw);
    multiplyVector(this.A, this.x, n, n, this.tmpN);
    for (let i = 0; i < n; i++) this.x[i] = this.tmpN[i] + this.Gw[i];

    // measurement: z = C·x + v, v = factor·L_R·ε, plus bias
    this.fillGaussian(m);
    multiplyVector(this.LRtrue, this.eps, m, m, this.v);
    multiplyVector(this.C, this.x, m, n, this.z);
    for (let i = 0; i < m; i++) this.z[i] += noiseFactor * this.v[i];
    for (const f of this.faults) {
      if (f.kind !== 'bias' || !isActive(f.when, seq, elapsedS)) continue;
      if (f.flickerS !== undefined && Math.floor(elapsedS / f.flickerS) % 2 === 1) continue;
      this.z[f.component] += f.offset;
    }
    if (stuck) {
      // the sensor repeats the last reading it gave before it stuck
      if (!this.frozenZ) this.frozenZ = this.steps > 1 ? Float64Array.from(this.lastZ) : Float64Array.from(this.z);
      this.z.set(this.frozenZ);
    } else {
      this.frozenZ = null;
    }
    this.lastZ.set(this.z);

    // predict: x̂⁻ = A·x̂, P⁻ = A·P·Aᵀ + G·Q·Gᵀ
    const { A, C, P, PPred, xPred, S, LS, K, nu } = this;
    multiplyVector(A, this.xHat, n, n, xPred);
    multiply(A, P, n, n, n, this.AP);
    multiplyTransposed(this.AP, A, n, n, n, PPred);
    for (let i = 0; i < n * n; i++) PPred[i] += qScale * this.GQGt[i];
    symmetrize(PPred, n);

    // innovate: ν = z − C·x̂⁻, S = C·P⁻·Cᵀ + R
    multiplyVector(C, xPred, m, n, nu);
    for (let i = 0; i < m; i++) nu[i] = this.z[i] - nu[i];
    multiplyTransposed(PPred, C, n, n, m, this.PCt);
    multiply(C, this.PCt, m, n, m, S);
    for (let i = 0; i < m * m; i++) S[i] += this.R[i];
    symmetrize(S, m);

    // gain: K = P⁻·Cᵀ·S⁻¹, row by row: S·K_iᵀ = (P⁻Cᵀ)_iᵀ (S symmetric)
    cholesky(S, m, LS);
    for (let i = 0; i < n; i++) {
      for (let j = 0; j < m; j++) this.row[j] = this.PCt[i * m + j];
      choleskySolveInPlace(LS, m, this.row);
      for (let j = 0; j < m; j++) K[i * m + j] = this.row[j];
    }

    // update: x̂ = x̂⁻ + K·ν, P = (I − K·C)·P⁻·(I − K·C)ᵀ + K·R·Kᵀ
    multiplyVector(K, nu, n, m, this.tmpN);
    for (let i = 0; i < n; i++) this.xHat[i] = xPred[i] + this.tmpN[i];
    multiply(K, C, n, m, n, this.IKC);
    for (let i = 0; i < n * n; i++) this.IKC[i] = -this.IKC[i];
    for (let i = 0; i < n; i++) this.IKC[i * n + i] += 1;
    multiply(this.IKC, PPred, n, n, n, this.T);
    multiplyTransposed(this.T, this.IKC, n, n, n, P);
    multiply(K, this.R, n, m, m, this.KR);
    multiplyTransposed(this.KR, K, n, m, n, this.T);
    for (let i = 0; i < n * n; i++) P[i] += this.T[i];
    symmetrize(P, n);

    const sample: SimulatedSample = {
      seq,
      t: time,
      nu: Array.from(nu),
      S: toRows(S, m, m),
    };
    if (this.reference) {
      const e: number[] = new Array(n);
      for (let i = 0; i < n; i++) e[i] = this.x[i] - this.xHat[i];
      sample.e = e;
      sample.P = toRows(P, n, n);
    }
    return sample;
  }

  private fillGaussian(k: number): void {
    for (let i = 0; i < k; i++) this.eps[i] = this.random.gaussian();
  }
}
