// Chart options for a retune study: the estimator's poles in the complex plane with the
// unit circle, the innovation autocovariance estimated against fitted, and the loop's
// magnitude at the plant input. Pure functions of the data and the colours.
import type { EChartsCoreOption } from 'echarts/core';
import type { ComplexNumber, RetuneStudy, StudyMargins } from '../../../../shared/src/api/api-types';
import type { ChartLook } from '../charts/chart-look';
import { formatComplex, formatEntry } from './study-format';

const FONT = 'Roboto, sans-serif';

function base(look: ChartLook, description: string): EChartsCoreOption {
  return {
    aria: { enabled: true, label: { description } },
    animation: false,
    textStyle: { color: look.text, fontFamily: FONT },
    legend: { top: 0, left: 0, textStyle: { color: look.text }, itemGap: 16 },
  };
}

function valueAxis(look: ChartLook, name: string, extra: Record<string, unknown> = {}) {
  return {
    type: 'value',
    name,
    nameLocation: 'middle',
    nameGap: 34,
    nameTextStyle: { color: look.mutedText },
    axisLabel: { color: look.mutedText },
    axisLine: { lineStyle: { color: look.grid } },
    splitLine: { lineStyle: { color: look.grid, opacity: 0.6 } },
    ...extra,
  };
}

/**
 * The unit circle |z| = 1 as `points` segments, closed (the last point repeats the
 * first), starting at z = 1 and running anticlockwise.
 */
export function unitCircle(points = 180): [number, number][] {
  const n = Math.max(3, Math.floor(points));
  const out: [number, number][] = [];
  for (let k = 0; k <= n; k++) {
    const theta = (2 * Math.PI * k) / n;
    out.push(k === n ? [1, 0] : [Math.cos(theta), Math.sin(theta)]);
  }
  return out;
}

/** Half the side of a square view that shows the unit circle and every pole with a little room, in steps of 0.5. */
export function poleExtent(poles: readonly ComplexNumber[]): number {
  const far = Math.max(1, ...poles.map((z) => Math.max(Math.abs(z.re), Math.abs(z.im))));
  return Math.ceil((far * 1.1) / 0.5) * 0.5;
}

/** The estimator's poles before (current gain) and after (proposed gain) with the unit circle. */
export function poleOptions(current: readonly ComplexNumber[], proposed: readonly ComplexNumber[], look: ChartLook): EChartsCoreOption {
  const extent = poleExtent([...current, ...proposed]);
  const points = (poles: readonly ComplexNumber[]) => poles.map((z) => [z.re, z.im]);
  const outside = (poles: readonly ComplexNumber[]) => poles.filter((z) => Math.hypot(z.re, z.im) >= 1).length;
  const axis = (name: string) => valueAxis(look, name, { min: -extent, max: extent, interval: extent > 2 ? undefined : 0.5 });
  return {
    ...base(
      look,
      `Estimator poles in the complex plane. Current gain: ${current.map(formatComplex).join(', ')}` +
        ` (${outside(current)} on or outside the unit circle). Proposed gain: ${proposed.map(formatComplex).join(', ')}` +
        ` (${outside(proposed)} on or outside the unit circle).`,
    ),
    grid: { left: 48, right: 44, top: 44, bottom: 48, containLabel: false }, // a square plot in the square box
    tooltip: {
      trigger: 'item',
      formatter: (p: { seriesName: string; value: [number, number] }) =>
        p.seriesName === 'unit circle'
          ? 'unit circle, |z| = 1'
          : `${p.seriesName}: ${formatComplex({ re: p.value[0], im: p.value[1] })}, |z| = ${formatEntry(Math.hypot(p.value[0], p.value[1]))}`,
    },
    xAxis: axis('Re z'),
    yAxis: axis('Im z'),
    series: [
      {
        name: 'unit circle',
        type: 'line',
        data: unitCircle(),
        showSymbol: false,
        silent: true,
        lineStyle: { color: look.mutedText, width: 1.2, type: 'dashed' },
        z: 1,
      },
      {
        name: 'current gain ○',
        type: 'scatter',
        data: points(current),
        symbol: 'emptyCircle',
        symbolSize: 14,
        itemStyle: { color: look.silent, borderWidth: 2 },
        z: 2,
      },
      {
        name: 'proposed gain ◆',
        type: 'scatter',
        data: points(proposed),
        symbol: 'diamond',
        symbolSize: 12,
        itemStyle: { color: look.teal },
        z: 3,
      },
    ],
  };
}

export interface AutocovarianceSeries {
  name: string;
  estimated: [number, number][];
  fitted: [number, number][];
}

