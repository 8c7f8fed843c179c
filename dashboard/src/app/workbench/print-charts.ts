import { DOCUMENT } from '@angular/common';
import { DestroyRef, Injectable, inject } from '@angular/core';
import type { ECharts, EChartsCoreOption } from 'echarts/core';
import { ChartTheme, chartLook, type ChartLook } from '../charts/chart-look';

interface Registered {
  chart: ECharts;
  build: (look: ChartLook) => EChartsCoreOption | null;
  printWidth: number;
}

/** The printable width of an A4 or Letter page with the report's margins, in CSS pixels. */
export const PRINT_WIDTH = 660;

/**
 * Keeps a page's charts right on paper: before printing, each is redrawn in the light
 * colours at the page's width (a canvas does not follow the print stylesheet); after,
 * back to the screen's theme and size. One per study page.
 */
@Injectable()
export class PrintCharts {
  private readonly theme = inject(ChartTheme);
  private readonly charts = new Map<string, Registered>();

  constructor() {
    const view = inject(DOCUMENT).defaultView;
    if (!view) return;
    const before = () => this.forPaper();
    const after = () => this.forScreen();
    view.addEventListener('beforeprint', before);
    view.addEventListener('afterprint', after);
    inject(DestroyRef).onDestroy(() => {
      view.removeEventListener('beforeprint', before);
      view.removeEventListener('afterprint', after);
      this.charts.clear();
    });
  }

  /** Call from (chartInit); `build` makes the chart's options for a set of colours. */
  register(name: string, chart: ECharts, build: (look: ChartLook) => EChartsCoreOption | null, printWidth = PRINT_WIDTH): void {
    this.charts.set(name, { chart, build, printWidth });
  }

  private forPaper(): void {
    const light = chartLook(false);
    for (const { chart, build, printWidth } of this.charts.values()) {
      if (chart.isDisposed()) continue;
      const options = build(light);
      if (options) chart.setOption(options, { notMerge: true });
      chart.resize({ width: printWidth });
    }
  }

  private forScreen(): void {
    const look = this.theme.look();
    for (const { chart, build } of this.charts.values()) {
      if (chart.isDisposed()) continue;
      const options = build(look);
      if (options) chart.setOption(options, { notMerge: true });
      chart.resize({ width: 'auto' });
    }
  }
}
