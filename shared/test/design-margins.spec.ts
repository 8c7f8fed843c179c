import references from './fixtures/design-margins-references.json';
import {
  EstimatorGain,
  LoopMargins,
  MarginInputError,
  compareMargins,
  frequencyResponse,
  loopMargins,
  observerController,
  plantInputLoop,
  plantInputMargins,
  stateFeedbackLoop,
} from '../src/design/margins';
import { EigenvalueDecomposition, Matrix } from 'ml-matrix';

// Reference values: fixtures/design-margins-references.json, made by
//   /usr/bin/python3 shared/test/fixtures/design-margins-references.py > shared/test/fixtures/design-margins-references.json
// (NumPy 1.24.2, SciPy 1.10.1: gains from scipy.linalg.solve_discrete_are, the loop
// evaluated as Kc(z)·P(z) and checked against scipy.signal.dfreqresp, margins by a
// 20001-point sweep refined with scipy.optimize.brentq / minimize_scalar).

interface FixtureLoop {
  name: string;
  kind: 'state-feedback' | 'predictor' | 'filter';
  dt: number;
  A: number[][];
  B: number[][];
  C?: number[][];
  K: number[][];
  L?: number[][];
  M?: number[][];
}
interface ReferenceDisk {
  alpha: number;
  frequency: number;
  gainRange: [number, number | null];
  phaseDeg: number;
}
interface ReferenceChannel {
  gainMarginUpperDb: number | null;
  gainMarginUpperFrequency: number | null;
  gainMarginLowerDb: number | null;
  gainMarginLowerFrequency: number | null;
  phaseMarginDeg: number | null;
  phaseMarginFrequency: number | null;
  phaseCrossovers: unknown[];
  gainCrossovers: unknown[];
  disk: ReferenceDisk;
}
interface Reference {
  closedLoopStable: boolean;
  closedLoopSpectralRadius: number;
  channels: ReferenceChannel[];
  disk: ReferenceDisk;
  response: { omega: number; re: number[][]; im: number[][] }[];
}
interface Fixture {
  loops: { loop: FixtureLoop; reference: Reference }[];
  doyle: { cases: { loop: FixtureLoop; sigma: number | null; continuousUpperGain: number | null; reference: Omit<Reference, 'response'> }[] };
}
const fixture = references as unknown as Fixture;

function estimatorOf(loop: FixtureLoop): EstimatorGain | undefined {
  if (loop.kind === 'predictor') return { form: 'predictor', L: loop.L as number[][] };
  if (loop.kind === 'filter') return { form: 'filter', M: loop.M as number[][] };
  return undefined;
}

function designOf(loop: FixtureLoop) {
  return { A: loop.A, B: loop.B, C: loop.C, K: loop.K, estimator: estimatorOf(loop), dt: loop.dt };
}

/** |actual − expected| ≤ tol·max(1, |expected|); a null reference stands for an infinite margin. */
function expectClose(actual: number | null | undefined, expected: number | null, tol: number, infinity: number | null = null): void {
  if (expected === null) {
    expect(actual).toBe(infinity);
    return;
  }
  expect(typeof actual).toBe('number');
  expect(Math.abs((actual as number) - expected)).toBeLessThanOrEqual(tol * Math.max(1, Math.abs(expected)));
}

