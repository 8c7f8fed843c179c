import type { RetuneStudy, StudyMargins } from '../../../../shared/src/api/api-types';
import { chartLook } from '../charts/chart-look';
import { autocovarianceOptions, autocovarianceSeries, bodeOptions, poleExtent, poleOptions, unitCircle } from './study-charts';

const look = chartLook(false);

describe('the unit-circle series', () => {
  it('closes the circle on itself, starting at z = 1 and running anticlockwise', () => {
    const c = unitCircle(8);
    expect(c).toHaveLength(9);
    expect(c[0]).toEqual([1, 0]);
    expect(c[8]).toEqual([1, 0]);
    expect(c[2][0]).toBeCloseTo(0, 12);
    expect(c[2][1]).toBeCloseTo(1, 12); // a quarter turn on: z = j
    for (const [x, y] of unitCircle()) expect(Math.hypot(x, y)).toBeCloseTo(1, 12);
  });

  it('never draws fewer than three segments', () => {
    expect(unitCircle(1)).toHaveLength(4);
  });
});

describe('the pole chart', () => {
  it('shows the unit circle and every pole in a square view', () => {
    expect(poleExtent([{ re: 0.5, im: 0.2 }])).toBe(1.5);
    expect(poleExtent([{ re: -1.4, im: 0 }])).toBe(2);
    expect(poleExtent([{ re: 0, im: 3.1 }])).toBe(3.5);
    const o = poleOptions([{ re: 0.98, im: 0.05 }, { re: 0.98, im: -0.05 }], [{ re: 0.7, im: 0 }, { re: 0.6, im: 0 }], look) as any;
    expect(o.xAxis.min).toBe(-1.5);
    expect(o.yAxis.max).toBe(1.5);
    expect(o.xAxis.interval).toBe(0.5);
    expect(o.series.map((s: any) => [s.name, s.type, s.symbol])).toEqual([
      ['unit circle', 'line', undefined],
      ['current gain ○', 'scatter', 'emptyCircle'],
      ['proposed gain ◆', 'scatter', 'diamond'],
    ]);
    expect(o.series[1].data).toEqual([[0.98, 0.05], [0.98, -0.05]]);
    expect(o.series[0].data).toHaveLength(181);
    // The chart's description names the poles for screen readers.
    expect(o.aria.label.description).toContain('0.98 − 0.05j');
  });
});

describe('the autocovariance chart', () => {
  it('draws one series pair when there is one value per lag', () => {
    const ac: RetuneStudy['autocovariance'] = { lags: [0, 1, 2], estimated: [2, 0.5, 0.1], fitted: [2.1, 0.4, 0.12] };
    const groups = autocovarianceSeries(ac);
    expect(groups).toEqual([{ name: 'autocovariance', estimated: [[0, 2], [1, 0.5], [2, 0.1]], fitted: [[0, 2.1], [1, 0.4], [2, 0.12]] }]);
    const o = autocovarianceOptions(ac, look) as any;
    expect(o.series.map((s: any) => s.name)).toEqual(['autocovariance estimated', 'autocovariance fitted']);
    expect(o.series[1].lineStyle.type).toBe('dashed');
  });

  it('splits a p × p block per lag into one series per entry', () => {
    const ac: RetuneStudy['autocovariance'] = {
      lags: [0, 1],
      estimated: [1, 0.1, 0.1, 2, 0.5, 0, 0, 0.9],
      fitted: [1, 0, 0, 2, 0.4, 0, 0, 1],
    };
    const groups = autocovarianceSeries(ac);
    expect(groups.map((g) => g.name)).toEqual(['C(1,1)', 'C(1,2)', 'C(2,1)', 'C(2,2)']);
    expect(groups[3].estimated).toEqual([[0, 2], [1, 0.9]]);
    expect(groups[0].fitted).toEqual([[0, 1], [1, 0.4]]);
  });
});

describe('the loop magnitude chart', () => {
  const margins = (db: number[]): StudyMargins => ({
    closedLoopStable: true,
    gainMarginUpperDb: 8,
    gainMarginLowerDb: null,
    phaseMarginDeg: 40,
    diskAlpha: 0.6,
    sweep: { omega: [0, 0.1, 1, 10], magnitudeDb: db, phaseDeg: [0, 0, 0, 0] },
  });

  it('draws both loops on a log frequency axis, leaving out ω = 0, and marks 0 dB', () => {
    const o = bodeOptions(margins([30, 20, 0, -20]), margins([25, 15, -3, Infinity]), look) as any;
    expect(o.xAxis.type).toBe('log');
    expect(o.series[0].data).toEqual([[0.1, 20], [1, 0], [10, -20]]);
    expect(o.series[1].data).toEqual([[0.1, 15], [1, -3]]);
    expect(o.series[0].markLine.data).toEqual([{ yAxis: 0 }]);
  });
});
