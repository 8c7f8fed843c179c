import fc from 'fast-check';
import { CholeskyDecomposition, Matrix } from 'ml-matrix';
import { normalizedInnovationSquared, sampleStatistics } from '../src/sample/normalized-errors';
import { validateInnovationSample } from '../src/sample/innovation-sample';

describe('NIS, whitened innovation and NEES', () => {
  it('computes ν′S⁻¹ν for a hand-worked 2×2 case', () => {
    // S⁻¹ = (1/5)·[[3, −1], [−1, 2]], ν = (1, 2): ν′S⁻¹ν = (3 − 4 + 8)/5 = 7/5
    const { nis } = sampleStatistics({ seq: 0, nu: [1, 2], S: [[2, 1], [1, 3]] });
    expect(nis).toBeCloseTo(1.4, 14);
  });

  it('whitens ν so that L·w = ν and ‖w‖² is the NIS', () => {
    const raw = { seq: 0, nu: [0.5, -2, 1], S: [[4, 1, 0.5], [1, 3, -0.2], [0.5, -0.2, 2]] };
    const sample = validateInnovationSample(raw);
    const w = new Float64Array(3);
    const nis = normalizedInnovationSquared(sample, w);
    for (let i = 0; i < 3; i++) {
      let Lw = 0;
      for (let k = 0; k <= i; k++) Lw += sample.L[i * 3 + k] * w[k];
      expect(Lw).toBeCloseTo(raw.nu[i], 13);
    }
    expect(nis).toBeCloseTo(w.reduce((s, x) => s + x * x, 0), 14);
  });

  it('computes e′P⁻¹e when the sample carries a reference error', () => {
    const { nees } = sampleStatistics({ seq: 0, nu: [1], S: [[1]], e: [2, 0], P: [[4, 0], [0, 9]] });
    expect(nees).toBeCloseTo(1, 14);
  });

  it('gives the same NIS whether S or its Cholesky factor is sent', () => {
    const S = [[2, 0.3], [0.3, 0.5]];
    const fromS = sampleStatistics({ seq: 0, nu: [1, -1], S });
    const c = new CholeskyDecomposition(new Matrix(S)).lowerTriangularMatrix.to2DArray();
    const fromL = sampleStatistics({ seq: 0, nu: [1, -1], L: c });
    expect(fromL.nis).toBeCloseTo(fromS.nis, 13);
  });
});

describe('NIS, property-based', () => {
  const size = fc.integer({ min: 1, max: 6 });
  const entries = (n: number, min: number, max: number) =>
    fc.array(fc.double({ min, max, noNaN: true }), { minLength: n * n, maxLength: n * n });

  it('is invariant under an invertible change of measurement coordinates (ν → Tν, S → TST′)', () => {
    fc.assert(
      fc.property(
        size.chain((n) =>
          fc.record({
            n: fc.constant(n),
            A: entries(n, -2, 2),
            T: entries(n, -1, 1),
            nu: fc.array(fc.double({ min: -5, max: 5, noNaN: true }), { minLength: n, maxLength: n }),
            scale: fc.double({ min: 1e-3, max: 1e3, noNaN: true }),
          }),
        ),
        ({ n, A, T, nu, scale }) => {
          // S = A·A′ + I (positive definite); T = scale·(I·2 + small) (invertible, moderately conditioned)
          const Am = new Matrix(n, n);
          const Tm = new Matrix(n, n);
          for (let i = 0; i < n; i++) {
            for (let j = 0; j < n; j++) {
              Am.set(i, j, A[i * n + j]);
              Tm.set(i, j, scale * ((i === j ? 2 : 0) + 0.5 * T[i * n + j]));
            }
          }
          const S = Am.mmul(Am.transpose()).add(Matrix.eye(n));
          const TS = Tm.mmul(S).mmul(Tm.transpose());
          const TSsym = TS.add(TS.transpose()).mul(0.5);
          const Tnu = Tm.mmul(Matrix.columnVector(nu)).getColumn(0);
          const before = sampleStatistics({ seq: 0, nu, S: S.to2DArray() }).nis;
          const after = sampleStatistics({ seq: 0, nu: Tnu, S: TSsym.to2DArray() }).nis;
          expect(Math.abs(after - before)).toBeLessThanOrEqual(1e-8 * Math.max(1, before));
        },
      ),
      { numRuns: 1000 },
    );
  });

  it('agrees with ml-matrix (Cholesky solve) on random positive definite S', () => {
    fc.assert(
      fc.property(
        size.chain((n) =>
          fc.record({ A: entries(n, -3, 3), nu: fc.array(fc.double({ min: -5, max: 5, noNaN: true }), { minLength: n, maxLength: n }) }),
        ),
        ({ A, nu }) => {
          const n = nu.length;
          const Am = new Matrix(n, n);
          for (let i = 0; i < n; i++) for (let j = 0; j < n; j++) Am.set(i, j, A[i * n + j]);
          const S = Am.mmul(Am.transpose()).add(Matrix.eye(n).mul(0.1));
          const x = Matrix.columnVector(nu);
          const reference = x.transpose().mmul(new CholeskyDecomposition(S).solve(x)).get(0, 0);
          const { nis } = sampleStatistics({ seq: 0, nu, S: S.to2DArray() });
          expect(Math.abs(nis - reference)).toBeLessThanOrEqual(1e-9 * Math.max(1, reference));
        },
      ),
      { numRuns: 500 },
    );
  });
});