function expectMarginsMatch(result: LoopMargins, reference: Omit<Reference, 'response'>): void {
  expect(result.closedLoopStable).toBe(reference.closedLoopStable);
  expect(result.closedLoopSpectralRadius).toBeCloseTo(reference.closedLoopSpectralRadius, 10);
  reference.channels.forEach((expected, i) => {
    const channel = result.channels[i];
    const gain = channel.gainMarginDb!;
    const phase = channel.phaseMarginDeg!;
    // brentq crossings of Im L/|L| and |L| − 1 on a 20001-point grid
    expectClose(gain.upper, expected.gainMarginUpperDb, 1e-6, Infinity);
    expectClose(gain.upperFrequency, expected.gainMarginUpperFrequency, 1e-6);
    expectClose(gain.lower, expected.gainMarginLowerDb, 1e-6, -Infinity);
    expectClose(gain.lowerFrequency, expected.gainMarginLowerFrequency, 1e-6);
    expectClose(phase.value, expected.phaseMarginDeg, 1e-6, Infinity);
    expectClose(phase.frequency, expected.phaseMarginFrequency, 1e-6);
    // minimize_scalar(−|S_ii − 1/2|): the value to 1e-6, the place of a flat peak less sharply
    expectClose(channel.diskMargin!.alpha, expected.disk.alpha, 1e-6);
    expectClose(channel.diskMargin!.frequency, expected.disk.frequency, 1e-4);
    expectClose(channel.diskMargin!.phaseDeg, expected.disk.phaseDeg, 1e-6);
    expectClose(channel.diskMargin!.gainRange[0], expected.disk.gainRange[0], 1e-6);
    expectClose(channel.diskMargin!.gainRange[1], expected.disk.gainRange[1], 1e-6, Infinity);
    expect(channel.phaseCrossovers).toHaveLength(expected.phaseCrossovers.length);
    expect(channel.gainCrossovers).toHaveLength(expected.gainCrossovers.length);
  });
  // minimize_scalar(−σ̄(S − I/2)) for several inputs, the channel's own value for one
  expectClose(result.diskMargin!.alpha, reference.disk.alpha, 1e-6);
  expectClose(result.diskMargin!.frequency, reference.disk.frequency, 1e-4);
}

describe('loop frequency response against scipy.signal (fixtures/design-margins-references.json)', () => {
  it.each(fixture.loops.map((c) => [c.loop.name, c] as const))(
    'evaluates the loop broken at the plant input, %s, to 1e-9 relative',
    (_, { loop, reference }) => {
      const Li = plantInputLoop(designOf(loop));
      const omega = reference.response.map((r) => r.omega);
      const response = frequencyResponse(Li, omega, loop.dt);
      const scale = Math.max(...reference.response.flatMap((r) => r.re.flatMap((row, i) => row.map((re, j) => Math.hypot(re, r.im[i][j])))));
      reference.response.forEach((expected, k) => {
        expected.re.forEach((row, i) =>
          row.forEach((re, j) => {
            // NumPy: Kc(e^{jωΔt})·C(e^{jωΔt}I − A)⁻¹B, agreeing with scipy.signal.dfreqresp
            const ref = { re, im: expected.im[i][j] };
            const got = { re: response[k].re[i][j], im: response[k].im[i][j] };
            const size = Math.hypot(ref.re, ref.im);
            const floor = 1e-12 * scale; // the ZOH zero of the double integrator puts L(−1) at 0
            expect(Math.hypot(got.re - ref.re, got.im - ref.im)).toBeLessThanOrEqual(1e-9 * size + floor);
            if (size > 1e-6 * scale) {
              expect(Math.abs(20 * Math.log10(Math.hypot(got.re, got.im)) - 20 * Math.log10(size))).toBeLessThan(1e-8);
              const dPhase = ((((Math.atan2(got.im, got.re) - Math.atan2(ref.im, ref.re)) * 180) / Math.PI + 540) % 360) - 180;
              expect(Math.abs(dPhase)).toBeLessThan(1e-7);
            }
          }),
        );
      });
    },
  );

  it('sweeps log-spaced up to Nyquist with a Bode trace equal to the point-wise response', () => {
    const { loop } = fixture.loops.find((c) => c.loop.name === 'tracker-lqg-predictor')!;
    const margins = plantInputMargins(designOf(loop), { points: 400 });
    const { omega, magnitudeDb, phaseDeg, re, im } = margins.sweep;
    expect(omega).toHaveLength(400);
    expect(omega[0]).toBeCloseTo((1e-4 * Math.PI) / loop.dt, 12);
    expect(omega[399]).toBe(Math.PI / loop.dt);
    for (let k = 1; k < omega.length; k++) {
      expect(omega[k] / omega[k - 1]).toBeCloseTo(omega[1] / omega[0], 10);
      expect(Math.abs(phaseDeg[k] - phaseDeg[k - 1])).toBeLessThan(180); // unwrapped
    }
    const direct = frequencyResponse(plantInputLoop(designOf(loop)), omega.slice(0, 399), loop.dt);
    direct.forEach((g, k) => {
      // the sweep runs on θ = ωΔt itself, ω·Δt may differ from it in the last bit
      const size = Math.hypot(g.re[0][0], g.im[0][0]);
      expect(Math.hypot(re[k] - g.re[0][0], im[k] - g.im[0][0])).toBeLessThan(1e-12 * size);
      expect(magnitudeDb[k]).toBeCloseTo(20 * Math.log10(size), 10);
    });
  });
});

