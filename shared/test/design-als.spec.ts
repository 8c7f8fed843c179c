import { EigenvalueDecomposition, Matrix, inverse, pseudoInverse } from 'ml-matrix';
import references from './fixtures/design-als-references.json';
import {
  AlsError,
  type AlsModel,
  autocovarianceVector,
  buildAlsSystem,
  covariancesFromTheta,
  defaultBlockLength,
  estimateNoiseCovariances,
  innovationAutocovariances,
  nnls,
  residualNorm,
  thetaFromCovariances,
} from '../src/design/als';
import { simulateInnovations } from '../src/design/als-simulate';
import { Random } from './support/random';

// Reference values: shared/test/fixtures/design-als-references.json, made by
//   /usr/bin/python3 shared/test/fixtures/design-als-references.py > shared/test/fixtures/design-als-references.json
// (Debian's NumPy 1.24.2 / SciPy 1.10.1: the ALS matrix from the paper's Kronecker formulas,
// cross-checked there against scipy.linalg.solve_discrete_lyapunov, and numpy.linalg.lstsq).

const dt = 0.1;
const randomWalk = { A: [[1]], C: [[1]] };
const tracker = { A: [[1, dt], [0, 1]], C: [[1, 0]] }; // constant velocity, position measured

/**
 * Steady-state one-step predictor gain by iterating the Riccati difference equation to convergence:
 *   P⁺ = A P Aᵀ + G Q Gᵀ − A P Cᵀ (C P Cᵀ + R)⁻¹ C P Aᵀ,   L = A P Cᵀ (C P Cᵀ + R)⁻¹
 */
function predictorGain(A: number[][], C: number[][], G: number[][], Q: number[][], R: number[][]): number[][] {
  const a = new Matrix(A);
  const c = new Matrix(C);
  const GQG = new Matrix(G).mmul(new Matrix(Q)).mmul(new Matrix(G).transpose());
  let P = GQG.clone();
  for (let k = 0; k < 200000; k++) {
    const S = c.mmul(P).mmul(c.transpose()).add(new Matrix(R));
    const L = a.mmul(P).mmul(c.transpose()).mmul(inverse(S));
    const next = a.mmul(P).mmul(a.transpose()).add(GQG).sub(L.mmul(S).mmul(L.transpose()));
    const change = Matrix.sub(next, P).abs().max();
    P = next;
    if (change <= 1e-15 * P.abs().max()) break;
  }
  const S = c.mmul(P).mmul(c.transpose()).add(new Matrix(R));
  return a.mmul(P).mmul(c.transpose()).mmul(inverse(S)).to2DArray();
}

function identity(n: number): number[][] {
  return Matrix.eye(n).to2DArray();
}

function simulate(model: AlsModel, Qw: number[][], Rv: number[][], samples: number, seed: number): number[][] {
  const random = new Random(seed);
  return simulateInnovations(model, { Qw, Rv }, { samples, burnIn: 2000 }, () => random.normal());
}

function minEigenvalue(X: number[][]): number {
  return Math.min(...new EigenvalueDecomposition(new Matrix(X), { assumeSymmetric: true }).realEigenvalues);
}

function clipPsd(X: number[][]): number[][] {
  const e = new EigenvalueDecomposition(new Matrix(X), { assumeSymmetric: true });
  const V = e.eigenvectorMatrix;
  return V.clone()
    .mulRowVector(e.realEigenvalues.map((l) => Math.max(l, 0)))
    .mmul(V.transpose())
    .to2DArray();
}

function maxAbsDifference(a: number[][], b: number[][]): number {
  return Math.max(...a.flatMap((row, i) => row.map((v, j) => Math.abs(v - b[i][j]))));
}

