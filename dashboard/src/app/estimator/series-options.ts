// Chart options for one estimator's series (GET /api/estimators/:id/series). Pure
// functions of the data and the colours, so they can be checked without drawing.
import type { EChartsCoreOption } from 'echarts/core';
import type { EstimatorSeries } from '../../../../shared/src/api/api-types';
import type { ChartLook } from '../charts/chart-look';
import { formatStat } from '../fleet/nis-gauge';

const FONT = 'Roboto, sans-serif';

function base(look: ChartLook, description: string): EChartsCoreOption {
  return {
    aria: { enabled: true, label: { description } },
    animation: false,
    textStyle: { color: look.text, fontFamily: FONT },
    grid: { left: 8, right: 16, top: 52, bottom: 8, containLabel: true },
    legend: legend(look),
  };
}

function legend(look: ChartLook) {
  return { top: 0, left: 0, textStyle: { color: look.text }, itemGap: 16 };
}

function valueAxis(look: ChartLook, name?: string) {
  return {
    type: 'value',
    name,
    nameTextStyle: { color: look.mutedText },
    axisLabel: { color: look.mutedText },
    splitLine: { lineStyle: { color: look.grid, opacity: 0.6 } },
  };
}

function timeAxis(look: ChartLook) {
  return {
    type: 'time',
    axisLabel: { color: look.mutedText, hideOverlap: true },
    axisLine: { lineStyle: { color: look.grid } },
    splitLine: { show: false },
  };
}

/** A round axis maximum at or above x (1, 2 or 5 times a power of ten, in steps of a tenth). */
export function niceMax(x: number): number {
  if (!(x > 0) || !Number.isFinite(x)) return 1;
  const step = 10 ** Math.floor(Math.log10(x)) / 10;
  return Math.ceil(x / step) * step;
}

/** An axis extent symmetric about 0 that shows ±bound and every value. */
function symmetricExtent(values: number[], bound: number): { min: number; max: number } {
  const top = niceMax(Math.max(bound * 1.3, ...values.map((v) => Math.abs(v) * 1.1)));
  return { min: -top, max: top };
}

/** Standard normal density φ(x) = exp(−x²/2) / √(2π). */
export function normalDensity(x: number): number {
  return Math.exp(-0.5 * x * x) / Math.sqrt(2 * Math.PI);
}

/**
 * NIS over time: per bucket the min-to-max band and the mean, against the chi-square
 * acceptance band of a single NIS value (shaded, with its bounds as lines) and m.
 */
export type NisScale = 'linear' | 'log';

/** The smallest NIS drawn on a log axis (NIS can be 0 to rounding). */
const LOG_FLOOR = 1e-3;

export function nisOptions(s: EstimatorSeries, look: ChartLook, scale: NisScale = 'linear'): EChartsCoreOption {
  const t = s.points.map((p) => Date.parse(p.t));
  const log = scale === 'log';
  const floor = (v: number) => (log ? Math.max(v, LOG_FLOOR) : v);
  const pct = `${formatStat((1 - s.band.alpha) * 100)} %`;
  return {
    ...base(
      look,
      `NIS over time for ${s.samples} samples with m = ${s.m}. The acceptance band for a single NIS value at alpha ${s.band.alpha} runs from ${formatStat(s.band.lower)} to ${formatStat(s.band.upper)}.`,
    ),
    tooltip: {
      trigger: 'axis',
      formatter: (items: { dataIndex: number }[]) => {
        const p = s.points[items[0]?.dataIndex ?? 0];
        if (!p) return '';
        return `${new Date(p.t).toLocaleString()}<br/>${p.count} samples<br/>NIS mean <b>${formatStat(p.nisMean)}</b> (m = ${s.m})<br/>min ${formatStat(p.nisMin)}, max ${formatStat(p.nisMax)}`;
      },
    },
    xAxis: timeAxis(look),
    legend: { ...legend(look), data: ['NIS min to max per bucket', 'NIS mean per bucket'] },
    // Keep the acceptance band in view even when every value sits below it.
    yAxis: log
      ? {
          ...valueAxis(look, 'NIS (log)'),
          type: 'log',
          min: (v: { min: number }) => 10 ** Math.floor(Math.log10(Math.max(LOG_FLOOR, Math.min(v.min, s.band.lower || 1)))),
          max: (v: { max: number }) => 10 ** Math.ceil(Math.log10(Math.max(v.max, s.band.upper * 1.15))),
        }
      : { ...valueAxis(look, 'NIS'), min: 0, max: (v: { max: number }) => niceMax(Math.max(v.max, s.band.upper * 1.15)) },
    dataZoom: [{ type: 'inside', filterMode: 'none' }],
    series: [
      {
        name: 'NIS min',
        type: 'line',
        stack: 'range',
        data: s.points.map((p, i) => [t[i], floor(p.nisMin)]),
        lineStyle: { opacity: 0 },
        symbol: 'none',
        silent: true,
        legendHoverLink: false,
        tooltip: { show: false },
      },
      {
        name: 'NIS min to max per bucket',
        type: 'line',
        stack: 'range',
        data: s.points.map((p, i) => [t[i], Math.max(0, floor(p.nisMax) - floor(p.nisMin))]),
        lineStyle: { opacity: 0 },
        areaStyle: { color: look.teal, opacity: 0.22 },
        itemStyle: { color: look.teal },
        symbol: 'none',
      },
      {
        name: 'NIS mean per bucket',
        type: 'line',
        data: s.points.map((p, i) => [t[i], floor(p.nisMean)]),
        lineStyle: { color: look.ink, width: 1.5 },
        itemStyle: { color: look.ink },
        symbol: 'none',
        markArea: {
          silent: true,
          itemStyle: { color: look.ochre, opacity: 0.1 },
          data: [[{ yAxis: floor(s.band.lower), name: `${pct} band` }, { yAxis: s.band.upper }]],
          label: { show: false },
        },
        markLine: {
          silent: true,
          symbol: 'none',
          label: { color: look.mutedText, formatter: '{b}', position: 'insideEndTop' },
          data: [
            { yAxis: s.band.upper, name: `${pct} band, upper ${formatStat(s.band.upper)}`, lineStyle: { color: look.ochre, type: 'dashed' } },
            { yAxis: floor(s.band.lower), name: `lower ${formatStat(s.band.lower)}`, lineStyle: { color: look.ochre, type: 'dashed' } },
            { yAxis: s.m, name: `m = ${s.m}`, lineStyle: { color: look.teal, type: 'dotted' } },
          ],
        },
      },
    ],
  };
}

