import { ChangeDetectionStrategy, Component, computed, inject, input, output } from '@angular/core';
import type { ECElementEvent } from 'echarts/core';
import { NgxEchartsDirective } from 'ngx-echarts';
import type { FleetHeatmap as FleetHeatmapData } from '../../../../shared/src/api/api-types';
import { ChartTheme } from '../charts/chart-look';
import { HEATMAP_VISIBLE_ROWS, heatmapOptions, heatmapRows } from './heatmap-options';

/** The fleet over time: NIS ratio per estimator and time bucket; a click opens the estimator. */
@Component({
  selector: 'wc-fleet-heatmap',
  imports: [NgxEchartsDirective],
  template: `
    @if (hidden() < heatmap().rows.length) {
      <div echarts class="chart" [options]="options()" [style.height.px]="height()" (chartClick)="openCell($event)"></div>
    }
    @if (hidden() > 0) {
      <p class="hidden-rows">
        {{ hidden() }} {{ hidden() === 1 ? 'estimator has' : 'estimators have' }} no samples in this range and
        {{ hidden() === 1 ? 'is' : 'are' }} left out{{ hidden() === heatmap().rows.length ? ': pick a longer range, or check that units are publishing' : '' }}.
      </p>
    }
  `,
  styles: `
    :host { display: block; }
    .chart { width: 100%; cursor: pointer; }
    .hidden-rows { margin: 4px 0 0; font-size: 0.85rem; color: var(--mat-sys-on-surface-variant); }
  `,
  changeDetection: ChangeDetectionStrategy.OnPush,
})
export class FleetHeatmap {
  private readonly theme = inject(ChartTheme);
  readonly heatmap = input.required<FleetHeatmapData>();
  /** The estimator whose cell was clicked. */
  readonly estimatorSelected = output<number>();
  private readonly shown = computed(() => heatmapRows(this.heatmap()));
  protected readonly options = computed(() => heatmapOptions(this.heatmap(), this.shown().rows, this.theme.look()));
  protected readonly height = computed(() => Math.min(this.shown().rows.length, HEATMAP_VISIBLE_ROWS) * 18 + 130);
  protected readonly hidden = computed(() => this.shown().hidden);

  protected openCell(event: ECElementEvent): void {
    const data = event.data as [number, number, number] | undefined;
    const row = data ? this.shown().rows[data[1]] : undefined;
    if (row) this.estimatorSelected.emit(row.estimatorId);
  }
}