describe('gain, phase and disk margins against the SciPy reference (fixtures/design-margins-references.json)', () => {
  const stable = fixture.loops.filter((c) => c.reference.closedLoopStable);
  it.each(stable.map((c) => [c.loop.name, c] as const))('matches the margins of %s to 1e-6', (_, { loop, reference }) => {
    expectMarginsMatch(plantInputMargins(designOf(loop)), reference);
  });

  it.each(fixture.doyle.cases.map((c) => [c.loop.name, c] as const))('matches the margins of the discretised Doyle loop %s', (_, c) => {
    expectMarginsMatch(plantInputMargins(designOf(c.loop)), c.reference);
  });

  it('gives a multi-input loop loop-at-a-time margins per channel and the σ̄(S − I/2) disk margin, which is the smaller', () => {
    const { loop, reference } = fixture.loops.find((c) => c.loop.name === 'mimo-lqg-predictor')!;
    const margins = plantInputMargins(designOf(loop));
    expect(margins.inputs).toBe(2);
    expect(margins.channels).toHaveLength(2);
    const worstUpper = Math.min(...reference.channels.map((c) => c.gainMarginUpperDb as number));
    expect(margins.gainMarginDb!.upper).toBeCloseTo(worstUpper, 6);
    expect(margins.gainMarginDb!.upperChannel).toBe(0);
    expect(margins.diskMargin!.alpha).toBeLessThan(Math.min(...margins.channels.map((c) => c.diskMargin!.alpha)));
    expect(margins.notes.join(' ')).toMatch(/loop-at-a-time/);
  });
});

