// The Riccati solver (SDA) and the gains built on it, against closed forms and SciPy.
//
// Reference values: fixtures/design-references.json, made from the repository root by
//     /usr/bin/python3 shared/test/fixtures/design-references.py > shared/test/fixtures/design-references.json
// (Debian's python3-scipy: SciPy 1.10.1, NumPy 1.24.2; the versions are recorded in the file).
// The tests never run Python.
import references from './fixtures/design-references.json';
import { DesignError, lqr, matchSpectra, solveDare, steadyStateKalman } from '../src/design';
import type { Complex, DesignErrorCode } from '../src/design';

type Reference = (typeof references.systems)[number];

function system(name: string): Reference {
  const s = references.systems.find((r) => r.name === name);
  if (!s) throw new Error(`no reference system ${name}`);
  return s;
}

/** ‖actual − expected‖_F / ‖expected‖_F */
function relativeError(actual: number[][], expected: number[][]): number {
  let diff = 0;
  let size = 0;
  expected.forEach((row, i) =>
    row.forEach((v, j) => {
      diff += (actual[i][j] - v) ** 2;
      size += v ** 2;
    }),
  );
  return Math.sqrt(diff / size);
}

function poleMismatch(actual: Complex[], expected: Complex[]): number {
  return matchSpectra(actual, expected).largestMismatch;
}

function refusal(run: () => unknown): { code: DesignErrorCode; message: string } {
  try {
    run();
  } catch (e) {
    if (e instanceof DesignError) return { code: e.code, message: e.message };
    throw e;
  }
  throw new Error('expected a DesignError');
}

/**
 * The scalar DARE x = q + a²·x·r/(r + b²·x) (the general equation with n = m = 1,
 * after a²x − a²b²x²/(r + b²x) = a²xr/(r + b²x)) is the quadratic
 *     b²·x² + β·x − q·r = 0,   β = r·(1 − a²) − q·b²,
 * whose non-negative root is the stabilizing solution:
 *     x = (−β + √(β² + 4·b²·q·r)) / (2·b²)  =  2·q·r / (β + √(β² + 4·b²·q·r))  (the form used when β > 0).
 * Gain k = a·b·x/(r + b²·x); closed-loop pole a − b·k = a·r/(r + b²·x).
 */
function scalarDare(a: number, b: number, q: number, r: number): number {
  const beta = r * (1 - a * a) - q * b * b;
  const root = Math.sqrt(beta * beta + 4 * b * b * q * r);
  return beta > 0 ? (2 * q * r) / (beta + root) : (-beta + root) / (2 * b * b);
}

describe('the scalar Riccati equation against its closed form', () => {
  const cases: [label: string, a: number, b: number, q: number, r: number][] = [
    ['a random walk (a = b = 1, q = 0.01, r = 0.04)', 1, 1, 0.01, 0.04],
    ['the demo cabinet thermal filter (a = 0.98, q = 0.01, r = 0.04, dual form)', 0.98, 1, 0.01, 0.04],
    ['a stable plant with a weak input (a = 0.9, b = 0.5, q = 2, r = 3)', 0.9, 0.5, 2, 3],
    ['an unstable plant with no state weight (a = 1.2, q = 0: x = (a² − 1)·r/b²)', 1.2, 2, 0, 0.7],
    ['an unstable plant with a negative pole (a = −1.5, b = 0.3, q = 1e-3, r = 10)', -1.5, 0.3, 1e-3, 10],
  ];
  it.each(cases)('solves %s to 1e-14 relative', (_, a, b, q, r) => {
    const x = scalarDare(a, b, q, r);
    const { X, residual } = solveDare([[a]], [[b]], [[q]], [[r]]);
    expect(Math.abs(X[0][0] - x)).toBeLessThanOrEqual(1e-14 * x);
    expect(residual).toBeLessThan(1e-15);
    const { K, poles } = lqr([[a]], [[b]], [[q]], [[r]]);
    expect(Math.abs(K[0][0] - (a * b * x) / (r + b * b * x))).toBeLessThanOrEqual(1e-14 * Math.abs(K[0][0]));
    expect(Math.abs(poles[0].re - (a * r) / (r + b * b * x))).toBeLessThan(1e-14);
  });

  it('gives the unstable plant with q = 0 its mirror-image pole 1/a', () => {
    // x = (a² − 1)·r/b² and the pole a·r/(r + b²x) = 1/a: minimum-energy stabilization.
    const a = 1.2;
    const { poles } = lqr([[a]], [[2]], [[0]], [[0.7]]);
    expect(Math.abs(poles[0].re - 1 / a)).toBeLessThan(1e-15);
  });

  it('converges for a closed-loop pole 1e-6 inside the unit circle in under 40 doublings', () => {
    // integrator with a tiny state weight: x ≈ √(q·r) = 1e-6, pole r/(r + x) ≈ 1 − 1e-6
    const { X, iterations } = solveDare([[1]], [[1]], [[1e-12]], [[1]]);
    expect(Math.abs(X[0][0] - scalarDare(1, 1, 1e-12, 1))).toBeLessThan(1e-10 * X[0][0]);
    expect(iterations).toBeLessThan(40);
  });

  it('gives the random-walk filter its textbook steady state P = (q + √(q² + 4qr))/2, S = P + r, L = P/(P + r)', () => {
    const q = 0.01;
    const r = 0.04;
    const P = (q + Math.sqrt(q * q + 4 * q * r)) / 2;
    const f = steadyStateKalman({ A: [[1]], C: [[1]], Q: [[q]], R: [[r]] });
    expect(Math.abs(f.P[0][0] - P)).toBeLessThan(1e-15);
    expect(Math.abs(f.S[0][0] - (P + r))).toBeLessThan(1e-15);
    expect(Math.abs(f.L[0][0] - P / (P + r))).toBeLessThan(1e-15);
    expect(Math.abs(f.M[0][0] - P / (P + r))).toBeLessThan(1e-15);
    expect(Math.abs(f.Pfiltered[0][0] - (P * r) / (P + r))).toBeLessThan(1e-15);
  });
});