/**
 * The autocovariance series by lag. When the service sends one value per lag, one series;
 * when it sends a p × p block per lag (row-major, flattened), one series per entry (i, j).
 */
export function autocovarianceSeries(ac: RetuneStudy['autocovariance']): AutocovarianceSeries[] {
  const lags = ac.lags;
  const n = ac.estimated.length;
  if (!lags.length || !n) return [];
  const perLag = n % lags.length === 0 ? n / lags.length : 0;
  if (perLag <= 1) {
    // One value per lag, or a shape we cannot split: plot against the lag (or the index).
    const x = (k: number) => (perLag === 1 ? lags[k] : k);
    return [
      {
        name: 'autocovariance',
        estimated: ac.estimated.map((v, k) => [x(k), v]),
        fitted: ac.fitted.slice(0, n).map((v, k) => [x(k), v]),
      },
    ];
  }
  const p = Math.round(Math.sqrt(perLag));
  const square = p * p === perLag;
  return Array.from({ length: perLag }, (_, e) => ({
    name: square ? `C(${Math.floor(e / p) + 1},${(e % p) + 1})` : `entry ${e + 1}`,
    estimated: lags.map((lag, k) => [lag, ac.estimated[k * perLag + e]] as [number, number]),
    fitted: lags.filter((_, k) => k * perLag + e < ac.fitted.length).map((lag, k) => [lag, ac.fitted[k * perLag + e]] as [number, number]),
  }));
}

/** The innovations' autocovariance by lag: estimated from the data (marks) against the fit of the estimated Q and R (dashed). */
export function autocovarianceOptions(ac: RetuneStudy['autocovariance'], look: ChartLook): EChartsCoreOption {
  const groups = autocovarianceSeries(ac);
  const colour = (i: number) => look.components[i % look.components.length];
  return {
    ...base(look, `Autocovariance of the innovations at lags ${ac.lags[0] ?? 0} to ${ac.lags[ac.lags.length - 1] ?? 0}, estimated from the data and as fitted by the estimated noise covariances.`),
    grid: { left: 8, right: 16, top: 52, bottom: 36, containLabel: true },
    tooltip: { trigger: 'axis', valueFormatter: (v: number) => formatEntry(v) },
    xAxis: valueAxis(look, 'lag', { minInterval: 1, splitLine: { show: false } }),
    yAxis: valueAxis(look, '', { scale: true }),
    series: groups.flatMap((g, i) => [
      {
        name: `${g.name} estimated`,
        type: 'line',
        data: g.estimated,
        symbol: 'circle',
        symbolSize: 6,
        lineStyle: { color: colour(i), width: 1.5 },
        itemStyle: { color: colour(i) },
      },
      {
        name: `${g.name} fitted`,
        type: 'line',
        data: g.fitted,
        showSymbol: false,
        lineStyle: { color: colour(i), width: 2, type: 'dashed' },
        itemStyle: { color: colour(i) },
      },
    ]),
  };
}

/** Loop magnitude at the plant input over frequency, with the current and the proposed filter gain. */
export function bodeOptions(current: StudyMargins, proposed: StudyMargins, look: ChartLook): EChartsCoreOption {
  const line = (m: StudyMargins) => m.sweep.omega.map((w, k) => [w, m.sweep.magnitudeDb[k]]).filter(([w, db]) => w > 0 && Number.isFinite(db));
  return {
    ...base(look, 'Loop magnitude in decibels at the plant input against frequency, with the current and with the proposed filter gain; 0 dB marked.'),
    grid: { left: 8, right: 16, top: 52, bottom: 40, containLabel: true },
    tooltip: { trigger: 'axis', valueFormatter: (v: number) => `${formatEntry(v)} dB` },
    xAxis: valueAxis(look, 'ω (rad/s)', { type: 'log', splitLine: { show: false }, axisLabel: { color: look.mutedText, formatter: (v: number) => formatEntry(v) } }),
    yAxis: valueAxis(look, 'dB', { scale: true, nameLocation: 'end', nameGap: 10 }),
    series: [
      {
        name: 'current gain',
        type: 'line',
        data: line(current),
        showSymbol: false,
        lineStyle: { color: look.silent, width: 2 },
        itemStyle: { color: look.silent },
        markLine: {
          silent: true,
          symbol: 'none',
          label: { formatter: '0 dB', color: look.mutedText, position: 'insideEndTop' },
          lineStyle: { color: look.mutedText, type: 'dotted', width: 1.5 },
          data: [{ yAxis: 0 }],
        },
      },
      {
        name: 'proposed gain',
        type: 'line',
        data: line(proposed),
        showSymbol: false,
        lineStyle: { color: look.teal, width: 2, type: 'dashed' },
        itemStyle: { color: look.teal },
      },
    ],
  };
}
