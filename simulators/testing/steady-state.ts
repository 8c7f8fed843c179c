/**
 * Steady-state references for the simulator's tests, computed with ml-matrix apart from
 * the generator's own kernels: the filter's steady gain from its Riccati recursion, the
 * innovation covariance a mismatched filter really sees, and the innovation mean a
 * constant measurement bias leaves.
 *
 * Method: for a filter with steady gain K on a plant with true Q̄, R̄, the prediction
 * error ẽ = x − x̂⁻ obeys ẽ' = F·ẽ + G·w − A·K·v with F = A·(I − K·C); its covariance
 * solves the Lyapunov equation Σ = F·Σ·Fᵀ + G·Q̄·Gᵀ + A·K·R̄·Kᵀ·Aᵀ, and the innovation
 * ν = C·ẽ + v has covariance S̄ = C·Σ·Cᵀ + R̄, so E[νᵀS⁻¹ν] = tr(S⁻¹·S̄)
 * (Bar-Shalom, Li & Kirubarajan, "Estimation with Applications to Tracking and
 * Navigation", 2001, §5.2 and §5.4). A constant bias b on z gives the mean error
 * ē = −(I − F)⁻¹·A·K·b and the mean innovation μ = b + C·ē.
 */
import { Matrix, inverse } from 'ml-matrix';
import type { LinearGaussianModel, PlantDesign } from '../src/plant-models';

export interface SteadyFilter {
  /** Prediction covariance P⁻, innovation covariance S, gain K. */
  PPred: Matrix;
  S: Matrix;
  K: Matrix;
}

/** Iterates P⁻' = A·(P⁻ − P⁻Cᵀ S⁻¹ C P⁻)·Aᵀ + G·Q·Gᵀ until S stops changing. */
export function steadyFilter(model: LinearGaussianModel, P0: number[][], iterations = 20_000): SteadyFilter {
  const A = new Matrix(model.A);
  const C = new Matrix(model.C);
  const G = new Matrix(model.G);
  const GQGt = G.mmul(new Matrix(model.Q)).mmul(G.transpose());
  const R = new Matrix(model.R);
  let PPred = A.mmul(new Matrix(P0)).mmul(A.transpose()).add(GQGt);
  let S = C.mmul(PPred).mmul(C.transpose()).add(R);
  let K = PPred.mmul(C.transpose()).mmul(inverse(S));
  for (let k = 0; k < iterations; k++) {
    const P = PPred.clone().sub(K.mmul(C).mmul(PPred));
    PPred = A.mmul(P).mmul(A.transpose()).add(GQGt);
    const SNext = C.mmul(PPred).mmul(C.transpose()).add(R);
    K = PPred.mmul(C.transpose()).mmul(inverse(SNext));
    const change = SNext.clone().sub(S).norm('frobenius') / SNext.norm('frobenius');
    S = SNext;
    if (change < 1e-15) break;
  }
  return { PPred, S, K };
}

export interface ActualInnovations {
  /** The filter's own S and the innovations' real covariance S̄. */
  S: Matrix;
  SActual: Matrix;
  /** E[νᵀS⁻¹ν] = tr(S⁻¹·S̄). */
  meanNis: number;
}

/**
 * What the filter of `design` (its assumed Q scaled by qScale) really sees when the
 * measurement noise's standard deviation is ×noiseFactor and the plant runs its own Q.
 */
export function actualInnovations(
  design: PlantDesign,
  { noiseFactor = 1, qScale = 1 }: { noiseFactor?: number; qScale?: number } = {},
  iterations = 20_000,
): ActualInnovations {
  const assumed: LinearGaussianModel = { ...design.filter, Q: new Matrix(design.filter.Q).mul(qScale).to2DArray() };
  const { S, K } = steadyFilter(assumed, design.P0);
  const A = new Matrix(design.truth.A);
  const C = new Matrix(design.truth.C);
  const G = new Matrix(design.truth.G);
  const RActual = new Matrix(design.truth.R).mul(noiseFactor * noiseFactor);
  const n = A.rows;
  const F = A.mmul(Matrix.eye(n).sub(K.mmul(C)));
  const AK = A.mmul(K);
  const drive = G.mmul(new Matrix(design.truth.Q)).mmul(G.transpose()).add(AK.mmul(RActual).mmul(AK.transpose()));
  let Sigma = drive.clone();
  let SActual = C.mmul(Sigma).mmul(C.transpose()).add(RActual);
  for (let k = 0; k < iterations; k++) {
    Sigma = F.mmul(Sigma).mmul(F.transpose()).add(drive);
    const next = C.mmul(Sigma).mmul(C.transpose()).add(RActual);
    const change = next.clone().sub(SActual).norm('frobenius') / next.norm('frobenius');
    SActual = next;
    if (change < 1e-15) break;
  }
  const meanNis = inverse(S).mmul(SActual).trace();
  return { S, SActual, meanNis };
}

/** The steady mean innovation μ = b + C·ē, ē = −(I − F)⁻¹·A·K·b, under a constant bias b on z. */
export function steadyBiasResponse(design: PlantDesign, b: number[]): number[] {
  const { K } = steadyFilter(design.filter, design.P0);
  const A = new Matrix(design.truth.A);
  const C = new Matrix(design.truth.C);
  const n = A.rows;
  const F = A.mmul(Matrix.eye(n).sub(K.mmul(C)));
  const bias = Matrix.columnVector(b);
  const eMean = inverse(Matrix.eye(n).sub(F)).mmul(A).mmul(K).mmul(bias).mul(-1);
  return C.mmul(eMean).add(bias).getColumn(0);
}
