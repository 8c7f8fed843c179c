/**
 * A small seeded linear-Gaussian plant with a Kalman filter running on it, for
 * the Monte-Carlo tests (Kalman 1960; Bar-Shalom, Li & Kirubarajan 2001, §5.2).
 * The filter runs at its steady-state gain: the Riccati recursion (with the
 * Joseph-form update) is iterated to convergence once, at construction, and the
 * truth starts from a draw around the estimate with the steady-state
 * covariance, so the filter is consistent from the first sample. The truth and
 * the filter have their own Q and R, so faults are injected by changing the
 * truth's: measurement noise (Rtrue), process noise (Qtrue) or a measurement
 * bias.
 *
 * Plain loops on small number[][] matrices: this is test code, written to be
 * read against the equations, independent of the library's own kernels.
 */
import { Random } from './random';

// Bound once: looking up the global `Math` per call is slow inside jest's vm contexts (nodejs/node#49283).
const { sqrt, abs, max } = Math;

type Matrix = number[][];

export interface LinearGaussianModel {
  F: Matrix;
  H: Matrix;
  /** Process noise the filter assumes. */
  Q: Matrix;
  /** Measurement noise the filter assumes. */
  R: Matrix;
}

export interface SimulatedSample {
  seq: number;
  t: number;
  nu: number[];
  S: number[][];
  e: number[];
  P: number[][];
}

interface SteadyState {
  Ppred: Matrix;
  P: Matrix;
  S: Matrix;
  K: Matrix;
}

const steadyStates = new WeakMap<LinearGaussianModel, SteadyState>();

/** Steady-state predicted and updated covariances, innovation covariance and gain (memoized per model). */
export function steadyStateFilter(model: LinearGaussianModel): SteadyState {
  const cached = steadyStates.get(model);
  if (cached) return cached;
  const { F, H, Q, R } = model;
  let P = identity(F.length);
  let result = { Ppred: P, P, S: R, K: mul(P, transpose(H)) };
  for (let iteration = 0; iteration < 100000; iteration++) {
    // P⁻ = F P F′ + Q;  S = H P⁻ H′ + R;  K = P⁻ H′ S⁻¹;  P = (I − K H) P⁻ (I − K H)′ + K R K′
    const Ppred = symmetrize(addM(mul(mul(F, P), transpose(F)), Q));
    const S = symmetrize(addM(mul(mul(H, Ppred), transpose(H)), R));
    const K = mul(mul(Ppred, transpose(H)), inverse(S));
    const IKH = subM(identity(F.length), mul(K, H));
    const next = symmetrize(addM(mul(mul(IKH, Ppred), transpose(IKH)), mul(mul(K, R), transpose(K))));
    const change = max(...next.flatMap((row, i) => row.map((v, j) => abs(v - P[i][j]) / (abs(v) + 1e-300))));
    P = next;
    result = { Ppred, P, S, K };
    if (change < 1e-15) break;
  }
  steadyStates.set(model, result);
  return result;
}

export class KalmanSimulation {
  /** The truth's noise, initially equal to the filter's; assign them to inject faults. */
  get Qtrue(): Matrix {
    return this.q;
  }
  set Qtrue(Q: Matrix) {
    this.q = Q;
    this.qFactor = cholesky(Q);
  }
  get Rtrue(): Matrix {
    return this.r;
  }
  set Rtrue(R: Matrix) {
    this.r = R;
    this.rFactor = cholesky(R);
  }
  /** Added to the measurement (length p). */
  bias: number[];
  /** Steady-state innovation covariance and updated covariance the filter reports. */
  readonly S: Matrix;
  readonly P: Matrix;
  private q: Matrix = [];
  private r: Matrix = [];
  private qFactor: Matrix = [];
  private rFactor: Matrix = [];
  private readonly model: LinearGaussianModel;
  private readonly K: Matrix;
  private readonly random: Random;
  private x: number[];
  private xhat: number[];
  private seq = 0;

  constructor(model: LinearGaussianModel, seed: number) {
    this.model = model;
    this.random = new Random(seed);
    const steady = steadyStateFilter(model);
    this.S = steady.S;
    this.P = steady.P;
    this.K = steady.K;
    this.Qtrue = model.Q.map((r) => [...r]);
    this.Rtrue = model.R.map((r) => [...r]);
    this.bias = model.H.map(() => 0);
    this.xhat = model.F.map(() => 0);
    // x − x̂ ~ N(0, P): consistent from the start
    this.x = this.draw(cholesky(this.P));
  }

  /** One predict–measure–update cycle; returns the innovation sample and the reference error. */
  step(): SimulatedSample {
    const { F, H } = this.model;
    // truth: x_{k+1} = F x_k + w_k, z = H x + v + b
    this.x = add(mulVec(F, this.x), this.draw(this.qFactor));
    const z = add(add(mulVec(H, this.x), this.draw(this.rFactor)), this.bias);
    // filter: x̂⁻ = F x̂;  ν = z − H x̂⁻;  x̂ = x̂⁻ + K ν
    const xPred = mulVec(F, this.xhat);
    const nu = sub(z, mulVec(H, xPred));
    this.xhat = add(xPred, mulVec(this.K, nu));
    const e = sub(this.x, this.xhat);
    const sample = { seq: this.seq, t: this.seq, nu, S: this.S, e, P: this.P };
    this.seq++;
    return sample;
  }

