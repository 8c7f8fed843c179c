import { actualInnovations, steadyBiasResponse, steadyFilter } from '../testing/steady-state';
import { mean, nees, nis } from '../testing/normalized';
import type { ScheduledMeasurementFault } from './faults';
import type { SimulatedSample } from './payload';
import { PlantFilter } from './plant-filter';
import { plantDesign, plantKinds, type PlantKind } from './plant-models';

interface RunOptions {
  seed?: number;
  revision?: number;
  faults?: ScheduledMeasurementFault[];
  reference?: boolean;
}

function generator(kind: PlantKind, options: RunOptions): PlantFilter {
  return new PlantFilter({
    design: plantDesign(kind, options.revision ?? 1),
    seed: options.seed ?? 11,
    faults: options.faults,
    reference: options.reference,
  });
}

function run(kind: PlantKind, count: number, options: RunOptions = {}): SimulatedSample[] {
  const f = generator(kind, options);
  return Array.from({ length: count }, () => f.next());
}

/** The mean of statistic(sample) over count samples, without keeping them (e and P left out). */
function meanOver(kind: PlantKind, count: number, statistic: (s: SimulatedSample) => number, options: RunOptions = {}): number {
  const f = generator(kind, { reference: false, ...options });
  let sum = 0;
  for (let k = 0; k < count; k++) sum += statistic(f.next());
  return sum / count;
}

const measurementDim: Record<PlantKind, number> = { 'tractor-position': 2, 'cabinet-thermal': 1, 'cabinet-charge': 1 };
const stateDim: Record<PlantKind, number> = { 'tractor-position': 4, 'cabinet-thermal': 1, 'cabinet-charge': 2 };
// The χ² 95 % quantiles: χ²₁ 3.841 (standard tables); χ²₂ is exponential with mean 2, so −2·ln 0.05 = 5.991.
const chiSquare95: Record<number, number> = { 1: 3.841459, 2: -2 * Math.log(0.05) };

describe('PlantFilter tuned right', () => {
  const N = 100_000;

  it.each(plantKinds)(
    '%s: mean NIS is within 4σ of m, σ = √(2m/N), and 5 %% of NIS lie above the χ² 95 %% quantile, over 100,000 samples',
    (kind) => {
      const m = measurementDim[kind];
      // a consistent filter's innovations are white, so the N NIS values are independent χ²_m
      const f = generator(kind, { reference: false });
      let sum = 0;
      let above = 0;
      for (let k = 0; k < N; k++) {
        const e = nis(f.next());
        sum += e;
        if (e > chiSquare95[m]) above += 1;
      }
      expect(Math.abs(sum / N - m)).toBeLessThan(4 * Math.sqrt((2 * m) / N));
      expect(Math.abs(above / N - 0.05)).toBeLessThan(4 * Math.sqrt((0.05 * 0.95) / N));
    },
  );

  it.each(plantKinds)('%s: NEES at step 20 over 1,500 independent runs has mean n within 4σ, σ = √(2n/1500)', (kind) => {
    // errors are correlated in time, so independent runs (the truth drawn from the prior each time) give the clean test
    const n = stateDim[kind];
    const runs = 1500;
    const values = Array.from({ length: runs }, (_, r) => {
      const f = new PlantFilter({ design: plantDesign(kind), seed: 1000 + r });
      for (let k = 1; k < 20; k++) f.next();
      return nees(f.next());
    });
    expect(Math.abs(mean(values) - n)).toBeLessThan(4 * Math.sqrt((2 * n) / runs));
  });

  it.each(plantKinds)('%s: its innovation covariance settles at the Riccati steady state', (kind) => {
    const design = plantDesign(kind);
    const last = run(kind, 3000).at(-1)!;
    const { S } = steadyFilter(design.filter, design.P0);
    expect(last.S[0][0]).toBeCloseTo(S.get(0, 0), 10);
  });
});