describe('the ALS system against NumPy (fixtures/design-als-references.json)', () => {
  it.each(references.cases.map((c) => [c.name, c] as const))('assembles the same autocovariances, ALS matrix and least-squares solution for %s', (_, c) => {
    const model: AlsModel = c.model;
    const estimateQ = c.estimateQ as 'full' | 'diagonal';
    const estimateR = c.estimateR as 'full' | 'diagonal';
    const sample = innovationAutocovariances(c.segments, c.lags);
    const b = autocovarianceVector(sample.C);
    // b = vec[Ĉ_0; …; Ĉ_{N−1}] from the script (two segments in the first case, never paired across)
    b.forEach((v, i) => expect(Math.abs(v - c.b[i])).toBeLessThan(1e-13 * Math.max(1, Math.abs(c.b[i]))));

    const system = buildAlsSystem(model, c.lags, estimateQ, estimateR);
    const M = system.matrix.to2DArray();
    const scale = Math.max(...c.matrix.flat().map(Math.abs));
    // 𝒜_N from the script's Kronecker construction (numpy), checked there against solve_discrete_lyapunov
    expect(M.length).toBe(c.matrix.length);
    expect(maxAbsDifference(M, c.matrix)).toBeLessThan(1e-12 * scale);

    // numpy.linalg.lstsq(𝒜_N, b)
    const theta = pseudoInverse(system.matrix).mmul(Matrix.columnVector(b)).getColumn(0);
    theta.forEach((v, i) => expect(Math.abs(v - c.lstsqTheta[i])).toBeLessThan(1e-9 * Math.max(1, Math.abs(c.lstsqTheta[i]))));

    const result = estimateNoiseCovariances(model, c.segments, { lags: c.lags, estimateQ, estimateR });
    const free = covariancesFromTheta(system, c.lstsqTheta);
    expect(maxAbsDifference(result.unconstrained.Q, free.Q)).toBeLessThan(1e-9);
    expect(maxAbsDifference(result.unconstrained.R, free.R)).toBeLessThan(1e-9);
    // ‖𝒜_N θ − b‖ at the lstsq solution
    expect(Math.abs(result.unconstrained.residualNorm - c.residualNorm)).toBeLessThan(1e-10);
    // numpy.linalg.matrix_rank and svd of 𝒜_N with unit-norm columns
    expect(result.rank).toBe(c.lstsqRank);
    result.singularValues.forEach((s, i) => expect(Math.abs(s - c.scaledSingularValues[i])).toBeLessThan(1e-12));
  });
});