describe('margins with a closed form', () => {
  // L(z) = a/(z − 1) (A = 1, B = Δt, K = a/Δt), derived by hand:
  // - closed-loop pole 1 − a, stable for 0 < a < 2;
  // - L is real only at z = ±1 (z = 1 is the pole): L(−1) = −a/2, so the upper gain
  //   margin is 2/a at ω = π/Δt and there is no lower one (k → 0 keeps the pole in (0, 1));
  // - |L| = 1 where |e^{jθ} − 1| = 2 sin(θ/2) = a, θc = 2 asin(a/2); e^{jθ} − 1 = 2j sin(θ/2) e^{jθ/2}
  //   gives ∠L = −(90° + θc/2), so PM = 90° − asin(a/2) (degrees);
  // - S − 1/2 = (z − 1 − a)/(2(z − 1 + a)); with x = cos θ, |z − c|² = 1 − 2cx + c², and
  //   d/dx of |z − 1 − a|²/|z − 1 + a|² is −4a³/D² < 0, so the peak is at θ = π:
  //   sup|S − 1/2| = (2 + a)/(2(2 − a)), α = 2(2 − a)/(2 + a), whose gain range
  //   [(1 − α/2)/(1 + α/2), (1 + α/2)/(1 − α/2)] = [a/2, 2/a] (the upper end equals the gain margin).
  const dt = 0.1;
  const integrator = (a: number) => ({ A: [[1]], B: [[dt]], K: [[a / dt]], dt });

  it.each([0.2, 0.5, 1, 1.5])('finds the analytic margins of a/(z − 1) for a = %s', (a) => {
    const margins = plantInputMargins(integrator(a));
    const thetaC = 2 * Math.asin(a / 2);
    expect(margins.closedLoopStable).toBe(true);
    expect(margins.gainMarginDb!.upper).toBeCloseTo(20 * Math.log10(2 / a), 10);
    expect(margins.gainMarginDb!.upperFrequency).toBe(Math.PI / dt);
    expect(margins.gainMarginDb!.lower).toBe(-Infinity);
    expect(margins.gainMarginDb!.lowerFrequency).toBeNull();
    expect(margins.phaseMarginDeg!.value).toBeCloseTo(90 - (Math.asin(a / 2) * 180) / Math.PI, 9);
    expect(margins.phaseMarginDeg!.frequency! * dt).toBeCloseTo(thetaC, 10);
    const alpha = (2 * (2 - a)) / (2 + a);
    expect(margins.diskMargin!.alpha).toBeCloseTo(alpha, 10);
    expect(margins.diskMargin!.frequency).toBeCloseTo(Math.PI / dt, 6);
    expect(margins.diskMargin!.gainRange[0]).toBeCloseTo(a / 2, 10);
    expect(margins.diskMargin!.gainRange[1]).toBeCloseTo(2 / a, 9);
    expect(margins.diskMargin!.phaseDeg).toBeCloseTo((2 * Math.atan(alpha / 2) * 180) / Math.PI, 9);
  });

  it('gives two decoupled channels their own margins and a multi-loop disk margin equal to the worse one', () => {
    // diag(a1/(z − 1), a2/(z − 1)): S is diagonal, so σ̄(S − I/2) = max_i |S_ii − 1/2|
    const [a1, a2] = [0.5, 1.2];
    const margins = plantInputMargins({ A: [[1, 0], [0, 1]], B: [[dt, 0], [0, dt]], K: [[a1 / dt, 0], [0, a2 / dt]], dt });
    const single = [a1, a2].map((a) => plantInputMargins(integrator(a)));
    margins.channels.forEach((c, i) => {
      expect(c.gainMarginDb!.upper).toBeCloseTo(single[i].gainMarginDb!.upper, 9);
      expect(c.phaseMarginDeg!.value).toBeCloseTo(single[i].phaseMarginDeg!.value, 8);
      expect(c.diskMargin!.alpha).toBeCloseTo(single[i].diskMargin!.alpha, 9);
    });
    expect(margins.gainMarginDb!.upperChannel).toBe(1);
    expect(margins.diskMargin!.alpha).toBeCloseTo((2 * (2 - a2)) / (2 + a2), 9);
  });
  it('takes the multi-loop disk margin of three decoupled channels from the SVD, equal to the worst channel', () => {
    const a = [0.3, 1.4, 0.8];
    const eye = (v: (i: number) => number) => a.map((_, i) => a.map((__, j) => (i === j ? v(i) : 0)));
    const margins = plantInputMargins({ A: eye(() => 1), B: eye(() => dt), K: eye((i) => a[i] / dt), dt }, { points: 300 });
    expect(margins.inputs).toBe(3);
    expect(margins.diskMargin!.alpha).toBeCloseTo((2 * (2 - 1.4)) / (2 + 1.4), 9);
    expect(margins.phaseMarginDeg!.channel).toBe(1);
    expect(margins.phaseMarginDeg!.value).toBeCloseTo(90 - (Math.asin(0.7) * 180) / Math.PI, 8);
  });
});