describe('PlantFilter is seeded', () => {
  it('repeats the same samples from the same seed and start time', () => {
    const a = new PlantFilter({ design: plantDesign('tractor-position'), seed: 42, startTime: 1_700_000_000_000 });
    const b = new PlantFilter({ design: plantDesign('tractor-position'), seed: 42, startTime: 1_700_000_000_000 });
    const as = Array.from({ length: 500 }, () => a.next());
    const bs = Array.from({ length: 500 }, () => b.next());
    expect(bs).toEqual(as);
    expect(as[0]).toMatchObject({ seq: 1, t: 1_700_000_001_000 });
    expect(as[499].seq).toBe(500);
  });

  it('gives another stream from another seed', () => {
    const a = run('cabinet-thermal', 10, { seed: 1 });
    const b = run('cabinet-thermal', 10, { seed: 2 });
    expect(b.map((s) => s.nu[0])).not.toEqual(a.map((s) => s.nu[0]));
  });

  it('emits e (n) and P (n×n) with every sample, or neither with reference: false', () => {
    const [s] = run('tractor-position', 1);
    expect(s.nu).toHaveLength(2);
    expect(s.S).toHaveLength(2);
    expect(s.e).toHaveLength(4);
    expect(s.P?.map((row) => row.length)).toEqual([4, 4, 4, 4]);
    const bare = new PlantFilter({ design: plantDesign('cabinet-charge'), seed: 1, reference: false }).next();
    expect(Object.keys(bare).sort()).toEqual(['S', 'nu', 'seq', 't']);
  });
});

