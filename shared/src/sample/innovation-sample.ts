/**
 * Innovation sample validation: shape, finiteness, symmetry and positive
 * definiteness of the innovation covariance S (or of its Cholesky factor L), and
 * the same for an optional reference error e with its covariance P.
 *
 * Method: a symmetric matrix is positive definite exactly when its Cholesky
 * factorization exists with positive pivots (Golub & Van Loan, "Matrix
 * Computations", 4th ed., 2013, Theorem 4.2.7 and §4.2.5); the factor is kept
 * for the NIS, which needs it anyway (Bar-Shalom, Li & Kirubarajan, "Estimation
 * with Applications to Tracking and Navigation", 2001, §5.4).
 *
 * Every failure is an {@link InnovationSampleError} with a stable machine code
 * (what quarantine records) and a message that says which field was wrong.
 *
 * Tolerances (both relative, both stated in {@link ValidationOptions}):
 * - symmetry: |S_ij − S_ji| ≤ symmetryTolerance · √(S_ii·S_jj), default 1e-6, which
 *   admits covariances computed in single precision on board; the two halves are
 *   then averaged.
 * - positive definiteness: S is first scaled to its correlation matrix
 *   D⁻¹·S·D⁻¹ (D = diag(√S_ii), so units do not matter and nothing underflows),
 *   and every Cholesky pivot of that must exceed pivotTolerance, default 1e-12,
 *   which rejects matrices singular to working precision.
 */
import { CHOLESKY_OK, choleskyLower } from '../linalg/small-kernels';

// Builtins used per sample, bound once: looking up the global `Math`/`Number`
// on every call is slow in sandboxed runners (jest's vm contexts, nodejs/node#49283).
const { sqrt, abs } = Math;
const { isFinite, isSafeInteger } = Number;
const { isArray } = Array;
const { isView } = ArrayBuffer;

/** Stable machine codes of the ways a sample can be invalid. */
export type InnovationSampleErrorCode =
  | 'not_an_object'
  | 'missing_field'
  | 'conflicting_fields'
  | 'wrong_type'
  | 'bad_sequence'
  | 'bad_time'
  | 'empty'
  | 'too_large'
  | 'dimension_mismatch'
  | 'not_finite'
  | 'not_symmetric'
  | 'not_lower_triangular'
  | 'not_positive_definite';

/** A sample was rejected: `code` is stable, `message` is for people, `field` names the part. */
export class InnovationSampleError extends Error {
  override readonly name = 'InnovationSampleError';
  constructor(
    readonly code: InnovationSampleErrorCode,
    /** The offending field, with indices where useful: 'S[1][0]', 'nu', 'seq'. */
    readonly field: string,
    message: string,
  ) {
    super(message);
  }
}

/** A sample as it arrives in a parsed JSON payload. */
export interface InnovationSampleInput {
  /** Sequence number: a non-negative safe integer, one more per sample. */
  seq: number;
  /**
   * Time: a finite number in the service's unit (epoch milliseconds in
   * payloads), or an RFC 3339 date-time string, converted to epoch milliseconds.
   * Optional.
   */
  t?: number | string;
  /** Innovation ν (m components). */
  nu: ArrayLike<number>;
  /** Innovation covariance S (m×m) … */
  S?: ArrayLike<ArrayLike<number>>;
  /** … or its lower Cholesky factor L (S = L·L'), not both. */
  L?: ArrayLike<ArrayLike<number>>;
  /** Reference error e = x − x̂ (n components), where a truth is known. */
  e?: ArrayLike<number>;
  /** Covariance P of e (n×n); given together with e. */
  P?: ArrayLike<ArrayLike<number>>;
}