describe('an unstable closed loop', () => {
  it('is reported as unstable, with no margins (SciPy reference: spectral radius 1.5)', () => {
    const { loop, reference } = fixture.loops.find((c) => c.loop.name === 'integrator-a2.5-unstable')!;
    const margins = plantInputMargins(designOf(loop));
    expect(reference.closedLoopStable).toBe(false);
    expect(margins.closedLoopStable).toBe(false);
    expect(margins.closedLoopSpectralRadius).toBeCloseTo(1.5, 12); // pole 1 − a = −1.5
    expect(margins.gainMarginDb).toBeNull();
    expect(margins.phaseMarginDeg).toBeNull();
    expect(margins.diskMargin).toBeNull();
    expect(margins.channels[0].gainMarginDb).toBeNull();
    expect(margins.notes.join(' ')).toMatch(/unstable.*not meaningful/);
    expect(margins.sweep.omega).toHaveLength(2000); // still there to plot
  });

  it('is found for an LQG loop whose gain at the plant input is raised 5 % past its upper gain margin, and not 5 % short of it', () => {
    const { loop, reference } = fixture.loops.find((c) => c.loop.name === 'tracker-lqg-predictor')!;
    const margin = 10 ** (reference.channels[0].gainMarginUpperDb! / 20); // SciPy reference, 8.15 dB
    const Li = plantInputLoop(designOf(loop));
    const scaled = (k: number) => loopMargins({ ...Li, C: Li.C.clone().mul(k), D: Li.D.clone().mul(k) }, loop.dt, { points: 200 });
    const beyond = scaled(1.05 * margin);
    expect(beyond.closedLoopStable).toBe(false);
    expect(beyond.closedLoopSpectralRadius).toBeGreaterThan(1);
    expect(beyond.gainMarginDb).toBeNull();
    const within = scaled(0.95 * margin);
    expect(within.closedLoopStable).toBe(true);
    expect(within.gainMarginDb!.upper).toBeCloseTo(-20 * Math.log10(0.95), 6);
  });
});

describe('observer-based controllers', () => {
  const { loop } = fixture.loops.find((c) => c.loop.name === 'tracker-lqg-filter')!;
  const { A, B, K } = loop;
  const C = loop.C as number[][];
  const M = loop.M as number[][];

  it('has the separation-principle closed-loop poles eig(A − BK) ∪ eig(A − A·M·C) in filter form', () => {
    const margins = plantInputMargins(designOf(loop));
    const [Am, Bm, Cm, Km, Mm] = [A, B, C, K, M].map((x) => new Matrix(x));
    const expected = [Am.clone().sub(Bm.mmul(Km)), Am.clone().sub(Am.mmul(Mm).mmul(Cm))]
      .flatMap((X) => {
        const eig = new EigenvalueDecomposition(X);
        return eig.realEigenvalues.map((re, k) => Math.hypot(re, eig.imaginaryEigenvalues[k]));
      })
      .sort((a, b) => a - b);
    const got = margins.closedLoopPoles.map((p) => Math.hypot(p.re, p.im)).sort((a, b) => a - b);
    got.forEach((r, i) => expect(r).toBeCloseTo(expected[i], 9));
  });

  it('gives the filter form a feed-through K·M and the predictor form none', () => {
    const filter = observerController({ A, B, C, K, estimator: { form: 'filter', M } });
    expect(filter.D.get(0, 0)).toBeCloseTo(new Matrix(K).mmul(new Matrix(M)).get(0, 0), 14);
    const predictor = observerController({ A, B, C, K, estimator: { form: 'predictor', L: M } });
    expect(predictor.D.get(0, 0)).toBe(0);
  });

  it('says which dimension is wrong', () => {
    expect(() => stateFeedbackLoop({ A, B, K: [[1, 2, 3]] })).toThrow(MarginInputError);
    expect(() => stateFeedbackLoop({ A, B, K: [[1, 2, 3]] })).toThrow(/K is 1×3, expected 1×2/);
    expect(() => plantInputLoop({ A, B, C, K, estimator: { form: 'predictor', L: [[1]] } })).toThrow(/L is 1×1, expected 2×1/);
    expect(() => plantInputLoop({ A, B, K, estimator: { form: 'filter', M } })).toThrow(/C is required/);
    expect(() => loopMargins(stateFeedbackLoop({ A, B, K }), 0)).toThrow(/dt must be a positive/);
  });
});

