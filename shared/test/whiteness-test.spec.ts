import references from './fixtures/references.json';
import { WhitenessTest, autocorrelation, ljungBox } from '../src/checks/whiteness-test';
import { chiSquareUpperCritical, normalQuantile } from '../src/stats/chi-square';
import { Random } from './support/random';

describe('batch autocorrelation and Ljung–Box against statsmodels (fixtures/references.json)', () => {
  it.each(references.ljungBox.map((c) => [c.name, c] as const))('matches acf and acorr_ljungbox on the series %s', (_, c) => {
    const r = autocorrelation(c.series, c.lags);
    c.acf.forEach((expected, lag) => {
      // statsmodels.tsa.stattools.acf(x, nlags, fft=False, adjusted=False)
      expect(Math.abs(r[lag] - expected)).toBeLessThan(1e-13);
    });
    for (let lag = 1; lag <= c.lags; lag++) {
      const result = ljungBox(c.series, lag);
      // statsmodels.stats.diagnostic.acorr_ljungbox(x, lags=[1..L]): lb_stat, lb_pvalue
      expect(Math.abs(result.statistic - c.lbStat[lag - 1])).toBeLessThan(1e-10 * Math.max(1, c.lbStat[lag - 1]));
      expect(Math.abs(result.pValue - c.lbPvalue[lag - 1])).toBeLessThan(1e-12);
      expect(result.dof).toBe(lag);
    }
  });

  it('finds the AR(1) series non-white at lag 1 and the white one white over 10 lags', () => {
    const white = references.ljungBox.find((c) => c.name === 'white-100')!;
    const ar = references.ljungBox.find((c) => c.name === 'ar1-0.3-200')!;
    expect(ljungBox(white.series, 10).pValue).toBeGreaterThan(0.05);
    expect(ljungBox(ar.series, 1).pValue).toBeLessThan(0.01);
  });
});

describe('streaming whiteness test', () => {
  function run(N: number, m: number, lags: number, samples: number, seed: number, transform = (x: number) => x) {
    const test = new WhitenessTest({ windowLength: N, m, lags, alpha: 0.01, alphaMarginal: 0.05 });
    const random = new Random(seed);
    const series: number[][] = Array.from({ length: m }, () => []);
    const w = new Float64Array(m);
    let previous = 0;
    for (let k = 0; k < samples; k++) {
      for (let i = 0; i < m; i++) {
        // component 0 mildly autocorrelated, the others white; plus an offset
        const x = i === 0 ? 0.4 * previous + random.normal() : random.normal() + 0.3 * i;
        if (i === 0) previous = x;
        w[i] = transform(x);
        series[i].push(w[i]);
      }
      test.push(w);
    }
    return { test, series };
  }

  it.each([
    [50, 1, 10, 50],
    [50, 2, 10, 237],
    [40, 3, 5, 40 * 16 + 7],
    [64, 2, 12, 64 * 16 + 64],
    [30, 6, 3, 1000],
  ])('equals the batch statistics over the same window (N = %d, m = %d, L = %d, after %d samples)', (N, m, lags, samples) => {
    const { test, series } = run(N, m, lags, samples, N * 100 + m);
    const evidence = test.evidence();
    let total = 0;
    for (let i = 0; i < m; i++) {
      const window = series[i].slice(-N);
      const r = autocorrelation(window, lags);
      const q = ljungBox(window, lags);
      evidence.components[i].autocorrelation.forEach((rl, l) => expect(Math.abs(rl - r[l + 1])).toBeLessThan(1e-11));
      expect(Math.abs(evidence.components[i].ljungBox - q.statistic)).toBeLessThan(1e-9 * Math.max(1, q.statistic));
      total += q.statistic;
    }
    expect(Math.abs(evidence.statistic - total)).toBeLessThan(1e-9 * Math.max(1, total));
    expect(evidence.dof).toBe(lags * m);
    expect(evidence.critical).toBeCloseTo(chiSquareUpperCritical(lags * m, 0.01), 12);
    expect(evidence.autocorrelationBound).toBeCloseTo(normalQuantile(0.975) / Math.sqrt(N), 12);
  });

  it('stays equal to the batch statistics after a huge outlier has left the window', () => {
    const { test, series } = run(50, 1, 5, 50 * 16 + 30, 99, (x) => x);
    // push an outlier then 60 ordinary values (before the next recompute)
    const w = new Float64Array(1);
    const random = new Random(100);
    const values = [...series[0]];
    for (let k = 0; k < 61; k++) {
      w[0] = k === 0 ? 1e9 : random.normal();
      values.push(w[0]);
      test.push(w);
    }
    const window = values.slice(-50);
    expect(Math.abs(test.evidence().statistic - ljungBox(window, 5).statistic)).toBeLessThan(1e-6);
  });

  it('says inconsistent for strongly autocorrelated whitened innovations', () => {
    const test = new WhitenessTest({ windowLength: 100, m: 1, lags: 10, alpha: 0.01, alphaMarginal: 0.05 });
    const random = new Random(4);
    const w = new Float64Array(1);
    let x = 0;
    for (let k = 0; k < 100; k++) {
      x = 0.6 * x + random.normal();
      w[0] = x;
      test.push(w);
    }
    expect(test.verdict()).toBe('inconsistent');
    expect(test.evidence().outsideBound).toBeGreaterThan(0);
  });

  it('restores from a JSON checkpoint and continues identically', () => {
    const { test: a } = run(30, 2, 4, 77, 5);
    const b = WhitenessTest.restore(JSON.parse(JSON.stringify(a.serialize())));
    const random = new Random(6);
    const w = new Float64Array(2);
    for (let k = 0; k < 100; k++) {
      w[0] = random.normal();
      w[1] = random.normal();
      a.push(w);
      b.push(w);
      expect(JSON.stringify(b.evidence())).toBe(JSON.stringify(a.evidence()));
    }
  });

  it('rejects lags that do not fit in the window', () => {
    expect(() => new WhitenessTest({ windowLength: 10, m: 1, lags: 10, alpha: 0.01, alphaMarginal: 0.05 })).toThrow(RangeError);
  });
});