describe('recovery of known Q and R from the innovations of a mistuned filter', () => {
  const counts = [2000, 20000, 100000];
  const seeds = [1, 2, 3, 4, 5, 6, 7, 8];

  /** Mean over seeds of the RMS relative error over the estimated diagonal entries of Q and R, and each entry's mean relative error. */
  function errorsBySampleCount(model: AlsModel, Qw: number[][], Rv: number[][]) {
    return counts.map((n) => {
      const entryErrors: number[] = [];
      let rms = 0;
      seeds.forEach((seed, s) => {
        const innovations = simulate(model, Qw, Rv, n, 7919 * seed + n);
        const result = estimateNoiseCovariances(model, [innovations], { lags: 15 });
        expect(result.identifiable.Q && result.identifiable.R).toBe(true);
        const relative = [
          ...Qw.map((row, i) => Math.abs(result.Q[i][i] - row[i]) / row[i]),
          ...Rv.map((row, i) => Math.abs(result.R[i][i] - row[i]) / row[i]),
        ];
        relative.forEach((e, k) => (entryErrors[k] = (s === 0 ? 0 : entryErrors[k]) + e / seeds.length));
        rms += Math.sqrt(relative.reduce((a, e) => a + e * e, 0) / relative.length) / seeds.length;
      });
      return { n, rms, entryErrors };
    });
  }

  function expectShrinkingLikeOneOverRootN(errors: ReturnType<typeof errorsBySampleCount>) {
    const [e2k, e20k, e100k] = errors.map((e) => e.rms);
    expect(e20k).toBeLessThan(e2k);
    expect(e100k).toBeLessThan(e20k);
    // 1/√n predicts ratios √10 ≈ 3.2 and √50 ≈ 7.1; with 8 seeds allow a factor of about 2
    expect(e2k / e20k).toBeGreaterThan(1.5);
    expect(e2k / e100k).toBeGreaterThan(3.5);
    // e·√n stays within a factor 2.5 of its mean: the 1/√n rate, not a floor
    const scaled = errors.map((e) => e.rms * Math.sqrt(e.n));
    const mean = scaled.reduce((a, v) => a + v, 0) / scaled.length;
    scaled.forEach((v) => expect(v / mean).toBeGreaterThan(0.4));
    scaled.forEach((v) => expect(v / mean).toBeLessThan(2.5));
  }

  it('recovers the random walk (A = 1, C = 1) Q_w = 0.5 and R_v = 2 through a filter tuned with Q = 0.05, R = 4: RMS relative error below 15 %, 5 %, 3 % at 2,000, 20,000, 100,000 samples', () => {
    const Qw = [[0.5]];
    const Rv = [[2]];
    const L = predictorGain(randomWalk.A, randomWalk.C, [[1]], [[0.05]], [[4]]);
    const errors = errorsBySampleCount({ ...randomWalk, L }, Qw, Rv);
    expectShrinkingLikeOneOverRootN(errors);
    // achieved (8 seeds): 9.4 %, 2.9 %, 1.6 %
    expect(errors[0].rms).toBeLessThan(0.15);
    expect(errors[1].rms).toBeLessThan(0.05);
    expect(errors[2].rms).toBeLessThan(0.03);
    errors[2].entryErrors.forEach((e) => expect(e).toBeLessThan(0.15));
  });

  it('recovers the constant-velocity tracker (dt 0.1 s) diagonal Q_w = diag(0.04, 0.1) and R_v = 0.25 through a filter with Q ten times too low and R four times too high: RMS relative error below 40 %, 10 %, 5 % at 2,000, 20,000, 100,000 samples, each entry within 15 %', () => {
    const Qw = [
      [0.04, 0],
      [0, 0.1],
    ];
    const Rv = [[0.25]];
    const G = identity(2);
    const L = predictorGain(tracker.A, tracker.C, G, [
      [0.004, 0],
      [0, 0.01],
    ], [[1]]);
    const errors = errorsBySampleCount({ ...tracker, G, L }, Qw, Rv);
    expectShrinkingLikeOneOverRootN(errors);
    // achieved (8 seeds): 25 %, 6.0 %, 2.6 % (Q_11 3.3 %, Q_22 2.8 %, R 0.6 % at 100,000)
    expect(errors[0].rms).toBeLessThan(0.4);
    expect(errors[1].rms).toBeLessThan(0.1);
    expect(errors[2].rms).toBeLessThan(0.05);
    errors[2].entryErrors.forEach((e) => expect(e).toBeLessThan(0.15));
  });
});

describe('identifiability', () => {
  const G = identity(2);
  const L = predictorGain(tracker.A, tracker.C, G, [
    [0.004, 0],
    [0, 0.01],
  ], [[1]]);
  const innovations = simulate({ ...tracker, G, L }, [
    [0.04, 0],
    [0, 0.1],
  ], [[0.25]], 5000, 99);

  it('reports Q and R as determined for the tracker with diagonal Q (3 unknowns, full column rank)', () => {
    const result = estimateNoiseCovariances({ ...tracker, G, L }, [innovations]);
    expect(result.rank).toBe(3);
    expect(result.unknowns).toBe(3);
    expect(result.identifiable).toMatchObject({ Q: true, R: true, undetermined: [] });
    expect(Number.isFinite(result.condition)).toBe(true);
  });

  it('says the data do not determine a full Q for the tracker with one measured component (4 unknowns, rank 3)', () => {
    // A scalar output of a 2-state model: its spectrum has 3 free numerator coefficients, fewer than the 3 + 1 unknowns.
    const result = estimateNoiseCovariances({ ...tracker, G, L }, [innovations], { estimateQ: 'full' });
    expect(result.unknowns).toBe(4);
    expect(result.rank).toBe(3);
    expect(result.identifiable.Q).toBe(false);
    expect(result.identifiable.reason).toMatch(/do not determine Q|determine neither Q nor R/);
    expect(result.identifiable.undetermined.some((u) => u.startsWith('Q'))).toBe(true);
    expect(result.condition).toBeGreaterThan(1e8);
  });

  it('says the data do not determine Q when G has a null space (two noise inputs along one direction) but still determine R', () => {
    const Gsame = [
      [dt * dt / 2, dt * dt / 2],
      [dt, dt],
    ];
    const result = estimateNoiseCovariances({ ...tracker, G: Gsame, L }, [innovations]);
    expect(result.identifiable.Q).toBe(false);
    expect(result.identifiable.R).toBe(true);
    expect(result.identifiable.undetermined).toEqual(['Q[0][0]', 'Q[1][1]']);
    expect(result.identifiable.reason).toMatch(/do not determine Q/);
  });
});