describe("Doyle's example: an LQG loop with far smaller margins than its LQR loop", () => {
  // Doyle, "Guaranteed margins for LQG regulators", IEEE Trans. Automatic Control 23(4), 1978
  // (continuous time; plant, weights and the formula below recalled from memory):
  //   ẋ = [1 1; 0 1] x + [0; 1] u + [1; 1] w,  y = [1 0] x + v,  Q = q[1 1; 1 1], R = 1, W = σ[1 1; 1 1], V = 1;
  //   K = f[1 1], f = 2 + √(4 + q);  L = d[1; 1], d = 2 + √(4 + σ);  the LQG loop's upper gain
  //   margin is 1 + 1/(f·d), shrinking to 1 (0 dB) as σ grows. The fixture script checks K, L and
  //   that margin against scipy's continuous-time ARE and a bisection on the closed loop's eigenvalues,
  //   then discretises with a zero-order hold, Δt = 0.01 s, q = 1.
  // LQR guarantees (continuous time; Safonov & Athans 1977, recalled from memory): upper gain
  // margin ∞, lower ≤ −6 dB (factor 1/2), phase ≥ 60°; |S| ≤ 1 also gives a balanced disk
  // margin α ≥ 2/3 (|S − 1/2| ≤ 3/2). For small Δt these hold approximately.
  type Result = Fixture['doyle']['cases'][number] & { margins: LoopMargins };
  let lqr: LoopMargins;
  let lqg: Result[];
  beforeAll(() => {
    const results = fixture.doyle.cases.map((c) => ({ ...c, margins: plantInputMargins(designOf(c.loop)) }));
    lqr = results[0].margins;
    lqg = results.slice(1);
  });

  it('keeps the LQR loop near the continuous-time guarantees', () => {
    expect(lqr.closedLoopStable).toBe(true);
    expect(lqr.gainMarginDb!.upper).toBeGreaterThan(30); // finite in discrete time: 33.6 dB
    expect(lqr.gainMarginDb!.lower).toBeLessThan(-6); // −6.4 dB
    expect(lqr.phaseMarginDeg!.value).toBeGreaterThan(60); // 60.4°
    expect(lqr.diskMargin!.alpha).toBeGreaterThan(2 / 3); // 0.707
  });

  it('shrinks the LQG gain margin toward 0 dB as the process noise weight σ grows', () => {
    const upper = lqg.map((c) => c.margins.gainMarginDb!.upper);
    const sigmas = lqg.map((c) => c.sigma);
    expect(sigmas).toEqual([1, 10, 100, 1000, 10000]);
    for (let k = 1; k < upper.length; k++) expect(upper[k]).toBeLessThan(upper[k - 1]);
    expect(upper[0]).toBeLessThan(0.5); // dB, against 33.6 dB for LQR
    expect(upper[upper.length - 1]).toBeLessThan(0.025);
    lqg.forEach((c, k) => {
      // continuous-time 20·log10(1 + 1/(f·d)) (Doyle 1978, from memory; checked in the fixture);
      // the sampled loop departs from it by up to ~10 % at σ = 10⁴ (Kalman gain no longer small per step)
      const continuous = 20 * Math.log10(c.continuousUpperGain as number);
      expect(Math.abs(upper[k] - continuous)).toBeLessThan(0.15 * continuous);
      expect(c.margins.closedLoopStable).toBe(true);
      expect(c.margins.phaseMarginDeg!.value).toBeLessThan(lqr.phaseMarginDeg!.value / 10);
      expect(c.margins.diskMargin!.alpha).toBeLessThan(0.06);
    });
    const alphas = lqg.map((c) => c.margins.diskMargin!.alpha);
    for (let k = 1; k < alphas.length; k++) expect(alphas[k]).toBeLessThan(alphas[k - 1]);
  });

  it('warns in plain words when the LQG design is proposed in place of the LQR loop', () => {
    const warnings = compareMargins(lqr, lqg[lqg.length - 1].margins);
    expect(warnings.map((w) => w.margin).sort()).toEqual(['disk', 'gain-lower', 'gain-upper', 'phase']);
    expect(warnings.every((w) => w.reduced)).toBe(true);
    const upper = warnings.find((w) => w.margin === 'gain-upper')!;
    expect(upper.message).toMatch(/^Upper gain margin falls from 33\.6 dB to 0\.0 dB, short of the 6\.0 dB floor\.$/);
    expect(warnings.find((w) => w.margin === 'gain-lower')!.floor).toBe(-6);
  });
});

