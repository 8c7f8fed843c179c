import { BiasTest } from '../src/checks/bias-test';
import { ChiSquareWindowTest } from '../src/checks/chi-square-window-test';
import { chiSquareInterval, normalQuantile } from '../src/stats/chi-square';
import { Random } from './support/random';

describe('NIS window test', () => {
  const config = { windowLength: 20, dofPerSample: 2, alpha: 0.01, alphaMarginal: 0.05 };

  it('sums exactly the last N values', () => {
    const test = new ChiSquareWindowTest(config);
    const values = Array.from({ length: 57 }, (_, k) => 0.1 * k + 0.37);
    values.forEach((v) => test.push(v));
    const expected = values.slice(-20).reduce((s, v) => s + v, 0);
    expect(test.statistic).toBeCloseTo(expected, 11);
    expect(test.evidence().samples).toBe(20);
    expect(test.evidence().total).toBe(57);
  });

  it('is not ready, and says consistent, until the window is full', () => {
    const test = new ChiSquareWindowTest(config);
    for (let k = 0; k < 19; k++) test.push(100);
    expect(test.ready).toBe(false);
    expect(test.verdict()).toBe('consistent');
    expect(test.pValue()).toBe(1);
    test.push(100);
    expect(test.ready).toBe(true);
    expect(test.verdict()).toBe('inconsistent');
  });

  it('uses the two-sided χ²_{N·m} bounds: inside → consistent, between the levels → marginal, outside → inconsistent', () => {
    const strict = chiSquareInterval(40, 0.01);
    const marginal = chiSquareInterval(40, 0.05);
    const fill = (sum: number) => {
      const test = new ChiSquareWindowTest(config);
      for (let k = 0; k < 20; k++) test.push(sum / 20);
      return test;
    };
    expect(fill(40).verdict()).toBe('consistent');
    expect(fill((marginal.upper + strict.upper) / 2).verdict()).toBe('marginal');
    expect(fill((marginal.lower + strict.lower) / 2).verdict()).toBe('marginal');
    expect(fill(strict.upper * 1.01).verdict()).toBe('inconsistent');
    expect(fill(strict.lower * 0.99).verdict()).toBe('inconsistent');
    expect(fill(strict.upper * 1.01).pValue()).toBeLessThan(0.01);
  });

  it('keeps the running sum exact after a huge value enters and leaves the window (compensated summation)', () => {
    const test = new ChiSquareWindowTest({ ...config, windowLength: 50 });
    const random = new Random(3);
    const values: number[] = [];
    for (let k = 0; k < 130; k++) {
      // a 1e18 outlier among O(1) values; evaluate mid-window, before a recompute wrap
      const v = k === 60 ? 1e18 : random.chiSquare(2);
      values.push(v);
      test.push(v);
    }
    const exact = values.slice(-50).reduce((s, v) => s + v, 0);
    expect(Math.abs(test.statistic - exact)).toBeLessThan(1e-12 * exact);
  });

  it('counts single values outside the single-sample interval and compares their rate with α′', () => {
    const test = new ChiSquareWindowTest(config);
    const single = chiSquareInterval(2, 0.05);
    const values = [...new Array(17).fill(2), single.upper * 2, single.lower / 2, single.upper * 3];
    values.forEach((v) => test.push(v));
    const { exceedances } = test.evidence();
    expect(exceedances.count).toBe(3);
    expect(exceedances.rate).toBeCloseTo(3 / 20, 15);
    expect(exceedances.expectedRate).toBe(0.05);
    // P(X ≥ 3), X ~ Binomial(20, 0.05) = 1 − Σ_{k<3} C(20,k)·0.05^k·0.95^(20−k)
    const below = [0, 1, 2].reduce((s, k) => s + binomial(20, k) * 0.05 ** k * 0.95 ** (20 - k), 0);
    expect(exceedances.pValue).toBeCloseTo(1 - below, 12);
    // and when they leave the window, the count follows
    for (let k = 0; k < 20; k++) test.push(2);
    expect(test.evidence().exceedances.count).toBe(0);
  });

  it('restores from a JSON checkpoint and continues identically', () => {
    const random = new Random(11);
    const a = new ChiSquareWindowTest(config);
    for (let k = 0; k < 33; k++) a.push(random.chiSquare(2));
    const b = ChiSquareWindowTest.restore(JSON.parse(JSON.stringify(a.serialize())));
    for (let k = 0; k < 100; k++) {
      const v = random.chiSquare(2) * (k > 50 ? 2 : 1);
      a.push(v);
      b.push(v);
      expect(JSON.stringify(b.evidence())).toBe(JSON.stringify(a.evidence()));
    }
  });
});

describe('bias test', () => {
  const config = { windowLength: 25, m: 2, alpha: 0.01, alphaMarginal: 0.05 };

  it('reports each component mean over the window with the Bonferroni bound Φ⁻¹(1 − α/2m)/√N', () => {
    const test = new BiasTest(config);
    const w = new Float64Array(2);
    const history: number[][] = [];
    const random = new Random(5);
    for (let k = 0; k < 61; k++) {
      w[0] = random.normal();
      w[1] = random.normal() + 0.2;
      history.push([w[0], w[1]]);
      test.push(w);
    }
    const evidence = test.evidence();
    for (const i of [0, 1]) {
      const mean = history.slice(-25).reduce((s, x) => s + x[i], 0) / 25;
      expect(evidence.components[i].mean).toBeCloseTo(mean, 12);
      expect(evidence.components[i].bound).toBeCloseTo(normalQuantile(1 - 0.01 / 4) / 5, 12);
    }
  });

  it('says inconsistent when one component has a mean offset of 1 standard deviation', () => {
    const test = new BiasTest(config);
    const w = new Float64Array(2);
    const random = new Random(8);
    for (let k = 0; k < 25; k++) {
      w[0] = random.normal();
      w[1] = random.normal() + 1;
      test.push(w);
    }
    expect(test.verdict()).toBe('inconsistent');
    expect(test.evidence().components[1].verdict).toBe('inconsistent');
    expect(test.pValue()).toBeLessThan(0.01);
  });

  it('restores from a JSON checkpoint and continues identically', () => {
    const random = new Random(12);
    const a = new BiasTest(config);
    const w = new Float64Array(2);
    for (let k = 0; k < 40; k++) {
      w[0] = random.normal();
      w[1] = random.normal();
      a.push(w);
    }
    const b = BiasTest.restore(JSON.parse(JSON.stringify(a.serialize())));
    for (let k = 0; k < 80; k++) {
      w[0] = random.normal() + (k > 40 ? 1 : 0);
      w[1] = random.normal();
      a.push(w);
      b.push(w);
      expect(JSON.stringify(b.evidence())).toBe(JSON.stringify(a.evidence()));
    }
  });
});

function binomial(n: number, k: number): number {
  let c = 1;
  for (let i = 0; i < k; i++) c = (c * (n - i)) / (i + 1);
  return c;
}