/** A validated sample, on typed arrays, ready for the checks. */
export interface InnovationSample {
  seq: number;
  t: number | undefined;
  /** Measurement dimension. */
  m: number;
  /** Innovation ν, length ≥ m (only the first m entries are meaningful). */
  nu: Float64Array;
  /** Lower Cholesky factor of S, row-major m×m, upper triangle zero. */
  L: Float64Array;
  /** Dimension of e; 0 when the sample carries no reference error. */
  n: number;
  /** Reference error e (first n entries). */
  e: Float64Array;
  /** Lower Cholesky factor of P, row-major n×n. */
  LP: Float64Array;
}

export interface ValidationOptions {
  /** Relative symmetry tolerance for S and P (default 1e-6). */
  symmetryTolerance?: number;
  /** Relative Cholesky pivot floor (default 1e-12). */
  pivotTolerance?: number;
  /** Largest accepted m or n (default 64). */
  maxDimension?: number;
}

export const DEFAULT_SYMMETRY_TOLERANCE = 1e-6;
export const DEFAULT_PIVOT_TOLERANCE = 1e-12;
export const DEFAULT_MAX_DIMENSION = 64;

/** Resolved tolerances, kept by the monitor so that the hot path reads numbers only. */
export interface ResolvedValidationOptions {
  symmetryTolerance: number;
  pivotTolerance: number;
  maxDimension: number;
}

export function resolveValidationOptions(options: ValidationOptions = {}): ResolvedValidationOptions {
  const symmetryTolerance = options.symmetryTolerance ?? DEFAULT_SYMMETRY_TOLERANCE;
  const pivotTolerance = options.pivotTolerance ?? DEFAULT_PIVOT_TOLERANCE;
  const maxDimension = options.maxDimension ?? DEFAULT_MAX_DIMENSION;
  if (!(symmetryTolerance >= 0) || !Number.isFinite(symmetryTolerance)) {
    throw new RangeError(`symmetryTolerance must be a finite number ≥ 0, got ${symmetryTolerance}`);
  }
  if (!(pivotTolerance >= 0) || !Number.isFinite(pivotTolerance)) {
    throw new RangeError(`pivotTolerance must be a finite number ≥ 0, got ${pivotTolerance}`);
  }
  if (!Number.isInteger(maxDimension) || maxDimension < 1) {
    throw new RangeError(`maxDimension must be a positive integer, got ${maxDimension}`);
  }
  return { symmetryTolerance, pivotTolerance, maxDimension };
}

/** Preallocated buffers for a sample of fixed dimensions (the monitor keeps one). */
export function allocateInnovationSample(m: number, n: number): InnovationSample {
  return {
    seq: 0,
    t: undefined,
    m,
    nu: new Float64Array(m),
    L: new Float64Array(m * m),
    n: 0,
    e: new Float64Array(n),
    LP: new Float64Array(n * n),
  };
}

/**
 * Validates a parsed sample and returns it on fresh typed arrays.
 * Throws {@link InnovationSampleError}.
 */
export function validateInnovationSample(raw: unknown, options: ValidationOptions = {}): InnovationSample {
  const resolved = resolveValidationOptions(options);
  const record = asRecord(raw);
  const m = vectorLength(record['nu'], 'nu', resolved.maxDimension);
  const e = record['e'];
  const n = e === undefined ? 0 : vectorLength(e, 'e', resolved.maxDimension);
  const out = allocateInnovationSample(m, n);
  const k = Math.max(m, n);
  readInnovationSampleInto(raw, out, m, n, resolved, new Float64Array(k * k + k));
  return out;
}

/**
 * The monitor's allocation-free path: validates `raw` into `out`, whose arrays
 * are sized for m (and n when n > 0). `expectedN` is the reference-error size
 * the estimator is fixed to, or 0 to accept any (up to the capacity of out.e).
 * `scratch` needs k² + k entries, k = max(m, n). Throws {@link InnovationSampleError}.
 */
