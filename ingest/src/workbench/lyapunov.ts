/**
 * The discrete Lyapunov equation Σ = F Σ Fᵀ + W for a stable F (spectral radius < 1),
 * by the squared Smith (doubling) iteration: Σ = Σ_{k≥0} Fᵏ W Fᵏᵀ summed in doubling
 * blocks,
 *     Σ₀ = W, F₀ = F;   Σⱼ₊₁ = Σⱼ + Fⱼ Σⱼ Fⱼᵀ,   Fⱼ₊₁ = Fⱼ²
 * so that Σⱼ holds the first 2ʲ terms of the series.
 *
 * Method: R. A. Smith, "Matrix equation XA + BX = C", SIAM J. Appl. Math. 16 (1968)
 * 198–201 (the doubling form; volume and pages from memory). The number of doublings
 * grows like log₂(log ε / log ρ(F)): 12 for ρ = 0.99 at double precision.
 *
 * Used by the retune study for the steady-state covariance of a filter's prediction
 * error when the noise differs from what the filter assumes:
 *     Σ = (A − L C) Σ (A − L C)ᵀ + G Q Gᵀ + L R Lᵀ.
 */
import { EigenvalueDecomposition, Matrix } from 'ml-matrix';

export class LyapunovError extends Error {
  override readonly name = 'LyapunovError';
}

/** ρ(F) = max |λᵢ(F)|. */
export function spectralRadiusOf(F: Matrix): number {
  const e = new EigenvalueDecomposition(F);
  return e.realEigenvalues.reduce((r, re, i) => Math.max(r, Math.hypot(re, e.imaginaryEigenvalues[i])), 0);
}

/** Σ with Σ = F Σ Fᵀ + W (W symmetric), for ρ(F) < 1. Throws LyapunovError otherwise. */
export function solveDiscreteLyapunov(F: Matrix, W: Matrix, options: { tolerance?: number; maxDoublings?: number } = {}): Matrix {
  const n = F.rows;
  if (F.columns !== n || W.rows !== n || W.columns !== n) {
    throw new LyapunovError(`Lyapunov: F is ${F.rows}×${F.columns} and W is ${W.rows}×${W.columns}; both must be n×n`);
  }
  const rho = spectralRadiusOf(F);
  if (!(rho < 1)) throw new LyapunovError(`Lyapunov: F is not stable (spectral radius ${rho.toPrecision(6)} ≥ 1)`);
  const tolerance = options.tolerance ?? 1e-14;
  const maxDoublings = options.maxDoublings ?? 64;
  let Sigma = W.clone();
  let Fj = F.clone();
  for (let j = 0; j < maxDoublings; j++) {
    // Σⱼ₊₁ = Σⱼ + Fⱼ Σⱼ Fⱼᵀ
    const increment = Fj.mmul(Sigma).mmul(Fj.transpose());
    Sigma = Matrix.add(Sigma, increment);
    Fj = Fj.mmul(Fj); // Fⱼ₊₁ = Fⱼ²
    if (increment.norm('frobenius') <= tolerance * Sigma.norm('frobenius')) break;
  }
  // symmetric by construction; remove the roundoff asymmetry
  return Matrix.add(Sigma, Sigma.transpose()).mul(0.5);
}
