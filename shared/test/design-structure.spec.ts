// Structure of a design: controllability and observability (staircase rank test), stabilizability and
// detectability, definiteness, and the separation-principle check of the combined loop.
//
// Reference values: fixtures/design-references.json, made from the repository root by
//     /usr/bin/python3 shared/test/fixtures/design-references.py > shared/test/fixtures/design-references.json
// (Debian's python3-scipy: SciPy 1.10.1, NumPy 1.24.2). The tests never run Python.
import references from './fixtures/design-references.json';
import {
  DesignError,
  controllability,
  definiteness,
  detectability,
  eigenvalues,
  lqr,
  matchSpectra,
  observability,
  pbhMargin,
  separationCheck,
  stabilizability,
  steadyStateKalman,
} from '../src/design';

type Reference = (typeof references.systems)[number];

function system(name: string): Reference {
  const s = references.systems.find((r) => r.name === name);
  if (!s) throw new Error(`no reference system ${name}`);
  return s;
}

/** T·M·Tᵀ for a rotation T by angle θ (a similarity for square M when applied as T M Tᵀ). */
function rotate(M: number[][], theta: number): number[][] {
  const c = Math.cos(theta);
  const s = Math.sin(theta);
  const T = [
    [c, -s],
    [s, c],
  ];
  const TM = T.map((row) => [0, 1].map((j) => row[0] * M[0][j] + row[1] * M[1][j]));
  return TM.map((row) => [0, 1].map((j) => row[0] * T[j][0] + row[1] * T[j][1]));
}

const dt = 0.1;
const tracker = [
  [1, dt],
  [0, 1],
];