  /** A draw from N(0, L·L′) given the Cholesky factor L. */
  private draw(L: Matrix): number[] {
    const z = L.map(() => this.random.normal());
    return L.map((row) => row.reduce((s, lij, j) => s + lij * z[j], 0));
  }
}

// --- models -------------------------------------------------------------------

/**
 * Planar constant-velocity tracker, state [x, y, vx, vy], measuring (x, y):
 * discretized continuous white-noise acceleration with spectral density q
 * (Bar-Shalom et al. 2001, §6.2.2): per axis Q = q·[[T³/3, T²/2], [T²/2, T]].
 */
export function constantVelocity2D(q: number, r: number, T = 1): LinearGaussianModel {
  const F = [
    [1, 0, T, 0],
    [0, 1, 0, T],
    [0, 0, 1, 0],
    [0, 0, 0, 1],
  ];
  const H = [
    [1, 0, 0, 0],
    [0, 1, 0, 0],
  ];
  const a = (q * T ** 3) / 3;
  const b = (q * T ** 2) / 2;
  const c = q * T;
  const Q = [
    [a, 0, b, 0],
    [0, a, 0, b],
    [b, 0, c, 0],
    [0, b, 0, c],
  ];
  const R = [
    [r, 0],
    [0, r],
  ];
  return { F, H, Q, R };
}

/** Scalar random walk x_{k+1} = x_k + w, z = x + v, with Var w = q, Var v = r. */
export function scalarRandomWalk(q: number, r: number): LinearGaussianModel {
  return { F: [[1]], H: [[1]], Q: [[q]], R: [[r]] };
}

/** Scales a matrix. */
export function scaled(A: Matrix, s: number): Matrix {
  return A.map((r) => r.map((v) => v * s));
}

// --- small matrix helpers --------------------------------------------------------

function mul(A: Matrix, B: Matrix): Matrix {
  const n = A.length;
  const k = B.length;
  const m = B[0].length;
  const C: Matrix = [];
  for (let i = 0; i < n; i++) {
    const row: number[] = [];
    for (let j = 0; j < m; j++) {
      let s = 0;
      for (let l = 0; l < k; l++) s += A[i][l] * B[l][j];
      row[j] = s;
    }
    C.push(row);
  }
  return C;
}

function mulVec(A: Matrix, x: number[]): number[] {
  return A.map((row) => row.reduce((s, a, j) => s + a * x[j], 0));
}

function transpose(A: Matrix): Matrix {
  return A[0].map((_, j) => A.map((row) => row[j]));
}

function add(a: number[], b: number[]): number[] {
  return a.map((v, i) => v + b[i]);
}

function sub(a: number[], b: number[]): number[] {
  return a.map((v, i) => v - b[i]);
}

function addM(A: Matrix, B: Matrix): Matrix {
  return A.map((row, i) => row.map((v, j) => v + B[i][j]));
}

function subM(A: Matrix, B: Matrix): Matrix {
  return A.map((row, i) => row.map((v, j) => v - B[i][j]));
}

function identity(n: number): Matrix {
  const I: Matrix = [];
  for (let i = 0; i < n; i++) {
    const row: number[] = [];
    for (let j = 0; j < n; j++) row.push(i === j ? 1 : 0);
    I.push(row);
  }
  return I;
}

function symmetrize(A: Matrix): Matrix {
  return A.map((row, i) => row.map((v, j) => 0.5 * (v + A[j][i])));
}

/** Cholesky factor of a positive semidefinite matrix (zero columns where the pivot is 0). */
export function cholesky(A: Matrix): Matrix {
  const n = A.length;
  const L: Matrix = A.map((row) => row.map(() => 0));
  for (let i = 0; i < n; i++) {
    for (let j = 0; j <= i; j++) {
      let s = A[i][j];
      for (let k = 0; k < j; k++) s -= L[i][k] * L[j][k];
      if (i === j) L[i][i] = s > 0 ? sqrt(s) : 0;
      else L[i][j] = L[j][j] > 0 ? s / L[j][j] : 0;
    }
  }
  return L;
}

/** Gauss–Jordan inverse with partial pivoting (test code; the library never inverts). */
export function inverse(A: Matrix): Matrix {
  const n = A.length;
  const I = identity(n);
  const M = A.map((row, i) => row.concat(I[i]));
  for (let c = 0; c < n; c++) {
    let p = c;
    for (let r = c + 1; r < n; r++) if (abs(M[r][c]) > abs(M[p][c])) p = r;
    const swap = M[c];
    M[c] = M[p];
    M[p] = swap;
    const d = M[c][c];
    for (let j = 0; j < 2 * n; j++) M[c][j] /= d;
    for (let r = 0; r < n; r++) {
      if (r === c) continue;
      const f = M[r][c];
      if (f !== 0) for (let j = 0; j < 2 * n; j++) M[r][j] -= f * M[c][j];
    }
  }
  return M.map((row) => row.slice(n));
}
