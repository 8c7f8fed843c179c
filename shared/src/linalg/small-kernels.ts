/**
 * Small dense kernels on row-major Float64Array matrices for the per-sample hot
 * path (m ≤ a few dozen): Cholesky factorization and forward substitution.
 *
 * Method: Cholesky–Banachiewicz (row by row), Golub & Van Loan, "Matrix
 * Computations", 4th ed. (2013), §4.2 (Algorithm 4.2.1 rearranged by rows);
 * forward substitution, ibid. §3.1.1 (Algorithm 3.1.1).
 * For general linear algebra use ml-matrix; these exist because allocation-free
 * loops on typed arrays are several times faster for 1×1 … 6×6 matrices
 * (shared/bench/checks-bench.ts measures the difference).
 */

// Builtins used per sample, bound once: looking up the global `Math`/`Number`
// on every call is slow in sandboxed runners (jest's vm contexts, nodejs/node#49283).
const { sqrt } = Math;
const { isFinite } = Number;

/** Returned by {@link choleskyLower} when the factorization succeeded. */
export const CHOLESKY_OK = -1;

/**
 * Lower Cholesky factor L of S (S = L·L'), reading only the lower triangle of S.
 *   L_jj = √(S_jj − Σ_{k<j} L_jk²),  L_ij = (S_ij − Σ_{k<j} L_ik·L_jk) / L_jj  (i > j)
 * A pivot d_j = S_jj − Σ L_jk² must be finite and exceed pivotTolerance·S_jj.
 * Returns CHOLESKY_OK, or the index j of the first failing pivot; in that case
 * L[j·m + j] holds the failing pivot d_j (not its square root) for the message.
 * The strict upper triangle of L is set to zero. S and L may not alias.
 */
export function choleskyLower(S: Float64Array, m: number, L: Float64Array, pivotTolerance = 0): number {
  for (let i = 0; i < m; i++) {
    const ri = i * m;
    for (let j = 0; j <= i; j++) {
      const rj = j * m;
      let s = S[ri + j];
      for (let k = 0; k < j; k++) s -= L[ri + k] * L[rj + k];
      if (i === j) {
        // d_j = S_jj − Σ L_jk²; must be positive (and not negligible)
        if (!(s > pivotTolerance * S[ri + i]) || !isFinite(s)) {
          L[ri + i] = s;
          return i;
        }
        L[ri + i] = sqrt(s);
      } else {
        L[ri + j] = s / L[rj + j];
      }
    }
    for (let j = i + 1; j < m; j++) L[ri + j] = 0;
  }
  return CHOLESKY_OK;
}

/**
 * Forward substitution: x = L⁻¹·b for lower-triangular L (m×m, row-major).
 *   x_i = (b_i − Σ_{k<i} L_ik·x_k) / L_ii
 * b and x may alias.
 */
export function forwardSubstitute(L: Float64Array, m: number, b: Float64Array, x: Float64Array): void {
  for (let i = 0; i < m; i++) {
    const ri = i * m;
    let s = b[i];
    for (let k = 0; k < i; k++) s -= L[ri + k] * x[k];
    x[i] = s / L[ri + i];
  }
}

/** ‖x‖² = Σ x_i² over the first m entries. */
export function sumOfSquares(x: Float64Array, m: number): number {
  let s = 0;
  for (let i = 0; i < m; i++) s += x[i] * x[i];
  return s;
}

/**
 * Quadratic form through a Cholesky factor: x'·(L·L')⁻¹·x = ‖L⁻¹x‖², writing the
 * whitened vector L⁻¹x into w. Never forms an inverse.
 */
export function whitenedQuadraticForm(L: Float64Array, m: number, x: Float64Array, w: Float64Array): number {
  forwardSubstitute(L, m, x, w);
  return sumOfSquares(w, m);
}
