import type { EstimatorSeries } from '../../../../shared/src/api/api-types';
import { chartLook } from '../charts/chart-look';
import { biasOptions, histogramOptions, niceMax, nisOptions, normalDensity } from './series-options';

const series: EstimatorSeries = {
  from: '2026-03-01T08:00:00Z',
  to: '2026-03-01T09:00:00Z',
  bucketMs: 60_000,
  samples: 120,
  m: 2,
  points: [
    { t: '2026-03-01T08:00:00Z', count: 60, nisMin: 0.1, nisMax: 9.2, nisMean: 2.1, cusumUp: 1, cusumDown: 0 },
    { t: '2026-03-01T08:01:00Z', count: 60, nisMin: 0.05, nisMax: 7.4, nisMean: 1.9, cusumUp: 0.5, cusumDown: 0.2 },
  ],
  band: { alpha: 0.01, lower: 0.01, upper: 10.6, windowLength: 100, windowLower: 1.5, windowUpper: 2.6 },
  cusumThreshold: { up: 12, down: 9 },
  histogram: { edges: [-2, -1, 0, 1, 2], counts: [[10, 40, 40, 10]] },
  autocorrelation: { lags: [1, 2], values: [[0.05, -0.02]], bound: 0.18 },
  bias: { mean: [0.02, -0.4], bound: 0.25 },
};
const look = chartLook(false);

describe('estimator chart options', () => {
  it('draws the NIS mean against the chi-square band of one NIS value', () => {
    const o = nisOptions(series, look) as any;
    const mean = o.series.find((x: any) => x.name === 'NIS mean per bucket');
    expect(mean.data).toEqual([
      [Date.parse('2026-03-01T08:00:00Z'), 2.1],
      [Date.parse('2026-03-01T08:01:00Z'), 1.9],
    ]);
    expect(mean.markArea.data[0][0].yAxis).toBe(0.01);
    expect(mean.markArea.data[0][1].yAxis).toBe(10.6);
    expect(mean.markLine.data.map((d: any) => d.yAxis)).toEqual([10.6, 0.01, 2]);
    // min + (max − min) stacked: the band's top is each bucket's maximum.
    const [lo, span] = o.series.slice(0, 2).map((x: any) => x.data.map((d: number[]) => d[1]));
    expect(lo).toEqual([0.1, 0.05]);
    lo.forEach((v: number, i: number) => expect(v + span[i]).toBeCloseTo([9.2, 7.4][i], 12));
    expect(o.yAxis.max({ max: 3 })).toBeGreaterThanOrEqual(10.6);
  });

  it('scales the standard normal density to the histogram counts', () => {
    const o = histogramOptions(series, look) as any;
    const normal = o.series.find((x: any) => x.name === 'standard normal (expected)');
    const atZero = normal.data.find((d: number[]) => Math.abs(d[0]) < 1e-9);
    // 100 samples in bins of width 1: expected count density at 0 is 100 · 1 · φ(0).
    expect(atZero[1]).toBeCloseTo(100 * normalDensity(0), 9);
    expect(normalDensity(0)).toBeCloseTo(0.3989422804, 9); // 1/√(2π)
  });

  it('marks the bias components outside their bound', () => {
    const o = biasOptions(series, look) as any;
    const colours = o.series[0].data.map((d: any) => d.itemStyle.color);
    expect(colours).toEqual([look.teal, look.magenta]);
    expect(o.series[0].data[1].label.formatter).toContain('outside');
    expect(o.yAxis.max).toBeGreaterThanOrEqual(0.4);
  });

  it('rounds axis maxima up to a tenth of a power of ten', () => {
    expect(niceMax(10.6 * 1.15)).toBe(13);
    expect(niceMax(0.33)).toBeCloseTo(0.33);
    expect(niceMax(0)).toBe(1);
  });
});