describe('controllability and observability by the staircase rank test', () => {
  it('finds the constant-velocity tracker controllable by acceleration and observable from position', () => {
    expect(controllability(tracker, [[(dt * dt) / 2], [dt]])).toEqual({ controllable: true, rank: 2, states: 2, uncontrollableModes: [] });
    expect(observability(tracker, [[1, 0]])).toEqual({ observable: true, rank: 2, states: 2, unobservableModes: [] });
  });

  it('finds that a velocity-only measurement leaves the position unobservable (mode λ = 1)', () => {
    const report = observability(tracker, [[0, 1]]);
    expect(report.observable).toBe(false);
    expect(report.rank).toBe(1);
    expect(report.unobservableModes).toHaveLength(1);
    expect(report.unobservableModes[0].re).toBeCloseTo(1, 14);
    expect(report.unobservableModes[0].pbh).toBeLessThan(1e-15);
    expect(detectability(tracker, [[0, 1]]).detectable).toBe(false);
  });

  it('decides the rank without eigenvalues: in rotated coordinates, where the Jordan block at 1 has eigenvalues off by ~1e-8, it still finds one unobservable mode', () => {
    // Same system in coordinates z = T x: A' = T A Tᵀ, C' = C Tᵀ.
    const theta = 0.7;
    const A = rotate(tracker, theta);
    const C = [[-Math.sin(theta), Math.cos(theta)]]; // [0, 1]·Tᵀ
    const computed = eigenvalues(A);
    // the computed eigenvalues of a defective matrix are only accurate to about √eps
    expect(Math.max(...computed.map((z) => Math.hypot(z.re - 1, z.im)))).toBeGreaterThan(1e-12);
    const report = observability(A, C);
    expect(report.observable).toBe(false);
    expect(report.rank).toBe(1);
    expect(Math.abs(report.unobservableModes[0].re - 1)).toBeLessThan(1e-14);
  });

  it('says the demo charge design (A = I₂, C = [1, 0.05]) is not observable and not detectable', () => {
    // seed-demo.ts / plant-models.ts, cabinet-charge. A = I makes every direction a mode at λ = 1,
    // so rank [A − I; C] = rank C = 1 < 2: the direction (−0.05, 1) (state of charge against
    // voltage offset) never reaches the voltage. Its filter covariance grows without bound there.
    const A = [
      [1, 0],
      [0, 1],
    ];
    const C = [[1, 0.05]];
    const report = observability(A, C);
    expect(report.observable).toBe(false);
    expect(report.rank).toBe(1);
    expect(report.unobservableModes.map((m) => [m.re, m.im, m.pbh])).toEqual([[1, 0, 0]]);
    expect(detectability(A, C)).toEqual({ detectable: false, unstableUnobservableModes: report.unobservableModes });
  });

  it('tells stabilizable from not: an uncontrollable mode inside the unit circle is harmless, outside it is not', () => {
    const B = [[0], [1]];
    const notStabilizable = stabilizability(
      [
        [1.1, 0],
        [0, 0.5],
      ],
      B,
    );
    expect(notStabilizable.stabilizable).toBe(false);
    expect(notStabilizable.unstableUncontrollableModes.map((m) => m.re)).toEqual([1.1]);
    const stabilizable = stabilizability(
      [
        [0.5, 0],
        [0, 1.1],
      ],
      B,
    );
    expect(stabilizable.stabilizable).toBe(true);
    expect(
      controllability(
        [
          [0.5, 0],
          [0, 1.1],
        ],
        B,
      ).uncontrollableModes.map((m) => m.re),
    ).toEqual([0.5]);
  });

  it('finds an uncontrollable complex pair and confirms it by the PBH margin', () => {
    // a rotation by 0.3 rad with radius 1.02 in states 1–2, untouched by the input on state 3
    const r = 1.02;
    const A = [
      [r * Math.cos(0.3), -r * Math.sin(0.3), 0],
      [r * Math.sin(0.3), r * Math.cos(0.3), 0],
      [0, 0, 0.4],
    ];
    const B = [[0], [0], [1]];
    const report = controllability(A, B);
    expect(report.rank).toBe(1);
    expect(report.uncontrollableModes).toHaveLength(2);
    for (const mode of report.uncontrollableModes) {
      expect(Math.abs(mode.modulus - r)).toBeLessThan(1e-14);
      expect(Math.abs(Math.abs(mode.im) - r * Math.sin(0.3))).toBeLessThan(1e-14);
      expect(mode.pbh).toBeLessThan(1e-15);
      expect(pbhMargin(A, B, mode)).toBeLessThan(1e-15);
    }
    expect(stabilizability(A, B).stabilizable).toBe(false);
    // a controllable mode has a PBH margin of order one
    expect(pbhMargin(A, B, { re: 0.4, im: 0 })).toBeGreaterThan(0.1);
  });

  it('keeps a weakly but truly observable mode (coupling 1e-6) observable under the default tolerance 1e-10', () => {
    const s = system('nearly-unobservable');
    expect(observability(s.A, s.C).observable).toBe(true);
    expect(controllability(s.A, s.B).controllable).toBe(true);
    expect(observability(s.A, s.C, { rankTolerance: 1e-5 }).observable).toBe(false);
  });

  it('finds every reference system controllable and observable', () => {
    for (const s of references.systems) {
      expect([s.name, controllability(s.A, s.B).controllable, observability(s.A, s.C).observable]).toEqual([s.name, true, true]);
    }
  });

  it('refuses a C whose columns do not match A, naming the dimension', () => {
    expect(() => observability(tracker, [[1, 0, 0]])).toThrow(new DesignError('dimension', 'C has 3 columns, it must have 2 (one per state of A)'));
  });
});

describe('symmetry and definiteness with tolerances', () => {
  it('accepts a badly scaled diagonal covariance as positive definite (units do not matter)', () => {
    const d = definiteness([
      [1e-8, 0],
      [0, 1e8],
    ]);
    expect(d.symmetric).toBe(true);
    expect(d.positiveDefinite).toBe(true);
    expect(d.scaledMinEigenvalue).toBe(1);
  });

  it('tells semidefinite from definite, and indefinite from both', () => {
    const semidefinite = definiteness([
      [1, 1],
      [1, 1],
    ]);
    expect([semidefinite.positiveSemidefinite, semidefinite.positiveDefinite]).toEqual([true, false]);
    const withZeroRow = definiteness([
      [0, 0],
      [0, 2],
    ]);
    expect([withZeroRow.positiveSemidefinite, withZeroRow.positiveDefinite]).toEqual([true, false]);
    const indefinite = definiteness([
      [1, 2],
      [2, 1],
    ]);
    expect(indefinite.eigenvalues).toEqual([-1, 3].map((v) => expect.closeTo(v, 14)));
    expect([indefinite.positiveSemidefinite, indefinite.positiveDefinite]).toEqual([false, false]);
    expect(definiteness([[0, 1e-3], [1e-3, 1]]).positiveSemidefinite).toBe(false); // zero variance, nonzero covariance
  });

  it('judges symmetry relative to the largest entry', () => {
    expect(definiteness([[1e6, 1e-5], [0, 1]]).symmetric).toBe(true); // 1e-11 relative
    expect(definiteness([[1, 1e-5], [0, 1]]).symmetric).toBe(false);
    expect(definiteness([[1, 1e-5], [0, 1]], { symmetryTolerance: 1e-4 }).symmetric).toBe(true);
  });
});

