import fc from 'fast-check';
import { EigenvalueDecomposition, Matrix } from 'ml-matrix';
import {
  InnovationSampleError,
  InnovationSampleErrorCode,
  validateInnovationSample,
} from '../src/sample/innovation-sample';

function codeOf(raw: unknown, options = {}): InnovationSampleErrorCode | 'accepted' {
  try {
    validateInnovationSample(raw, options);
    return 'accepted';
  } catch (error) {
    if (error instanceof InnovationSampleError) return error.code;
    throw error;
  }
}

function errorOf(raw: unknown): InnovationSampleError {
  try {
    validateInnovationSample(raw);
  } catch (error) {
    if (error instanceof InnovationSampleError) return error;
    throw error;
  }
  throw new Error('sample was accepted');
}

const good = { seq: 7, t: 12.5, nu: [0.3, -1.2], S: [[2, 0.5], [0.5, 1]] };

describe('innovation sample validation', () => {
  it('accepts a well-formed sample and factors S into its lower Cholesky factor', () => {
    const sample = validateInnovationSample(good);
    expect(sample.seq).toBe(7);
    expect(sample.t).toBe(12.5);
    expect(sample.m).toBe(2);
    const [l00, l01, l10, l11] = sample.L;
    expect(l01).toBe(0);
    // L·L' = S
    expect(l00 * l00).toBeCloseTo(2, 14);
    expect(l10 * l00).toBeCloseTo(0.5, 14);
    expect(l10 * l10 + l11 * l11).toBeCloseTo(1, 14);
  });

  it('accepts the Cholesky factor L instead of S and gives the same factor', () => {
    const fromS = validateInnovationSample(good);
    const L = [
      [fromS.L[0], 0],
      [fromS.L[2], fromS.L[3]],
    ];
    const fromL = validateInnovationSample({ seq: 7, nu: good.nu, L });
    expect(Array.from(fromL.L)).toEqual(Array.from(fromS.L));
  });

  it('takes t as a number or as an RFC 3339 date-time (converted to epoch milliseconds)', () => {
    expect(validateInnovationSample({ ...good, t: '2025-01-01T00:00:01.000Z' }).t).toBe(Date.UTC(2025, 0, 1, 0, 0, 1));
    expect(validateInnovationSample({ seq: 1, nu: [1], S: [[1]] }).t).toBeUndefined();
    expect(codeOf({ ...good, t: 'yesterday-ish' })).toBe('bad_time');
  });

  it('accepts typed arrays as vectors and rows', () => {
    const sample = validateInnovationSample({ seq: 1, nu: new Float64Array([1, 2]), S: [new Float64Array([1, 0]), new Float32Array([0, 1])] });
    expect(Array.from(sample.nu)).toEqual([1, 2]);
  });

  it.each<[string, unknown, InnovationSampleErrorCode, string]>([
    ['a non-object', 42, 'not_an_object', ''],
    ['an array', [1, 2], 'not_an_object', ''],
    ['no seq', { nu: [1], S: [[1]] }, 'missing_field', 'seq'],
    ['a string seq', { seq: '3', nu: [1], S: [[1]] }, 'wrong_type', 'seq'],
    ['a negative seq', { seq: -1, nu: [1], S: [[1]] }, 'bad_sequence', 'seq'],
    ['a fractional seq', { seq: 1.5, nu: [1], S: [[1]] }, 'bad_sequence', 'seq'],
    ['an infinite time', { seq: 1, t: Infinity, nu: [1], S: [[1]] }, 'not_finite', 't'],
    ['no nu', { seq: 1, S: [[1]] }, 'missing_field', 'nu'],
    ['an empty nu', { seq: 1, nu: [], S: [] }, 'empty', 'nu'],
    ['a too long nu', { seq: 1, nu: new Array(65).fill(0), S: [[1]] }, 'too_large', 'nu'],
    ['a NaN in nu', { seq: 1, nu: [1, NaN], S: [[1, 0], [0, 1]] }, 'not_finite', 'nu[1]'],
    ['a null in nu', { seq: 1, nu: [null, 1], S: [[1, 0], [0, 1]] }, 'wrong_type', 'nu[0]'],
    ['neither S nor L', { seq: 1, nu: [1] }, 'missing_field', 'S'],
    ['both S and L', { seq: 1, nu: [1], S: [[1]], L: [[1]] }, 'conflicting_fields', 'S'],
    ['S with too few rows', { seq: 1, nu: [1, 2], S: [[1, 0]] }, 'dimension_mismatch', 'S'],
    ['S with a short row', { seq: 1, nu: [1, 2], S: [[1, 0], [0]] }, 'dimension_mismatch', 'S[1]'],
    ['S not an array', { seq: 1, nu: [1], S: 'big' }, 'wrong_type', 'S'],
    ['an infinite S entry', { seq: 1, nu: [1, 2], S: [[1, 0], [Infinity, 1]] }, 'not_finite', 'S[1][0]'],
    ['an asymmetric S', { seq: 1, nu: [1, 2], S: [[1, 0.2], [0.3, 1]] }, 'not_symmetric', 'S[1][0]'],
    ['a zero variance', { seq: 1, nu: [1, 2], S: [[1, 0], [0, 0]] }, 'not_positive_definite', 'S[1][1]'],
    ['an indefinite S', { seq: 1, nu: [1, 2], S: [[1, 2], [2, 1]] }, 'not_positive_definite', 'S'],
    ['a singular S', { seq: 1, nu: [1, 2], S: [[1, 1], [1, 1]] }, 'not_positive_definite', 'S'],
    ['an upper-triangular entry in L', { seq: 1, nu: [1, 2], L: [[1, 0.1], [0, 1]] }, 'not_lower_triangular', 'L[0][1]'],
    ['a negative diagonal in L', { seq: 1, nu: [1, 2], L: [[1, 0], [0.5, -1]] }, 'not_positive_definite', 'L[1][1]'],
    ['e without P', { ...good, e: [1, 2] }, 'missing_field', 'P'],
    ['P without e', { ...good, P: [[1]] }, 'missing_field', 'e'],
    ['P of the wrong size', { ...good, e: [1, 2, 3], P: [[1, 0], [0, 1]] }, 'dimension_mismatch', 'P'],
    ['an indefinite P', { ...good, e: [1], P: [[-1]] }, 'not_positive_definite', 'P[0][0]'],
  ])('rejects %s with code %s at field "%s"', (_, raw, code, field) => {
    const error = errorOf(raw);
    expect(error.code).toBe(code);
    expect(error.field).toBe(field);
    expect(error.message.length).toBeGreaterThan(10);
    expect(error).toBeInstanceOf(Error);
  });

  it('says which dimension was wrong', () => {
    expect(errorOf({ seq: 1, nu: [1, 2, 3], S: [[1, 0], [0, 1]] }).message).toBe('S has 2 rows but nu has 3 components: S must be 3×3');
  });

  it('admits asymmetry within the stated relative tolerance (1e-6 by default) and not beyond', () => {
    const S = (d: number) => [
      [4, 1 + d],
      [1, 9],
    ];
    // tolerance·√(S_00·S_11) = 1e-6·6
    expect(codeOf({ seq: 1, nu: [1, 1], S: S(5.9e-6) })).toBe('accepted');
    expect(codeOf({ seq: 1, nu: [1, 1], S: S(6.1e-6) })).toBe('not_symmetric');
    expect(codeOf({ seq: 1, nu: [1, 1], S: S(6.1e-6) }, { symmetryTolerance: 1e-5 })).toBe('accepted');
  });

  it('rejects an S that is singular to working precision through the pivot tolerance', () => {
    const eps = 1e-14;
    const nearlySingular = [
      [1, 1 - eps],
      [1 - eps, 1],
    ];
    expect(codeOf({ seq: 1, nu: [1, 1], S: nearlySingular })).toBe('not_positive_definite');
    expect(codeOf({ seq: 1, nu: [1, 1], S: nearlySingular }, { pivotTolerance: 0 })).toBe('accepted');
  });
});