export function readInnovationSampleInto(
  raw: unknown,
  out: InnovationSample,
  expectedM: number,
  expectedN: number,
  options: ResolvedValidationOptions,
  scratch: Float64Array,
): void {
  const k = expectedM > expectedN ? expectedM : expectedN;
  if (scratch.length < k * k + k || out.nu.length < expectedM || out.L.length < expectedM * expectedM) {
    throw new RangeError(`readInnovationSampleInto: buffers too small for m = ${expectedM}, n = ${expectedN} (scratch needs ${k * k + k})`);
  }
  const record = asRecord(raw);

  const seq = record['seq'];
  if (seq === undefined) throw new InnovationSampleError('missing_field', 'seq', 'the sample has no sequence number "seq"');
  if (typeof seq !== 'number') {
    throw new InnovationSampleError('wrong_type', 'seq', `"seq" must be a number, got ${typeName(seq)}`);
  }
  if (!isSafeInteger(seq) || seq < 0) {
    throw new InnovationSampleError('bad_sequence', 'seq', `"seq" must be a non-negative safe integer, got ${seq}`);
  }
  let t = record['t'];
  if (typeof t === 'string') {
    // an RFC 3339 date-time, as the payload schema allows: to epoch milliseconds
    const ms = Date.parse(t);
    if (ms !== ms) throw new InnovationSampleError('bad_time', 't', `"t" is not an RFC 3339 date-time: ${JSON.stringify(t.slice(0, 40))}`);
    t = ms;
  } else if (t !== undefined) {
    if (typeof t !== 'number') throw new InnovationSampleError('wrong_type', 't', `"t" must be a number or an RFC 3339 date-time, got ${typeName(t)}`);
    if (!isFinite(t)) throw new InnovationSampleError('not_finite', 't', `"t" must be finite, got ${t}`);
  }

  // ν and S (or L)
  const m = vectorLength(record['nu'], 'nu', options.maxDimension);
  if (m !== expectedM) {
    throw new InnovationSampleError(
      'dimension_mismatch',
      'nu',
      `nu has ${m} components but this estimator's measurement has ${expectedM}`,
    );
  }
  readVector(record['nu'] as ArrayLike<unknown>, 'nu', m, out.nu);
  const S = record['S'];
  const Lraw = record['L'];
  if (S !== undefined && Lraw !== undefined) {
    throw new InnovationSampleError('conflicting_fields', 'S', 'give either the covariance "S" or its Cholesky factor "L", not both');
  }
  if (S !== undefined) {
    readSquareMatrix(S, 'S', 'nu', m, scratch);
    factorCovariance(scratch, 'S', m, out.L, options);
  } else if (Lraw !== undefined) {
    readSquareMatrix(Lraw, 'L', 'nu', m, out.L);
    checkCholeskyFactor(out.L, 'L', m, options);
  } else {
    throw new InnovationSampleError('missing_field', 'S', 'the sample has neither an innovation covariance "S" nor its Cholesky factor "L"');
  }

  // e and P, together or not at all
  const e = record['e'];
  const P = record['P'];
  let n = 0;
  if (e !== undefined || P !== undefined) {
    if (e === undefined) throw new InnovationSampleError('missing_field', 'e', '"P" was given without the reference error "e"');
    if (P === undefined) throw new InnovationSampleError('missing_field', 'P', '"e" was given without its covariance "P"');
    n = vectorLength(e, 'e', options.maxDimension);
    if (expectedN > 0 && n !== expectedN) {
      throw new InnovationSampleError(
        'dimension_mismatch',
        'e',
        `e has ${n} components but this estimator's reference error has ${expectedN}`,
      );
    }
    if (n > out.e.length) {
      throw new InnovationSampleError('too_large', 'e', `e has ${n} components; at most ${out.e.length} are accepted here`);
    }
    readVector(e as ArrayLike<unknown>, 'e', n, out.e);
    readSquareMatrix(P, 'P', 'e', n, scratch);
    factorCovariance(scratch, 'P', n, out.LP, options);
  }

  out.seq = seq;
  out.t = t as number | undefined;
  out.m = m;
  out.n = n;
}