describe('the separation principle: the combined loop has the poles eig(A − BK) ∪ eig(A − LC)', () => {
  function loop(name: string) {
    const s = system(name);
    const { K } = lqr(s.A, s.B, s.Qx, s.Ru);
    const { L } = steadyStateKalman({ A: s.A, C: s.C, G: s.G, Q: s.Q, R: s.R });
    return { s, report: separationCheck(s.A, s.B, s.C, K, L) };
  }

  it.each(['tractor-planar', 'coupled-3', 'tractor-1d'])('agrees to 1e-9 on %s, and its combined poles equal numpy.linalg.eigvals of the combined matrix', (name) => {
    const { s, report } = loop(name);
    expect(report.verdict).toBe('agree');
    expect(report.largestMismatch).toBeLessThan(1e-13); // observed ≤ 7e-15
    expect(report.combined).toHaveLength(2 * s.states);
    // numpy.linalg.eigvals([[A, −BK], [LC, A − BK − LC]]) with SciPy's K and L
    expect(matchSpectra(report.combinedPoles, s.combinedPoles).largestMismatch).toBeLessThan(1e-12);
    // and the union is SciPy's regulator and estimator poles
    expect(matchSpectra([...report.regulatorPoles, ...report.estimatorPoles], [...s.regulatorPoles, ...s.estimatorPoles]).largestMismatch).toBeLessThan(1e-12);
    expect(report.roundoffEstimate).toBeLessThan(1e-11);
  });

  it('holds for any gains, not only optimal ones (the identity behind the check)', () => {
    const s = system('coupled-3');
    const K = [
      [0.1, -0.2, 0.3],
      [0.05, 0.4, -0.1],
    ];
    const L = [
      [0.3, 0],
      [0.1, 0.2],
      [0, 0.5],
    ];
    const report = separationCheck(s.A, s.B, s.C, K, L);
    expect(report.verdict).toBe('agree');
    expect(report.largestMismatch).toBeLessThan(1e-9);
  });

  it.each(['wide-weights', 'nearly-unobservable'])('calls %s ill-conditioned: its combined poles cannot be computed to the tolerance, and roundoff explains the gap', (name) => {
    // wide-weights: a nearly deadbeat loop, six poles within 1e-2 of 0; nearly-unobservable: entries
    // of 1e5 around double poles. The combined eigenvalues move by up to κ(V)·eps·‖M‖ (Bauer–Fike).
    const { report } = loop(name);
    expect(report.verdict).toBe('ill-conditioned');
    expect(report.largestMismatch).toBeGreaterThan(1e-8);
    expect(report.largestMismatch).toBeLessThanOrEqual(report.roundoffEstimate);
  });

  it('pairs the spectra optimally, not greedily', () => {
    // greedy pairing in order would match 0.5↔0.45 and leave 0↔1 (distance 1); the optimum is 0.5
    const a = [
      { re: 0.5, im: 0 },
      { re: 0, im: 0 },
    ];
    const b = [
      { re: 0.45, im: 0 },
      { re: 1, im: 0 },
    ];
    expect(matchSpectra(a, b)).toEqual({ largestMismatch: 0.5, pairs: [1, 0] });
  });

  it('sorts eigenvalues deterministically: decreasing modulus, then real part, then imaginary part', () => {
    const z = eigenvalues([
      [0, -1, 0],
      [1, 0, 0],
      [0, 0, -1],
    ]);
    expect(z).toEqual([
      { re: 0, im: 1 },
      { re: 0, im: -1 },
      { re: -1, im: 0 },
    ]);
  });

  it('names the wrong dimension of a gain', () => {
    const s = system('tractor-1d');
    expect(() => separationCheck(s.A, s.B, s.C, [[1, 2, 3]], [[0.1], [0.2]])).toThrow('K has 3 columns, it must have 2 (one per state of A)');
    expect(() => separationCheck(s.A, s.B, s.C, [[1, 2]], [[0.1, 0], [0.2, 0]])).toThrow('L has 2 columns, it must have 1 (one per measurement, the rows of C)');
  });
});