describe('Riccati solutions, gains and poles against scipy.linalg.solve_discrete_are (fixtures/design-references.json)', () => {
  // Tolerances per system: matrices as ‖ours − SciPy‖_F/‖SciPy‖_F, poles as the largest distance
  // after optimal pairing. Well-conditioned systems agree to roundoff; the two badly conditioned ones
  // are limited by SciPy's own accuracy (its normalized residual is in the file) and by the
  // conditioning of their poles (see the notes).
  const tolerances: Record<string, { matrices: number; regulatorPoles: number; estimatorPoles: number }> = {
    'tractor-1d': { matrices: 1e-12, regulatorPoles: 1e-13, estimatorPoles: 1e-13 },
    'tractor-planar': { matrices: 1e-12, regulatorPoles: 1e-13, estimatorPoles: 1e-13 },
    'random-walk': { matrices: 1e-13, regulatorPoles: 1e-14, estimatorPoles: 1e-14 },
    'coupled-3': { matrices: 1e-12, regulatorPoles: 1e-13, estimatorPoles: 1e-13 },
    // K ≈ [100, 30, 2.9] places a nearly deadbeat triple at |λ| ≈ 1e-4: such a cluster moves by
    // about (eps·‖BK‖)^(1/3), so its poles are compared to 1e-6 absolute.
    'wide-weights': { matrices: 1e-12, regulatorPoles: 1e-6, estimatorPoles: 1e-8 },
    // X ≈ 6.7e11 against 1.3: SciPy's own normalized residual is 6e-11 (filter 1e-12), ours ~1e-17.
    'nearly-unobservable': { matrices: 1e-8, regulatorPoles: 1e-9, estimatorPoles: 1e-9 },
    // Qx does not see the unstable mode 1.1: SDA alone would return the non-stabilizing smallest solution.
    'unseen-unstable': { matrices: 1e-12, regulatorPoles: 1e-13, estimatorPoles: 1e-13 },
  };

  it('covers the kinds of system the workbench must handle', () => {
    expect(references.versions.scipy).toBe('1.10.1');
    expect(references.systems.map((s) => s.name).sort()).toEqual(Object.keys(tolerances).sort());
  });

  it.each(references.systems.map((s) => [s.name, s] as const))('matches X, K and the regulator poles of %s', (name, s) => {
    const tol = tolerances[name];
    const design = lqr(s.A, s.B, s.Qx, s.Ru);
    expect(relativeError(design.X, s.X)).toBeLessThan(tol.matrices); // scipy.linalg.solve_discrete_are(A, B, Qx, Ru)
    expect(relativeError(design.K, s.K)).toBeLessThan(tol.matrices); // (Ru + BᵀXB)⁻¹BᵀXA from SciPy's X
    expect(poleMismatch(design.poles, s.regulatorPoles)).toBeLessThan(tol.regulatorPoles); // numpy.linalg.eigvals(A − BK)
    expect(design.residual).toBeLessThan(1e-15);
    expect(design.iterations).toBeLessThan(design.newtonSteps === 0 ? 20 : 100);
  });

  it.each(references.systems.map((s) => [s.name, s] as const))('matches P, S, L, M and the estimator poles of %s', (name, s) => {
    const tol = tolerances[name];
    const filter = steadyStateKalman({ A: s.A, C: s.C, G: s.G, Q: s.Q, R: s.R });
    expect(relativeError(filter.P, s.P)).toBeLessThan(tol.matrices); // solve_discrete_are(Aᵀ, Cᵀ, G Q Gᵀ, R)
    expect(relativeError(filter.S, s.S)).toBeLessThan(tol.matrices); // C P Cᵀ + R
    expect(relativeError(filter.L, s.L)).toBeLessThan(tol.matrices); // A P Cᵀ S⁻¹
    expect(relativeError(filter.M, s.M)).toBeLessThan(tol.matrices); // P Cᵀ S⁻¹
    expect(poleMismatch(filter.poles, s.estimatorPoles)).toBeLessThan(tol.estimatorPoles); // eigvals(A − LC)
    expect(filter.residual).toBeLessThan(1e-15);
  });

  it('solves the badly conditioned systems more exactly than the reference, by their residuals', () => {
    for (const name of ['wide-weights', 'nearly-unobservable']) {
      const s = system(name);
      expect(solveDare(s.A, s.B, s.Qx, s.Ru).residual).toBeLessThanOrEqual(s.controlResidual);
      expect(lqr(s.A, s.B, s.Qx, s.Ru).residual).toBeLessThan(1e-15);
    }
  });

  it('puts the barely reachable, barely seen unstable mode 1.05 at its mirror image 1/1.05 in both loops', () => {
    // The limit of a mode the input (or the measurement) barely reaches: the optimal pole is the
    // reflection 1/λ of the unstable open-loop pole (expensive-control limit; from memory,
    // Kwakernaak & Sivan, "Linear Optimal Control Systems", 1972, the discrete-time case).
    const s = system('nearly-unobservable');
    expect(Math.abs(lqr(s.A, s.B, s.Qx, s.Ru).poles[0].re - 1 / 1.05)).toBeLessThan(1e-11);
    expect(Math.abs(steadyStateKalman(s).poles[0].re - 1 / 1.05)).toBeLessThan(1e-11);
  });

  it('reaches the stabilizing solution when the weight does not see an unstable mode (Newton after SDA)', () => {
    const s = system('unseen-unstable');
    const solution = solveDare(s.A, s.B, s.Qx, s.Ru);
    expect(solution.newtonSteps).toBeGreaterThan(0);
    expect(solution.closedLoopSpectralRadius).toBeLessThan(1);
    // the unseen unstable pole 1.1 moves to its mirror image 1/1.1 (minimum-energy stabilization)
    expect(Math.abs(lqr(s.A, s.B, s.Qx, s.Ru).poles[0].re - 1 / 1.1)).toBeLessThan(1e-14);
  });

  it('returns X symmetric, and sorted poles (decreasing modulus)', () => {
    const s = system('coupled-3');
    const { X } = solveDare(s.A, s.B, s.Qx, s.Ru);
    X.forEach((row, i) => row.forEach((v, j) => expect(v).toBe(X[j][i])));
    const { poles } = lqr(s.A, s.B, s.Qx, s.Ru);
    const moduli = poles.map((z) => Math.hypot(z.re, z.im));
    expect([...moduli].sort((a, b) => b - a)).toEqual(moduli);
  });
});