// ---------------------------------------------------------------------------

function asRecord(raw: unknown): Record<string, unknown> {
  if (typeof raw !== 'object' || raw === null || isArray(raw)) {
    throw new InnovationSampleError('not_an_object', '', `a sample must be an object, got ${typeName(raw)}`);
  }
  return raw as Record<string, unknown>;
}

function typeName(x: unknown): string {
  if (x === null) return 'null';
  if (Array.isArray(x)) return 'an array';
  if (typeof x === 'number') return String(x);
  return typeof x === 'object' ? 'an object' : `a ${typeof x}`;
}

function isArrayLike(x: unknown): x is ArrayLike<unknown> {
  return isArray(x) || (isView(x) && !(x instanceof DataView));
}

function vectorLength(x: unknown, field: string, maxDimension: number): number {
  if (x === undefined) throw new InnovationSampleError('missing_field', field, `the sample has no "${field}"`);
  if (!isArrayLike(x)) throw new InnovationSampleError('wrong_type', field, `"${field}" must be an array of numbers, got ${typeName(x)}`);
  const length = x.length;
  if (length === 0) throw new InnovationSampleError('empty', field, `"${field}" is empty`);
  if (length > maxDimension) {
    throw new InnovationSampleError('too_large', field, `"${field}" has ${length} components; at most ${maxDimension} are accepted`);
  }
  return length;
}

function readVector(x: ArrayLike<unknown>, field: string, length: number, out: Float64Array): void {
  for (let i = 0; i < length; i++) {
    const v = x[i];
    if (typeof v !== 'number') {
      throw new InnovationSampleError('wrong_type', `${field}[${i}]`, `${field}[${i}] must be a number, got ${typeName(v)}`);
    }
    if (!isFinite(v)) throw new InnovationSampleError('not_finite', `${field}[${i}]`, `${field}[${i}] is ${v}, not a finite number`);
    out[i] = v;
  }
}

/** Reads an m×m matrix given as an array of rows into out (row-major). */
function readSquareMatrix(x: unknown, field: string, vectorField: string, m: number, out: Float64Array): void {
  if (!isArrayLike(x)) {
    throw new InnovationSampleError('wrong_type', field, `"${field}" must be an array of ${m} rows, got ${typeName(x)}`);
  }
  if (x.length !== m) {
    throw new InnovationSampleError(
      'dimension_mismatch',
      field,
      `${field} has ${x.length} rows but ${vectorField} has ${m} components: ${field} must be ${m}×${m}`,
    );
  }
  for (let i = 0; i < m; i++) {
    const row = x[i];
    if (!isArrayLike(row)) {
      throw new InnovationSampleError('wrong_type', `${field}[${i}]`, `row ${field}[${i}] must be an array of ${m} numbers, got ${typeName(row)}`);
    }
    if (row.length !== m) {
      throw new InnovationSampleError(
        'dimension_mismatch',
        `${field}[${i}]`,
        `row ${field}[${i}] has ${row.length} entries but ${vectorField} has ${m} components: ${field} must be ${m}×${m}`,
      );
    }
    const ri = i * m;
    for (let j = 0; j < m; j++) {
      const v = row[j];
      if (typeof v !== 'number') {
        throw new InnovationSampleError('wrong_type', `${field}[${i}][${j}]`, `${field}[${i}][${j}] must be a number, got ${typeName(v)}`);
      }
      if (!isFinite(v)) {
        throw new InnovationSampleError('not_finite', `${field}[${i}][${j}]`, `${field}[${i}][${j}] is ${v}, not a finite number`);
      }
      out[ri + j] = v;
    }
  }
}

/**
 * Checks symmetry of C (row-major m×m in scratch of length ≥ m² + m, overwritten)
 * and factors it into L, or throws.
 */
