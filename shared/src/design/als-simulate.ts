/**
 * Innovations of a steady-state one-step predictor running on a simulated
 * linear plant, for testing and demonstrating the autocovariance least-squares
 * estimator (als.ts; Odelson, Rajamani & Rawlings, Automatica 42 (2006) 303–308).
 *
 *   x_{k+1} = A x_k + G w_k,   y_k = C x_k + v_k,   w_k ~ N(0, Q_w),  v_k ~ N(0, R_v)
 *   𝒴_k = y_k − C x̂_k,         x̂_{k+1} = A x̂_k + L 𝒴_k       (L the predictor gain)
 *
 * Noise vectors are drawn as Q_w^{1/2}·ξ with ξ standard normal and the
 * symmetric square root from the eigendecomposition, so a singular (PSD)
 * covariance is allowed. The caller supplies the standard-normal source, so the
 * run is deterministic for a seeded generator. Plain loops on arrays: a step is
 * O(n² + n·p).
 */
import { EigenvalueDecomposition, Matrix } from 'ml-matrix';
import { AlsError, type AlsModel, type Rows } from './als';

export interface SimulationNoise {
  /** Q_w (g×g), positive semidefinite. */
  Qw: Rows;
  /** R_v (p×p), positive semidefinite. */
  Rv: Rows;
}

export interface SimulationOptions {
  /** Innovations returned. */
  samples: number;
  /** Steps run and discarded first so the filter error reaches steady state; default 500. */
  burnIn?: number;
}

/** 𝒴_k, k = 0…samples−1, after burnIn steps from x_0 = x̂_0 = 0. */
export function simulateInnovations(model: AlsModel, noise: SimulationNoise, options: SimulationOptions, normal: () => number): number[][] {
  const A = rows(model.A);
  const n = A.length;
  const C = rows(model.C);
  const p = C.length;
  const G = model.G ? rows(model.G) : identity(n);
  const g = G[0].length;
  const gain = rows(model.L);
  const L = model.gainForm === 'filter' ? multiply(A, gain) : gain; // L_pred = A·M
  const sqrtQ = symmetricSquareRoot(noise.Qw, g, 'Qw');
  const sqrtR = symmetricSquareRoot(noise.Rv, p, 'Rv');
  const { samples } = options;
  const burnIn = options.burnIn ?? 500;
  if (!Number.isInteger(samples) || samples < 1) throw new AlsError(`samples must be an integer ≥ 1, got ${samples}`);
  if (!Number.isInteger(burnIn) || burnIn < 0) throw new AlsError(`burnIn must be an integer ≥ 0, got ${burnIn}`);
  if (C[0].length !== n || G.length !== n || L.length !== n || L[0].length !== p) {
    throw new AlsError(`simulateInnovations: shapes do not agree (A ${n}×${n}, C ${p}×${C[0].length}, G ${G.length}×${g}, L ${L.length}×${L[0].length})`);
  }

  let x = new Array<number>(n).fill(0);
  let xHat = new Array<number>(n).fill(0);
  const xi = new Array<number>(Math.max(g, p)).fill(0);
  const out: number[][] = [];
  for (let k = 0; k < burnIn + samples; k++) {
    // v_k = R_v^{1/2} ξ,  y_k = C x_k + v_k,  𝒴_k = y_k − C x̂_k
    for (let i = 0; i < p; i++) xi[i] = normal();
    const nu = new Array<number>(p);
    for (let i = 0; i < p; i++) {
      let s = 0;
      for (let j = 0; j < n; j++) s += C[i][j] * (x[j] - xHat[j]);
      for (let j = 0; j < p; j++) s += sqrtR[i][j] * xi[j];
      nu[i] = s;
    }
    if (k >= burnIn) out.push(nu);
    // w_k = Q_w^{1/2} ξ,  x_{k+1} = A x_k + G w_k,  x̂_{k+1} = A x̂_k + L 𝒴_k
    for (let i = 0; i < g; i++) xi[i] = normal();
    const w = new Array<number>(g);
    for (let i = 0; i < g; i++) {
      let s = 0;
      for (let j = 0; j < g; j++) s += sqrtQ[i][j] * xi[j];
      w[i] = s;
    }
    const xNext = new Array<number>(n);
    const xHatNext = new Array<number>(n);
    for (let i = 0; i < n; i++) {
      let s = 0;
      let sh = 0;
      for (let j = 0; j < n; j++) {
        s += A[i][j] * x[j];
        sh += A[i][j] * xHat[j];
      }
      for (let j = 0; j < g; j++) s += G[i][j] * w[j];
      for (let j = 0; j < p; j++) sh += L[i][j] * nu[j];
      xNext[i] = s;
      xHatNext[i] = sh;
    }
    x = xNext;
    xHat = xHatNext;
  }
  return out;
}

function rows(X: Rows): number[][] {
  return X.map((r) => Array.from(r));
}

function identity(n: number): number[][] {
  return Array.from({ length: n }, (_, i) => Array.from({ length: n }, (__, j) => (i === j ? 1 : 0)));
}

function multiply(X: number[][], Y: number[][]): number[][] {
  return X.map((r) => Y[0].map((_, j) => r.reduce((s, v, k) => s + v * Y[k][j], 0)));
}

/** X^{1/2} = V Λ^{1/2} Vᵀ for symmetric positive semidefinite X (k×k). */
function symmetricSquareRoot(X: Rows, k: number, name: string): number[][] {
  if (X.length !== k || X.some((r) => r.length !== k)) throw new AlsError(`${name} must be ${k}×${k}`);
  const M = new Matrix(rows(X));
  if (!M.isSymmetric()) throw new AlsError(`${name} must be symmetric`);
  const e = new EigenvalueDecomposition(M, { assumeSymmetric: true });
  const lambda = e.realEigenvalues;
  const scale = Math.max(...lambda.map(Math.abs), 0);
  if (lambda.some((l) => l < -1e-12 * scale)) throw new AlsError(`${name} must be positive semidefinite`);
  const V = e.eigenvectorMatrix;
  return V.clone()
    .mulRowVector(lambda.map((l) => Math.sqrt(Math.max(l, 0)))) // V Λ^{1/2} Vᵀ (mulRowVector works in place)
    .mmul(V.transpose())
    .to2DArray();
}