describe('innovation sample validation, property-based', () => {
  const entry = fc.oneof(
    fc.double({ min: -10, max: 10, noNaN: true }),
    fc.constantFrom(NaN, Infinity, -Infinity, 0, 1e308, -1e-308),
  );
  const junk = fc.oneof(fc.constant(null), fc.string(), fc.boolean(), fc.constant(undefined), fc.object());

  it('never throws anything but InnovationSampleError, whatever the payload', () => {
    fc.assert(
      fc.property(
        fc.record(
          {
            seq: fc.oneof(fc.nat(), fc.double(), junk),
            nu: fc.oneof(fc.array(entry, { maxLength: 4 }), junk),
            S: fc.oneof(fc.array(fc.oneof(fc.array(entry, { maxLength: 4 }), junk), { maxLength: 4 }), junk),
            L: fc.oneof(fc.constant(undefined), fc.array(fc.array(entry, { maxLength: 4 }), { maxLength: 4 })),
          },
          { requiredKeys: [] },
        ),
        (raw) => {
          expect(() => codeOf(raw)).not.toThrow();
        },
      ),
      { numRuns: 2000 },
    );
  });

  it('accepts S only when it is symmetric and positive definite (checked independently by eigenvalues)', () => {
    const m = fc.integer({ min: 1, max: 4 });
    fc.assert(
      fc.property(
        m.chain((n) =>
          fc.record({
            n: fc.constant(n),
            S: fc.array(fc.array(fc.double({ min: -5, max: 5, noNaN: true }), { minLength: n, maxLength: n }), { minLength: n, maxLength: n }),
            symmetric: fc.boolean(),
          }),
        ),
        ({ n, S, symmetric }) => {
          const M = symmetric ? S.map((row, i) => row.map((v, j) => (i >= j ? v : S[j][i]))) : S;
          const code = codeOf({ seq: 0, nu: new Array(n).fill(1), S: M });
          const asym = Math.max(...M.flatMap((row, i) => row.map((v, j) => Math.abs(v - M[j][i]))));
          if (code === 'accepted') {
            const scale = Math.max(...M.map((row, i) => Math.abs(row[i])));
            expect(asym).toBeLessThanOrEqual(1e-6 * scale);
            // positive definite ⇔ its correlation matrix (scale-free) has positive eigenvalues
            const d = M.map((row, i) => Math.sqrt(row[i]));
            const corr = new Matrix(M.map((row, i) => row.map((v, j) => (0.5 * (v + M[j][i])) / (d[i] * d[j]))));
            const eigenvalues = new EigenvalueDecomposition(corr, { assumeSymmetric: true }).realEigenvalues;
            expect(Math.min(...eigenvalues)).toBeGreaterThan(0);
          } else {
            expect(['not_symmetric', 'not_positive_definite']).toContain(code);
          }
        },
      ),
      { numRuns: 3000 },
    );
  });

  it('always rejects an S with a clearly negative eigenvalue', () => {
    fc.assert(
      fc.property(
        fc.integer({ min: 1, max: 5 }).chain((n) =>
          fc.record({
            v: fc.array(fc.double({ min: -1, max: 1, noNaN: true }), { minLength: n, maxLength: n }),
            eigenvalues: fc.array(fc.double({ min: 0.1, max: 10, noNaN: true }), { minLength: n, maxLength: n }),
            bad: fc.nat({ max: n - 1 }),
            badValue: fc.double({ min: -10, max: -0.01, noNaN: true }),
          }),
        ),
        ({ v, eigenvalues, bad, badValue }) => {
          // S = U·diag(λ)·U' with U = I − 2vv'/(v'v) orthogonal (Householder) and one λ < 0
          const n = v.length;
          const vv = v.reduce((s, x) => s + x * x, 0);
          const U = Array.from({ length: n }, (_, i) => Array.from({ length: n }, (_, j) => (i === j ? 1 : 0) - (vv > 0 ? (2 * v[i] * v[j]) / vv : 0)));
          const lambda = [...eigenvalues];
          lambda[bad] = badValue;
          const S = Array.from({ length: n }, (_, i) =>
            Array.from({ length: n }, (_, j) => U[i].reduce((s, uik, k) => s + uik * lambda[k] * U[j][k], 0)),
          );
          const sym = S.map((row, i) => row.map((x, j) => 0.5 * (x + S[j][i])));
          expect(['not_positive_definite', 'not_symmetric']).toContain(codeOf({ seq: 0, nu: new Array(n).fill(0), S: sym }));
        },
      ),
      { numRuns: 2000 },
    );
  });

  it('always rejects an exactly singular S = B·B′ (B with fewer columns than rows, small integers: S exact in floating point)', () => {
    fc.assert(
      fc.property(
        fc.integer({ min: 2, max: 6 }).chain((n) =>
          fc.array(fc.array(fc.integer({ min: -20, max: 20 }), { minLength: n - 1, maxLength: n - 1 }), { minLength: n, maxLength: n }),
        ),
        (B) => {
          const n = B.length;
          const S = B.map((bi) => B.map((bj) => bi.reduce((s, x, k) => s + x * bj[k], 0)));
          // Floating-point Cholesky computes the zero pivot of a singular matrix as
          // O(m·eps·κ), κ the condition number of the leading (m−1)×(m−1) block of
          // its correlation matrix (Golub & Van Loan 2013, §4.2.6): a pivot floor
          // of 1e-12 can separate it from zero only while κ is moderate.
          fc.pre(S.every((row, i) => row[i] > 0));
          const d = S.map((row, i) => Math.sqrt(row[i]));
          const lead = new Matrix(S.slice(0, n - 1).map((row, i) => row.slice(0, n - 1).map((v, j) => v / (d[i] * d[j]))));
          const lambda = new EigenvalueDecomposition(lead, { assumeSymmetric: true }).realEigenvalues;
          fc.pre(Math.min(...lambda) > 0 && Math.max(...lambda) / Math.min(...lambda) < 100);
          expect(codeOf({ seq: 0, nu: new Array(n).fill(1), S })).toBe('not_positive_definite');
        },
      ),
      { numRuns: 2000 },
    );
  });
});