function factorCovariance(C: Float64Array, field: string, m: number, L: Float64Array, options: ResolvedValidationOptions): void {
  for (let i = 0; i < m; i++) {
    const cii = C[i * m + i];
    if (!(cii > 0)) {
      throw new InnovationSampleError(
        'not_positive_definite',
        `${field}[${i}][${i}]`,
        `${field} is not positive definite: its diagonal entry ${field}[${i}][${i}] = ${cii} is not positive`,
      );
    }
  }
  const tol = options.symmetryTolerance;
  for (let i = 1; i < m; i++) {
    const ri = i * m;
    for (let j = 0; j < i; j++) {
      const a = C[ri + j];
      const b = C[j * m + i];
      // |C_ij − C_ji| ≤ tol·√(C_ii·C_jj)
      const scale = sqrt(C[ri + i] * C[j * m + j]);
      const gap = abs(a - b);
      if (gap > tol * scale) {
        throw new InnovationSampleError(
          'not_symmetric',
          `${field}[${i}][${j}]`,
          `${field} is not symmetric: |${field}[${i}][${j}] − ${field}[${j}][${i}]| = ${gap} exceeds ${tol}·√(${field}[${i}][${i}]·${field}[${j}][${j}]) = ${tol * scale}`,
        );
      }
      C[ri + j] = 0.5 * (a + b);
    }
  }
  // Equilibrate: C_ij ← C_ij/(d_i·d_j) with d_i = √C_ii (kept after the m×m
  // block of the scratch), so the pivot test is scale-free and tiny or huge
  // units cannot underflow or overflow the factorization; then L = D·L_c,
  // since S = D·C_c·D = (D·L_c)(D·L_c)'.
  const d = m * m;
  for (let i = 0; i < m; i++) C[d + i] = sqrt(C[i * m + i]);
  for (let i = 0; i < m; i++) {
    const ri = i * m;
    for (let j = 0; j < i; j++) C[ri + j] /= C[d + i] * C[d + j];
    C[ri + i] = 1;
  }
  const failed = choleskyLower(C, m, L, options.pivotTolerance);
  if (failed !== CHOLESKY_OK) {
    const pivot = L[failed * m + failed];
    throw new InnovationSampleError(
      'not_positive_definite',
      field,
      `${field} is not positive definite: Cholesky pivot ${failed} of its correlation matrix is ${pivot}, not above ${options.pivotTolerance}`,
    );
  }
  for (let i = 0; i < m; i++) {
    const ri = i * m;
    const di = C[d + i];
    for (let j = 0; j <= i; j++) L[ri + j] *= di;
  }
}

/** Checks a given Cholesky factor: lower triangular, positive diagonal, not near-singular. */
function checkCholeskyFactor(L: Float64Array, field: string, m: number, options: ResolvedValidationOptions): void {
  for (let i = 0; i < m; i++) {
    const ri = i * m;
    for (let j = i + 1; j < m; j++) {
      if (L[ri + j] !== 0) {
        throw new InnovationSampleError(
          'not_lower_triangular',
          `${field}[${i}][${j}]`,
          `${field} must be lower triangular, but ${field}[${i}][${j}] = ${L[ri + j]}`,
        );
      }
    }
    // S_ii = Σ_k L_ik²; the pivot L_ii² must exceed pivotTolerance·S_ii
    let sii = 0;
    for (let k = 0; k <= i; k++) sii += L[ri + k] * L[ri + k];
    const lii = L[ri + i];
    if (!(lii > 0) || !(lii * lii > options.pivotTolerance * sii) || !isFinite(sii)) {
      throw new InnovationSampleError(
        'not_positive_definite',
        `${field}[${i}][${i}]`,
        `${field} is not the Cholesky factor of a positive definite matrix: its diagonal entry ${field}[${i}][${i}] = ${lii} is not (sufficiently) positive`,
      );
    }
  }
}