describe('PlantFilter with faults', () => {
  const N = 100_000;

  it.each(plantKinds)(
    '%s: measurement noise ×2 raises mean NIS to tr(S⁻¹S̄) of the mismatched filter (within 5 %%)',
    (kind) => {
      // With S dominated by R, S̄ ≈ S + 3R and the mean NIS approaches 4m: the charge cabinet
      // (R = 90 % of S) gives 3.85, the thermal cabinet (R = 62 %) 3.27, the tractor (R = 39 %) 6.62 for m = 2.
      // Its innovations are no longer white, so 5 % (many times the white-noise σ) is the tolerance.
      const expected = actualInnovations(plantDesign(kind), { noiseFactor: 2 }).meanNis;
      const observed = meanOver(kind, N, nis, { faults: [{ kind: 'noise', factor: 2 }] });
      expect(Math.abs(observed / expected - 1)).toBeLessThan(0.05);
      expect(observed).toBeGreaterThan(measurementDim[kind] * (1 + 3 * 0.39));
    },
  );

  it('the charge cabinet, whose S is 90 % R, sees mean NIS close to 4m under noise ×2', () => {
    const observed = meanOver('cabinet-charge', N / 2, nis, { faults: [{ kind: 'noise', factor: 2 }], seed: 21 });
    expect(observed).toBeGreaterThan(3.6);
    expect(observed).toBeLessThan(4);
  });

  it('design revision 2 (process noise assumed 100× too low) has mean NIS ≈ 16.8 for m = 2, as its Lyapunov equation predicts', () => {
    const expected = actualInnovations(plantDesign('tractor-position', 2)).meanNis;
    expect(expected).toBeCloseTo(16.76, 1);
    const observed = meanOver('tractor-position', N, nis, { revision: 2 });
    expect(Math.abs(observed / expected - 1)).toBeLessThan(0.05);
  });

  it('qlow=100 on revision 1 runs the same filter as revision 2', () => {
    const rev2 = run('tractor-position', 200, { revision: 2, seed: 5 });
    const qlow = run('tractor-position', 200, { seed: 5, faults: [{ kind: 'qlow', factor: 100 }] });
    for (let k = 0; k < rev2.length; k++) {
      expect(qlow[k].nu[0]).toBeCloseTo(rev2[k].nu[0], 9);
      expect(qlow[k].S[1][1]).toBeCloseTo(rev2[k].S[1][1], 9);
    }
  });

  it('a bias shifts the first innovation it touches by exactly b, on its component only', () => {
    const clean = run('tractor-position', 60, { seed: 8 });
    const biased = run('tractor-position', 60, {
      seed: 8,
      faults: [{ kind: 'bias', offset: 2, component: 1, when: { fromSeq: 50 } }],
    });
    expect(biased.slice(0, 49)).toEqual(clean.slice(0, 49));
    expect(biased[49].nu[1] - clean[49].nu[1]).toBeCloseTo(2, 12);
    expect(biased[49].nu[0]).toBe(clean[49].nu[0]);
  });

  it('a bias b on the thermal cabinet shifts the innovation mean to b(1−a)/(1−a+aK) ≈ 0.051·b', () => {
    const design = plantDesign('cabinet-thermal');
    const [expected] = steadyBiasResponse(design, [2]);
    expect(expected).toBeCloseTo(0.1016, 3);
    const biased = meanOver('cabinet-thermal', N / 2, (s) => s.nu[0], { faults: [{ kind: 'bias', offset: 2, component: 0 }] });
    // innovations of the tuned filter are white with variance S ≈ 0.0646: σ of the mean of 50,000 ≈ 0.0011
    expect(Math.abs(biased - expected)).toBeLessThan(0.005);
    expect(Math.abs(meanOver('cabinet-thermal', N / 2, (s) => s.nu[0]))).toBeLessThan(0.005);
  });

  it('a constant-velocity filter absorbs a constant position bias: the innovation mean returns to zero', () => {
    // a step in measured position looks like a step in position, which the filter tracks (type-2 loop)
    expect(steadyBiasResponse(plantDesign('tractor-position'), [2, 0])[0]).toBeCloseTo(0, 12);
    const nu = run('tractor-position', 20_000, { faults: [{ kind: 'bias', offset: 2, component: 0 }], reference: false }).map((s) => s.nu[0]);
    // σ of the mean of 19,900 white innovations with S = 0.64 is 0.0057
    expect(Math.abs(mean(nu.slice(100)))).toBeLessThan(0.03);
    // NEES sees it: the estimate carries the offset
    const last = run('tractor-position', 200, { faults: [{ kind: 'bias', offset: 2, component: 0 }] }).slice(100);
    expect(mean(last.map(nees))).toBeGreaterThan(4 * 2);
  });

  it('a flickering bias (on 6 s, off 6 s) keeps the tractor NIS high', () => {
    const observed = meanOver('tractor-position', 20_000, nis, { faults: [{ kind: 'bias', offset: 2, component: 0, flickerS: 6 }] });
    // each switch puts ν ≈ ±b on a filter expecting S ≈ 0.64 (NIS ≈ 6 on that sample, decaying over the next few)
    expect(observed).toBeGreaterThan(3);
  });

  it('a fault is on only inside its window', () => {
    const clean = run('cabinet-charge', 300, { seed: 3 });
    const noisy = run('cabinet-charge', 300, { seed: 3, faults: [{ kind: 'noise', factor: 5, when: { fromS: 100, toS: 200 } }] });
    // sample k is at k seconds: samples 1…99 untouched, 100…199 noisier, and the filter recovers afterwards
    expect(noisy.slice(0, 99)).toEqual(clean.slice(0, 99));
    expect(noisy[99].nu[0]).not.toBe(clean[99].nu[0]);
    const inside = mean(noisy.slice(99, 199).map(nis));
    expect(inside).toBeGreaterThan(10);
    expect(noisy[299].S).toEqual(clean[299].S);
  });

  it("a stuck sensor's innovations settle to a constant", () => {
    const samples = run('cabinet-thermal', 400, { faults: [{ kind: 'stuck', when: { fromSeq: 100 } }] });
    const tail = samples.slice(300).map((s) => s.nu[0]);
    expect(Math.max(...tail) - Math.min(...tail)).toBeLessThan(1e-9);
    const before = samples.slice(0, 99).map((s) => s.nu[0]);
    expect(Math.max(...before) - Math.min(...before)).toBeGreaterThan(0.3);
  });

  it('refuses a bias on a component the measurement does not have', () => {
    expect(
      () => new PlantFilter({ design: plantDesign('cabinet-thermal'), seed: 1, faults: [{ kind: 'bias', offset: 1, component: 1 }] }),
    ).toThrow(/component 1.*1 components/);
  });
});
