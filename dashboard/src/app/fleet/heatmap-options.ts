import type { EChartsCoreOption } from 'echarts/core';
import type { FleetHeatmap } from '../../../../shared/src/api/api-types';
import type { ChartLook } from '../charts/chart-look';
import { VERDICT_LOOK } from '../verdict/verdict-look';

/** Rows shown at once; more scroll with the slider beside the chart. */
export const HEATMAP_VISIBLE_ROWS = 40;

const VERDICT_ORDER: Record<string, number> = { inconsistent: 0, marginal: 1, silent: 2, consistent: 3 };

/**
 * The rows worth drawing: estimators with at least one value in the range, the worst
 * verdicts first; `hidden` counts the estimators left out for having no samples.
 */
export function heatmapRows(map: FleetHeatmap): { rows: FleetHeatmap['rows']; hidden: number } {
  const rows = map.rows
    .filter((r) => r.values.some((v) => v !== null && Number.isFinite(v)))
    .sort((a, b) => (VERDICT_ORDER[a.verdict] ?? 9) - (VERDICT_ORDER[b.verdict] ?? 9) || a.label.localeCompare(b.label));
  return { rows, hidden: map.rows.length - rows.length };
}

/** Bands of the NIS ratio (windowed mean NIS / m; 1 is consistent), each with words. */
export function ratioBands(look: ChartLook) {
  return [
    { lt: 0.5, label: 'under 0.5: far smaller than the filter expects', color: look.tealDeep },
    { gte: 0.5, lt: 0.8, label: '0.5 to 0.8: smaller than expected', color: look.tealLight },
    { gte: 0.8, lt: 1.25, label: '0.8 to 1.25: as expected', color: look.dark ? '#3a4450' : '#e9dfca' },
    { gte: 1.25, lt: 2, label: '1.25 to 2: larger than expected', color: look.dark ? '#8a6a2c' : '#e8c27a' },
    { gte: 2, lt: 4, label: '2 to 4: much larger', color: look.ochre },
    { gte: 4, label: '4 and over: far larger', color: look.magenta },
  ];
}

export function ratioWords(value: number): string {
  if (value < 0.5) return 'far smaller than the filter expects';
  if (value < 0.8) return 'smaller than expected';
  if (value < 1.25) return 'as expected';
  if (value < 2) return 'larger than expected';
  if (value < 4) return 'much larger than expected';
  return 'far larger than expected';
}

function timeLabel(iso: string, spanMs: number): string {
  const d = new Date(iso);
  const hm = d.toLocaleTimeString(undefined, { hour: '2-digit', minute: '2-digit' });
  return spanMs > 36 * 3_600_000 ? `${d.toLocaleDateString(undefined, { month: 'short', day: 'numeric' })} ${hm}` : hm;
}

/** The fleet heat map: one row per estimator, one column per time bucket, coloured by NIS ratio. */
export function heatmapOptions(map: FleetHeatmap, rows: FleetHeatmap['rows'], look: ChartLook): EChartsCoreOption {
  const span = Date.parse(map.to) - Date.parse(map.from);
  const times = map.times.map((t) => timeLabel(t, span));
  const labels = rows.map((r) => `${VERDICT_LOOK[r.verdict].glyph} ${r.label}`);
  const data: [number, number, number][] = [];
  rows.forEach((row, y) =>
    row.values.forEach((v, x) => {
      if (v !== null && Number.isFinite(v)) data.push([x, y, Math.round(v * 1000) / 1000]);
    }),
  );
  const scroll = rows.length > HEATMAP_VISIBLE_ROWS;
  return {
    aria: {
      enabled: true,
      label: {
        description: `Heat map of the NIS ratio (mean NIS over its expected value; 1 is consistent) for ${rows.length} estimators over ${times.length} time buckets. The table below lists the same estimators.`,
      },
    },
    animation: false,
    textStyle: { color: look.text, fontFamily: 'Roboto, sans-serif' },
    grid: { left: 8, right: scroll ? 48 : 16, top: 8, bottom: 96, containLabel: true },
    tooltip: {
      position: 'top',
      formatter: (p: { data: [number, number, number] }) => {
        const [x, y, v] = p.data;
        const row = rows[y];
        return `${VERDICT_LOOK[row.verdict].glyph} <b>${row.label}</b> (${VERDICT_LOOK[row.verdict].word.toLowerCase()})<br/>${times[x]}: NIS ratio <b>${v.toFixed(2)}</b>, ${ratioWords(v)}<br/>Click to open the estimator`;
      },
    },
    xAxis: {
      type: 'category',
      data: times,
      splitArea: { show: false },
      axisLabel: { color: look.mutedText },
      axisLine: { lineStyle: { color: look.grid } },
    },
    yAxis: {
      type: 'category',
      data: labels,
      inverse: true,
      axisLabel: { color: look.text, fontSize: 11 },
      axisLine: { lineStyle: { color: look.grid } },
    },
    dataZoom: scroll
      ? [
          { type: 'slider', yAxisIndex: 0, right: 8, width: 16, startValue: 0, endValue: HEATMAP_VISIBLE_ROWS - 1, showDetail: false, zoomLock: true, brushSelect: false },
          { type: 'inside', yAxisIndex: 0, zoomOnMouseWheel: false, moveOnMouseWheel: true },
        ]
      : [],
    visualMap: {
      type: 'piecewise',
      dimension: 2,
      orient: 'horizontal',
      left: 'center',
      bottom: 8,
      itemWidth: 14,
      itemHeight: 10,
      textStyle: { color: look.text, fontSize: 11 },
      pieces: ratioBands(look),
    },
    series: [
      {
        type: 'heatmap',
        name: 'NIS ratio',
        data,
        progressive: 2000,
        itemStyle: { borderColor: look.surface, borderWidth: 0.5 },
        emphasis: { itemStyle: { borderColor: look.ink, borderWidth: 1 } },
      },
    ],
  };
}