/**
 * Histogram of the whitened innovations per component (as outlined steps), against the
 * standard normal density scaled to counts: N · Δx · φ(x).
 */
export function histogramOptions(s: EstimatorSeries, look: ChartLook): EChartsCoreOption {
  const { edges, counts } = s.histogram;
  const steps = counts.map((c) => {
    const pts: [number, number][] = [[edges[0], 0]];
    c.forEach((n, i) => pts.push([edges[i], n], [edges[i + 1], n]));
    pts.push([edges[edges.length - 1], 0]);
    return pts;
  });
  const total = counts.length ? counts[0].reduce((a, b) => a + b, 0) : 0;
  const width = edges.length > 1 ? (edges[edges.length - 1] - edges[0]) / (edges.length - 1) : 1;
  const lo = edges[0] ?? -4;
  const hi = edges[edges.length - 1] ?? 4;
  const curve: [number, number][] = Array.from({ length: 121 }, (_, k) => {
    const x = lo + ((hi - lo) * k) / 120;
    return [x, total * width * normalDensity(x)];
  });
  return {
    ...base(look, `Histogram of the whitened innovations of ${counts.length} components against the standard normal density scaled to ${total} samples.`),
    tooltip: { trigger: 'axis', valueFormatter: (v: number) => formatStat(v) },
    grid: { left: 8, right: 16, top: 52, bottom: 28, containLabel: true },
    xAxis: { ...valueAxis(look, 'whitened innovation'), min: lo, max: hi, nameLocation: 'middle', nameGap: 26 },
    yAxis: valueAxis(look, 'count'),
    series: [
      ...steps.map((data, j) => ({
        name: `component ${j + 1}`,
        type: 'line',
        data,
        symbol: 'none',
        lineStyle: { color: look.components[j % look.components.length], width: 1.5 },
        itemStyle: { color: look.components[j % look.components.length] },
        areaStyle: { color: look.components[j % look.components.length], opacity: 0.12 },
      })),
      {
        name: 'standard normal (expected)',
        type: 'line',
        data: curve,
        symbol: 'none',
        smooth: true,
        lineStyle: { color: look.ochre, width: 2, type: 'dashed' },
        itemStyle: { color: look.ochre },
      },
    ],
  };
}