describe('the positive semidefinite constraint', () => {
  const diagonalCase = references.cases[0];
  const fullCase = references.cases[1];

  it('returns the nonnegative least-squares minimizer, not the clipped unconstrained solution, when the unconstrained Q has a negative variance', () => {
    const result = estimateNoiseCovariances(diagonalCase.model, diagonalCase.segments, { lags: diagonalCase.lags });
    expect(result.unconstrained.Q[0][0]).toBeLessThan(0); // numpy.linalg.lstsq gives −0.0448 (fixture)
    expect(result.solver.method).toBe('nnls');
    expect(result.Q[0][0]).toBe(0);
    expect(result.Q[1][1]).toBeGreaterThan(0);
    const system = buildAlsSystem(diagonalCase.model, diagonalCase.lags);
    const b = diagonalCase.b;
    const clipped = thetaFromCovariances(
      system,
      result.unconstrained.Q.map((row) => row.map((v) => Math.max(v, 0))),
      result.unconstrained.R.map((row) => row.map((v) => Math.max(v, 0))),
    );
    expect(result.residualNorm).toBeLessThan(residualNorm(system.matrix, clipped, b));
    // Karush–Kuhn–Tucker: gradient ∇ = 𝒜ᵀ(𝒜θ − b) is 0 on the free entries and ≥ 0 on those held at 0
    const theta = thetaFromCovariances(system, result.Q, result.R);
    const r = Matrix.sub(system.matrix.mmul(Matrix.columnVector(theta)), Matrix.columnVector(b));
    const gradient = system.matrix.transpose().mmul(r).getColumn(0);
    theta.forEach((t, i) => {
      if (t > 0) expect(Math.abs(gradient[i])).toBeLessThan(1e-12);
      else expect(gradient[i]).toBeGreaterThan(0);
    });
  });

  it('finds the same minimizer by ADMM on the PSD cone as by NNLS when a 1×1 block is declared full', () => {
    const nnlsResult = estimateNoiseCovariances(diagonalCase.model, diagonalCase.segments, { lags: diagonalCase.lags });
    const admmResult = estimateNoiseCovariances(diagonalCase.model, diagonalCase.segments, { lags: diagonalCase.lags, estimateR: 'full' });
    expect(admmResult.solver.method).toBe('admm');
    expect(admmResult.solver.converged).toBe(true);
    expect(maxAbsDifference(admmResult.Q, nnlsResult.Q)).toBeLessThan(1e-8);
    expect(maxAbsDifference(admmResult.R, nnlsResult.R)).toBeLessThan(1e-8);
  });

  it('keeps full Q and R positive semidefinite with an objective no larger than eigenvalue clipping, and satisfies the KKT conditions, when the unconstrained R is indefinite', () => {
    const estimateQ = 'full';
    const estimateR = 'full';
    const result = estimateNoiseCovariances(fullCase.model, fullCase.segments, { lags: fullCase.lags, estimateQ, estimateR });
    expect(minEigenvalue(result.unconstrained.R)).toBeLessThan(0); // lstsq R has a negative eigenvalue (fixture)
    expect(result.solver).toMatchObject({ method: 'admm', converged: true });
    expect(minEigenvalue(result.Q)).toBeGreaterThanOrEqual(-1e-12);
    expect(minEigenvalue(result.R)).toBeGreaterThanOrEqual(-1e-12);
    const system = buildAlsSystem(fullCase.model, fullCase.lags, estimateQ, estimateR);
    const clipped = thetaFromCovariances(system, clipPsd(result.unconstrained.Q), clipPsd(result.unconstrained.R));
    expect(result.residualNorm).toBeLessThan(residualNorm(system.matrix, clipped, fullCase.b));
    expect(result.residualNorm).toBeGreaterThanOrEqual(result.unconstrained.residualNorm);
    // KKT on the PSD cone: the gradient matrices ∇_Q, ∇_R are PSD and orthogonal to Q, R (trace(X ∇_X) = 0)
    const theta = thetaFromCovariances(system, result.Q, result.R);
    const r = Matrix.sub(system.matrix.mmul(Matrix.columnVector(theta)), Matrix.columnVector(fullCase.b));
    const g = system.matrix.transpose().mmul(r).getColumn(0);
    // ∂f/∂θ_ij = 2 (∇_X)_ij off the diagonal (θ_ij stands for X_ij and X_ji)
    const gradient = covariancesFromTheta(system, g.map((v, k) => (system.unknowns[k].i === system.unknowns[k].j ? v : v / 2)));
    for (const [X, GX] of [
      [result.Q, gradient.Q],
      [result.R, gradient.R],
    ]) {
      expect(minEigenvalue(GX)).toBeGreaterThan(-1e-7);
      const inner = X.reduce((a, row, i) => a + row.reduce((s, v, j) => s + v * GX[j][i], 0), 0);
      expect(Math.abs(inner)).toBeLessThan(1e-8);
    }
  });
});

