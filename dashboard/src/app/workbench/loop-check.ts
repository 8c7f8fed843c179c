import { ChangeDetectionStrategy, Component, computed, inject, input } from '@angular/core';
import type { ECharts } from 'echarts/core';
import { NgxEchartsDirective } from 'ngx-echarts';
import type { RetuneStudy } from '../../../../shared/src/api/api-types';
import { ChartTheme, type ChartLook } from '../charts/chart-look';
import { MatrixTable } from './matrix-table';
import { PrintCharts } from './print-charts';
import { SignalMark, type MarkKind } from './signal-mark';
import { bodeOptions } from './study-charts';
import {
  MARGIN_LABELS,
  floorWords,
  formatComplex,
  formatEntry,
  marginStanding,
  marginValue,
  marginWords,
  type MarginFloors,
  type MarginKind,
  type MarginStanding,
} from './study-format';

export type StudyLoop = NonNullable<RetuneStudy['loop']>;

const KINDS: MarginKind[] = ['gainUpper', 'gainLower', 'phase', 'disk'];

const STANDING_MARK: Record<MarginStanding, { kind: MarkKind; word: string }> = {
  meets: { kind: 'ok', word: 'Meets floor' },
  'below-floor': { kind: 'warning', word: 'Below floor' },
  'not-meaningful': { kind: 'problem', word: 'Unstable' },
};

/** The closed loop with the regulator: separation check, stability, margins before and after, warnings, the loop's magnitude. */
@Component({
  selector: 'wc-loop-check',
  imports: [NgxEchartsDirective, MatrixTable, SignalMark],
  templateUrl: './loop-check.html',
  styleUrl: './study-sections.scss',
  changeDetection: ChangeDetectionStrategy.OnPush,
})
export class LoopCheck {
  private readonly theme = inject(ChartTheme);
  private readonly print = inject(PrintCharts);
  readonly loop = input.required<StudyLoop>();
  readonly floors = input.required<MarginFloors>();

  protected readonly formatEntry = formatEntry;
  protected readonly combinedPoles = computed(() => this.loop().separation.combinedPoles.map(formatComplex).join(', '));
  protected readonly rows = computed(() => {
    const { marginsCurrent: before, marginsProposed: after } = this.loop();
    const floors = this.floors();
    return KINDS.map((kind) => {
      const cell = (m: typeof before) => {
        const value = marginValue(m, kind);
        return { text: marginWords(kind, value, m.closedLoopStable), mark: STANDING_MARK[marginStanding(kind, value, m.closedLoopStable, floors)] };
      };
      return { kind, label: MARGIN_LABELS[kind], floor: floorWords(kind, floors), current: cell(before), proposed: cell(after) };
    });
  });
  protected readonly bodeChart = computed(() => this.bode(this.theme.look()));

  protected keepBode(chart: ECharts): void {
    this.print.register('bode', chart, (look) => this.bode(look));
  }

  private bode(look: ChartLook) {
    const l = this.loop();
    return bodeOptions(l.marginsCurrent, l.marginsProposed, look);
  }
}