/** Autocorrelation of the whitened innovations by lag, per component, with its ±bound. */
export function autocorrelationOptions(s: EstimatorSeries, look: ChartLook): EChartsCoreOption {
  const { lags, values, bound } = s.autocorrelation;
  return {
    ...base(look, `Autocorrelation of the whitened innovations at lags ${lags[0]} to ${lags[lags.length - 1]}, with bounds of plus and minus ${formatStat(bound)}.`),
    tooltip: { trigger: 'axis', valueFormatter: (v: number) => formatStat(v) },
    grid: { left: 8, right: 16, top: 52, bottom: 28, containLabel: true },
    xAxis: { type: 'category', data: lags, name: 'lag', nameLocation: 'middle', nameGap: 26, nameTextStyle: { color: look.mutedText }, axisLabel: { color: look.mutedText } },
    yAxis: { ...valueAxis(look, 'autocorrelation'), ...symmetricExtent(values.flat(), bound) },
    series: values.map((v, j) => ({
      name: `component ${j + 1}`,
      type: 'bar',
      data: v,
      itemStyle: { color: look.components[j % look.components.length] },
      ...(j === 0
        ? {
            markArea: { silent: true, itemStyle: { color: look.teal, opacity: 0.08 }, data: [[{ yAxis: -bound }, { yAxis: bound }]] },
            markLine: {
              silent: true,
              symbol: 'none',
              label: { color: look.mutedText, formatter: '{b}', position: 'insideEndTop' },
              lineStyle: { color: look.ochre, type: 'dashed' },
              data: [
                { yAxis: bound, name: `+${formatStat(bound)}` },
                { yAxis: -bound, name: `−${formatStat(bound)}` },
              ],
            },
          }
        : {}),
    })),
  };
}

/** The two-sided CUSUM on NIS over time, each side against its threshold. */
export function cusumOptions(s: EstimatorSeries, look: ChartLook): EChartsCoreOption {
  const t = s.points.map((p) => Date.parse(p.t));
  const th = s.cusumThreshold;
  const line = (value: number | undefined, name: string, color: string) =>
    value === undefined
      ? undefined
      : { silent: true, symbol: 'none', label: { color: look.mutedText, formatter: '{b}', position: 'insideEndTop' }, lineStyle: { color, type: 'dashed' }, data: [{ yAxis: value, name }] };
  return {
    ...base(look, `CUSUM statistics over time${th ? `, with thresholds ${formatStat(th.up)} (up) and ${formatStat(th.down)} (down)` : ''}.`),
    tooltip: { trigger: 'axis', valueFormatter: (v: number) => formatStat(v) },
    xAxis: timeAxis(look),
    yAxis: { ...valueAxis(look, 'CUSUM'), max: (v: { max: number }) => niceMax(Math.max(v.max, (th?.up ?? 0) * 1.15, (th?.down ?? 0) * 1.15)) },
    dataZoom: [{ type: 'inside', filterMode: 'none' }],
    series: [
      {
        name: 'up (noise larger than believed)',
        type: 'line',
        data: s.points.map((p, i) => [t[i], p.cusumUp]),
        symbol: 'none',
        lineStyle: { color: look.magenta, width: 1.5 },
        itemStyle: { color: look.magenta },
        markLine: line(th?.up, `up threshold ${formatStat(th?.up)}`, look.magenta),
      },
      {
        name: 'down (noise smaller than believed)',
        type: 'line',
        data: s.points.map((p, i) => [t[i], p.cusumDown]),
        symbol: 'none',
        lineStyle: { color: look.teal, width: 1.5 },
        itemStyle: { color: look.teal },
        markLine: line(th?.down, `down threshold ${formatStat(th?.down)}`, look.teal),
      },
    ],
  };
}

/** Mean of each whitened component over the range, against its ±bound (bars outside the bound in magenta). */
export function biasOptions(s: EstimatorSeries, look: ChartLook): EChartsCoreOption {
  const { mean, bound } = s.bias;
  return {
    ...base(look, `Mean of each whitened innovation component, with bounds of plus and minus ${formatStat(bound)}.`),
    legend: { show: false },
    tooltip: { trigger: 'axis', valueFormatter: (v: number) => formatStat(v) },
    xAxis: { type: 'category', data: mean.map((_, j) => `component ${j + 1}`), axisLabel: { color: look.mutedText } },
    yAxis: { ...valueAxis(look, 'mean'), ...symmetricExtent(mean, bound) },
    series: [
      {
        name: 'mean',
        type: 'bar',
        barMaxWidth: 48,
        data: mean.map((v) => ({
          value: v,
          itemStyle: { color: Math.abs(v) > bound ? look.magenta : look.teal },
          label: { show: true, position: v >= 0 ? 'top' : 'bottom', color: look.text, formatter: `${formatStat(v)}${Math.abs(v) > bound ? ' (outside)' : ''}` },
        })),
        markArea: { silent: true, itemStyle: { color: look.teal, opacity: 0.08 }, data: [[{ yAxis: -bound }, { yAxis: bound }]] },
        markLine: {
          silent: true,
          symbol: 'none',
          label: { color: look.mutedText, formatter: '{b}', position: 'insideEndTop' },
          lineStyle: { color: look.ochre, type: 'dashed' },
          data: [
            { yAxis: bound, name: `+${formatStat(bound)}` },
            { yAxis: -bound, name: `−${formatStat(bound)}` },
          ],
        },
      },
    ],
  };
}