describe('block bootstrap intervals', () => {
  const L = predictorGain(randomWalk.A, randomWalk.C, [[1]], [[0.05]], [[4]]);
  const model = { ...randomWalk, L };

  it('gives 5–95 % intervals that contain the true Q and R, narrow with more samples, and repeat exactly for a seed', () => {
    const short = simulate(model, [[0.5]], [[2]], 20000, 4242);
    const long = simulate(model, [[0.5]], [[2]], 100000, 4243);
    const bootstrap = { replicates: 200, seed: 17 };
    const a = estimateNoiseCovariances(model, [short], { bootstrap });
    const again = estimateNoiseCovariances(model, [short], { bootstrap });
    const other = estimateNoiseCovariances(model, [short], { bootstrap: { ...bootstrap, seed: 18 } });
    const b = estimateNoiseCovariances(model, [long], { bootstrap });
    expect(again.intervals).toEqual(a.intervals);
    expect(other.intervals).not.toEqual(a.intervals);
    for (const r of [a, b]) {
      const iv = r.intervals!;
      expect(iv.level).toBe(0.9);
      expect(iv.replicates).toBe(200);
      // ⌈n^{1/3}⌉ = 28 and 47, but the filter's memory (ρ(𝒜) = 0.894: 14 lags + 42 steps to 1 %) is longer
      expect(iv.blockLength).toBe(defaultBlockLength(r.samples, 15, r.spectralRadius));
      expect(iv.blockLength).toBe(56);
      expect(iv.Q.lower[0][0]).toBeLessThan(0.5);
      expect(iv.Q.upper[0][0]).toBeGreaterThan(0.5);
      expect(iv.R.lower[0][0]).toBeLessThan(2);
      expect(iv.R.upper[0][0]).toBeGreaterThan(2);
      expect(iv.Q.lower[0][0]).toBeLessThanOrEqual(r.Q[0][0]);
      expect(iv.Q.upper[0][0]).toBeGreaterThanOrEqual(r.Q[0][0]);
    }
    const width = (r: typeof a) => r.intervals!.Q.upper[0][0] - r.intervals!.Q.lower[0][0];
    // width ∝ 1/√n: ratio √5 ≈ 2.2 expected
    expect(width(a) / width(b)).toBeGreaterThan(1.5);
    expect(width(a) / width(b)).toBeLessThan(3.5);
  });

  it('resamples blocks within independent segments (bench runs) and keeps the point estimate of the pooled segments', () => {
    const runs = [1, 2, 3].map((k) => simulate(model, [[0.5]], [[2]], 4000, 300 + k));
    const result = estimateNoiseCovariances(model, runs, { bootstrap: { replicates: 50, seed: 5, blockLength: 40 } });
    expect(result.samples).toBe(12000);
    expect(result.intervals!.blockLength).toBe(40);
    expect(result.intervals!.Q.lower[0][0]).toBeLessThan(result.Q[0][0]);
    expect(result.intervals!.Q.upper[0][0]).toBeGreaterThan(result.Q[0][0]);
  });
});

