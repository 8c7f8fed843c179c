/**
 * Allocation-free kernels on small row-major Float64Array matrices (n ≤ 16) for the
 * simulator's filter loop, where ml-matrix's per-call allocation would dominate.
 *
 * Method: Cholesky–Banachiewicz factorization and forward/back substitution
 * (Golub & Van Loan, "Matrix Computations", 4th ed., 2013, §4.2 and §3.1).
 * Dimensions are passed explicitly: an r×c matrix M holds M_ij at M[i·c + j].
 */

/** out = X·Y, X r×k, Y k×c. out may not alias X or Y. */
export function multiply(X: Float64Array, Y: Float64Array, r: number, k: number, c: number, out: Float64Array): void {
  for (let i = 0; i < r; i++) {
    for (let j = 0; j < c; j++) {
      let s = 0;
      for (let l = 0; l < k; l++) s += X[i * k + l] * Y[l * c + j];
      out[i * c + j] = s;
    }
  }
}

/** out = X·Yᵀ, X r×k, Y c×k. out may not alias X or Y. */
export function multiplyTransposed(X: Float64Array, Y: Float64Array, r: number, k: number, c: number, out: Float64Array): void {
  for (let i = 0; i < r; i++) {
    for (let j = 0; j < c; j++) {
      let s = 0;
      for (let l = 0; l < k; l++) s += X[i * k + l] * Y[j * k + l];
      out[i * c + j] = s;
    }
  }
}

/** y = M·x, M r×c. y may not alias x. */
export function multiplyVector(M: Float64Array, x: Float64Array, r: number, c: number, y: Float64Array): void {
  for (let i = 0; i < r; i++) {
    let s = 0;
    for (let j = 0; j < c; j++) s += M[i * c + j] * x[j];
    y[i] = s;
  }
}

/** M = (M + Mᵀ)/2 in place, M n×n. */
export function symmetrize(M: Float64Array, n: number): void {
  for (let i = 0; i < n; i++) {
    for (let j = 0; j < i; j++) {
      const s = 0.5 * (M[i * n + j] + M[j * n + i]);
      M[i * n + j] = s;
      M[j * n + i] = s;
    }
  }
}

/**
 * Lower Cholesky factor L of a symmetric positive definite S (S = L·Lᵀ), n×n.
 *   L_jj = √(S_jj − Σ_{k<j} L_jk²),  L_ij = (S_ij − Σ_{k<j} L_ik·L_jk) / L_jj
 * Throws when a pivot is not positive (S not positive definite).
 */
export function cholesky(S: Float64Array, n: number, L: Float64Array): void {
  for (let i = 0; i < n; i++) {
    for (let j = 0; j <= i; j++) {
      let s = S[i * n + j];
      for (let k = 0; k < j; k++) s -= L[i * n + k] * L[j * n + k];
      if (i === j) {
        if (!(s > 0)) throw new RangeError(`matrix is not positive definite (pivot ${j} is ${s})`);
        L[i * n + i] = Math.sqrt(s);
      } else {
        L[i * n + j] = s / L[j * n + j];
      }
    }
    for (let j = i + 1; j < n; j++) L[i * n + j] = 0;
  }
}

/**
 * Solves (L·Lᵀ)·x = b in place for lower-triangular L (n×n): forward substitution
 * L·y = b, then back substitution Lᵀ·x = y. b is overwritten with x.
 */
export function choleskySolveInPlace(L: Float64Array, n: number, b: Float64Array): void {
  for (let i = 0; i < n; i++) {
    let s = b[i];
    for (let k = 0; k < i; k++) s -= L[i * n + k] * b[k];
    b[i] = s / L[i * n + i];
  }
  for (let i = n - 1; i >= 0; i--) {
    let s = b[i];
    for (let k = i + 1; k < n; k++) s -= L[k * n + i] * b[k];
    b[i] = s / L[i * n + i];
  }
}

/** A row-major Float64Array from nested arrays, checking that it is r×c. */
export function fromRows(rows: readonly (readonly number[])[], r: number, c: number, name: string): Float64Array {
  if (rows.length !== r) throw new RangeError(`${name} must have ${r} rows, got ${rows.length}`);
  const out = new Float64Array(r * c);
  rows.forEach((row, i) => {
    if (row.length !== c) throw new RangeError(`${name} row ${i} must have ${c} columns, got ${row.length}`);
    row.forEach((v, j) => (out[i * c + j] = v));
  });
  return out;
}

/** Nested arrays (r×c) from a row-major Float64Array. */
export function toRows(M: Float64Array, r: number, c: number): number[][] {
  const out: number[][] = new Array(r);
  for (let i = 0; i < r; i++) {
    const row: number[] = new Array(c);
    for (let j = 0; j < c; j++) row[j] = M[i * c + j];
    out[i] = row;
  }
  return out;
}