describe('refusals with a stable code and a message naming the matrix', () => {
  const A = [
    [1, 0.1],
    [0, 1],
  ];
  const B = [[0.005], [0.1]];
  const Q = [
    [1, 0],
    [0, 0.5],
  ];
  const R = [[0.1]];

  it('names the wrong dimension', () => {
    expect(refusal(() => solveDare(A, [[0.005], [0.1], [1]], Q, R))).toEqual({
      code: 'dimension',
      message: 'B has 3 rows, it must have 2 (one per state of A)',
    });
    expect(refusal(() => solveDare(A, B, Q, [[0.1, 0], [0, 1]])).message).toBe('R has 2 rows, it must have 1 (B has 1 columns)');
    expect(refusal(() => solveDare([[1, 0.1]], B, Q, R)).message).toBe('A is 1×2, it must be square');
    expect(refusal(() => solveDare(A, B, [[1, 0], [0]], R)).message).toBe('Q row 2 has 1 columns, row 1 has 2');
    expect(refusal(() => steadyStateKalman({ A, C: [[1, 0, 0]], Q: [[1]], R: [[1]] }))).toEqual({
      code: 'dimension',
      message: 'C has 3 columns, it must have 2 (one per state of A)',
    });
    expect(refusal(() => steadyStateKalman({ A, C: [[1, 0]], G: B, Q, R: [[1]] })).message).toBe('Q has 2 rows, it must have 1 (G has 1 columns)');
  });

  it('refuses non-finite entries', () => {
    expect(refusal(() => solveDare(A, B, [[1, 0], [0, NaN]], R))).toEqual({ code: 'not-finite', message: 'Q[2][2] is NaN, not a finite number' });
    expect(refusal(() => solveDare(A, [[Infinity], [0.1]], Q, R)).code).toBe('not-finite');
  });

  it('refuses an asymmetric weight, and accepts asymmetry at roundoff level', () => {
    expect(refusal(() => solveDare(A, B, [[1, 0.1], [0, 1]], R)).code).toBe('not-symmetric');
    expect(() => solveDare(A, B, [[1, 1e-13], [0, 1]], R)).not.toThrow();
  });

  it('refuses an indefinite Q and a singular R', () => {
    const indefinite = refusal(() => solveDare(A, B, [[1, 2], [2, 1]], R));
    expect(indefinite.code).toBe('not-psd');
    expect(indefinite.message).toMatch(/^Q must be positive semidefinite: the smallest eigenvalue of Q is -1/);
    expect(refusal(() => lqr(A, [[1, 0], [0, 1]], Q, [[1, 1], [1, 1]])).code).toBe('not-psd');
    expect(refusal(() => solveDare(A, B, Q, [[0]])).message).toMatch(/^R must be positive definite/);
  });

  it('refuses an unstable mode the input cannot move: no stabilizing solution', () => {
    const e = refusal(() => solveDare([[1.1, 0], [0, 0.5]], [[0], [1]], Q, R));
    expect(e.code).toBe('no-stabilizing-solution');
    expect(e.message).toBe('(A, B) is not stabilizable: the mode λ = 1.1 cannot be moved (rank 1 of 2), so no gain makes the loop stable');
  });

  it('refuses a mode on the unit circle that the weight Q does not see', () => {
    // integrator mode 1 with zero weight: the optimal cost leaves it at 1, which is not stabilizing
    const e = refusal(() => solveDare([[1, 0], [0, 0.5]], [[1], [1]], [[0, 0], [0, 1]], R));
    expect(e.code).toBe('no-stabilizing-solution');
    expect(e.message).toMatch(/^\(A, Q\^½\) has the unobservable mode λ = 1 on the unit circle/);
  });

  it('refuses the demo charge design: (A = I₂, C = [1, 0.05]) is not detectable', () => {
    // seed-demo.ts, cabinet-charge: with A = I every direction is a mode at λ = 1, and C sees only one
    // of them; the combination (−0.05, 1) of state of charge and voltage offset is never measured.
    const charge = { A: [[1, 0], [0, 1]], C: [[1, 0.05]], G: [[1, 0], [0, 1]], Q: [[1e-6, 0], [0, 1e-8]], R: [[1e-4]] };
    const e = refusal(() => steadyStateKalman(charge));
    expect(e.code).toBe('no-stabilizing-solution');
    expect(e.message).toMatch(/^\(A, C\) is not detectable: the mode λ = 1 cannot be seen in the measurements \(observable rank 1 of 2\)/);
  });

  it('refuses a filter whose process noise does not excite a mode on the unit circle', () => {
    const e = refusal(() => steadyStateKalman({ A: [[1, 0], [0, 0.5]], C: [[1, 1]], G: [[0], [1]], Q: [[1]], R: [[1]] }));
    expect(e).toEqual({
      code: 'no-stabilizing-solution',
      message:
        '(A, G Q^½) has the uncontrollable mode λ = 1 on the unit circle: the process noise does not excite it, so the Riccati equation has no stabilizing solution',
    });
  });

  it('stops with did-not-converge when the doubling steps run out', () => {
    const e = refusal(() => solveDare([[1]], [[1]], [[1e-12]], [[1]], { maxIterations: 5 }));
    expect(e.code).toBe('did-not-converge');
    expect(e.message).toMatch(/^the doubling iteration did not converge in 5 steps/);
  });

  it('stops with did-not-converge when the residual check fails', () => {
    expect(refusal(() => solveDare(A, B, Q, R, { residualTolerance: 0 })).code).toBe('did-not-converge');
  });
});