describe('inputs and forms', () => {
  it('pairs samples only within a segment when estimating autocovariances', () => {
    // segments [1, 2] and [3]: Ĉ_1 = (2·1)/1, never 3·2
    const sample = innovationAutocovariances([[[1], [2]], [[3]]], 2);
    expect(sample.C[0][0][0]).toBeCloseTo((1 + 4 + 9) / 3, 15);
    expect(sample.C[1][0][0]).toBe(2);
    expect(sample.pairs).toEqual([3, 1]);
  });

  it('converts a filter-form gain M to the predictor gain A·M', () => {
    const M = [[0.3], [0.2]];
    const Lpred = new Matrix(tracker.A).mmul(new Matrix(M)).to2DArray();
    const innovations = simulate({ ...tracker, L: Lpred }, [[0.04, 0], [0, 0.1]], [[0.25]], 3000, 3);
    const viaFilter = estimateNoiseCovariances({ ...tracker, L: M, gainForm: 'filter' }, [innovations]);
    const viaPredictor = estimateNoiseCovariances({ ...tracker, L: Lpred }, [innovations]);
    expect(viaFilter.Q).toEqual(viaPredictor.Q);
    expect(viaFilter.R).toEqual(viaPredictor.R);
  });

  it('fits autocovariances for plotting: Ĉ_j from the data and C_j(Q̂, R̂) from the model, N of each', () => {
    const L = predictorGain(randomWalk.A, randomWalk.C, [[1]], [[0.05]], [[4]]);
    const innovations = simulate({ ...randomWalk, L }, [[0.5]], [[2]], 20000, 8);
    const result = estimateNoiseCovariances({ ...randomWalk, L }, [innovations], { lags: 10 });
    expect(result.lags).toBe(10);
    expect(result.autocovariances.estimated).toHaveLength(10);
    expect(result.autocovariances.fitted).toHaveLength(10);
    const residual = Math.sqrt(
      result.autocovariances.estimated.reduce((a, Cj, j) => a + (Cj[0][0] - result.autocovariances.fitted[j][0][0]) ** 2, 0),
    );
    expect(Math.abs(residual - result.residualNorm)).toBeLessThan(1e-12);
  });

  it('rejects an unstable predictor, innovations of the wrong length and too few samples for the lags, saying what is wrong', () => {
    const innovations = simulate({ ...randomWalk, L: [[0.5]] }, [[0.5]], [[2]], 100, 1);
    expect(() => estimateNoiseCovariances({ ...randomWalk, L: [[0]] }, [innovations])).toThrow(/spectral radius of A − L·C is 1/);
    expect(() => estimateNoiseCovariances({ ...randomWalk, L: [[0.5]] }, [[[1], [2, 3]]])).toThrow(/segment 0, sample 1 has 2 components, expected p = 1/);
    expect(() => estimateNoiseCovariances({ ...randomWalk, L: [[0.5]] }, [innovations.slice(0, 20)], { lags: 15 })).toThrow(/at least 30/);
    expect(() => estimateNoiseCovariances({ A: [[1]], C: [[1, 0]], L: [[0.5]] }, [innovations])).toThrow(/C must have n = 1 columns/);
    expect(() => estimateNoiseCovariances({ ...randomWalk, L: [[0.5]] }, [innovations], { lags: 0 })).toThrow(AlsError);
  });

  it('solves nonnegative least squares exactly on a textbook-sized problem', () => {
    // min ‖M x − b‖, x ≥ 0: the unconstrained solution (1, −1) is infeasible; the optimum holds x₂ at 0
    const M = new Matrix([
      [1, 1],
      [0, 1],
      [1, 0],
    ]);
    const { x } = nnls(M, [0, -1, 1]);
    // x₂ = 0 ⇒ min (x₁)² + 1 + (x₁ − 1)² ⇒ x₁ = 1/2; gradient on x₂: [1,1,0]·(M x − b) = 1/2 + 1 > 0
    expect(x[0]).toBeCloseTo(0.5, 14);
    expect(x[1]).toBe(0);
  });
});