describe('compareMargins', () => {
  const dt = 0.1;
  const integrator = (a: number) => plantInputMargins({ A: [[1]], B: [[dt]], K: [[a / dt]], dt });

  it('says nothing when the proposed design keeps every margin above its floor', () => {
    expect(compareMargins(integrator(0.5), integrator(0.3))).toEqual([]);
    expect(compareMargins(integrator(0.5), integrator(0.5))).toEqual([]);
  });

  it('uses configurable floors (defaults 6 dB, 30°, α 0.4)', () => {
    // a = 0.5 → 1.0: upper gain margin 12.04 dB → 6.02 dB, PM 75.5° → 60°, α 1.2 → 0.667
    expect(compareMargins(integrator(0.5), integrator(1.0))).toEqual([]);
    const warnings = compareMargins(integrator(0.5), integrator(1.0), { gainMarginDb: 10, phaseMarginDeg: 65, diskAlpha: 1 });
    expect(warnings.map((w) => w.margin)).toEqual(['gain-upper', 'phase', 'disk']);
    expect(warnings[1].message).toBe('Phase margin falls from 75.5° to 60.0°, short of the 65.0° floor.');
  });

  it('says when a margin stays short of its floor without being reduced', () => {
    const [w] = compareMargins(integrator(1.6), integrator(1.5));
    expect(w.margin).toBe('gain-upper');
    expect(w.reduced).toBe(false);
    expect(w.message).toMatch(/stays short of the 6\.0 dB floor: 1\.9 dB now, 2\.5 dB proposed/);
  });

  it('finds the lower gain margin of an open-loop unstable loop at ω = 0 and warns when it replaces an unlimited one', () => {
    // L(z) = a/(z − 1.2), a = 0.25 (derived by hand): closed-loop pole 1.2 − k·a, stable for 0.2 < k·a < 2.2;
    // L(1) = −a/0.2 gives the lower margin k = 0.2/a = 0.8 at ω = 0, L(−1) = −a/2.2 the upper k = 2.2/a = 8.8 at π/Δt
    const unstablePlant = plantInputMargins({ A: [[1.2]], B: [[dt]], K: [[0.25 / dt]], dt });
    expect(unstablePlant.gainMarginDb!.lower).toBeCloseTo(20 * Math.log10(0.8), 10);
    expect(unstablePlant.gainMarginDb!.lowerFrequency).toBe(0);
    expect(unstablePlant.gainMarginDb!.upper).toBeCloseTo(20 * Math.log10(8.8), 10);
    const warnings = compareMargins(integrator(0.5), unstablePlant);
    const lower = warnings.find((w) => w.margin === 'gain-lower')!;
    expect(lower).toMatchObject({ current: -Infinity, floor: -6, reduced: true });
    expect(lower.message).toBe('Lower gain margin falls from -∞ dB to -1.9 dB, short of the -6.0 dB floor.');
  });

  it('warns above all when the proposed closed loop is unstable', () => {
    const warnings = compareMargins(integrator(0.5), integrator(2.5));
    expect(warnings).toHaveLength(1);
    expect(warnings[0].margin).toBe('stability');
    expect(warnings[0].message).toMatch(/unstable \(spectral radius 1\.500, 0\.5000 now\)/);
  });
});
