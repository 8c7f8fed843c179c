import { ChangeDetectionStrategy, Component, computed, effect, inject, input, signal } from '@angular/core';
import { Title } from '@angular/platform-browser';
import { toObservable, toSignal } from '@angular/core/rxjs-interop';
import { MatButtonModule } from '@angular/material/button';
import { MatButtonToggleModule } from '@angular/material/button-toggle';
import { MatProgressBarModule } from '@angular/material/progress-bar';
import { RouterLink } from '@angular/router';
import type { EChartsCoreOption } from 'echarts/core';
import { NgxEchartsDirective } from 'ngx-echarts';
import {
  EMPTY,
  Subject,
  auditTime,
  combineLatest,
  filter,
  interval,
  map,
  merge,
  startWith,
  switchMap,
} from 'rxjs';
import type { AlertList, EstimatorDetail as EstimatorDetailData, EstimatorSeries } from '../../../../shared/src/api/api-types';
import { SeverityBadge } from '../alerts/severity-badge';
import { STATE_WORD, ruleWords } from '../alerts/severity-look';
import { ChartTheme, type ChartLook } from '../charts/chart-look';
import { foldLoad, initialLoad, loadSteps } from '../feedback/load-state';
import { Notice } from '../feedback/notice';
import { NisGauge, formatP, formatStat } from '../fleet/nis-gauge';
import { LiveEvents } from '../live/live-events';
import { ageOf, formatAge, formatDateTime, formatDuration } from '../time/age';
import { TickingClock } from '../time/ticking-clock';
import { VerdictBadge } from '../verdict/verdict-badge';
import { VERDICT_LOOK } from '../verdict/verdict-look';
import { AdvisoryNote } from './advisory-note';
import { EstimatorApi } from './estimator-api';
import { autocorrelationOptions, biasOptions, cusumOptions, histogramOptions, nisOptions, type NisScale } from './series-options';
import { DEFAULT_RANGE, resolveRange, type TimeRange } from './time-range';
import { TimeRangePicker } from './time-range-picker';

/** One estimator: its verdict and why, its window statistics, its charts over a time range, its alerts. */
@Component({
  selector: 'wc-estimator-detail',
  imports: [
    RouterLink,
    MatButtonModule,
    MatButtonToggleModule,
    MatProgressBarModule,
    NgxEchartsDirective,
    VerdictBadge,
    SeverityBadge,
    NisGauge,
    Notice,
    AdvisoryNote,
    TimeRangePicker,
  ],
  templateUrl: './estimator-detail.html',
  styleUrl: './estimator-detail.scss',
  changeDetection: ChangeDetectionStrategy.OnPush,
})
export class EstimatorDetail {
  private readonly api = inject(EstimatorApi);
  private readonly live = inject(LiveEvents);
  private readonly theme = inject(ChartTheme);
  private readonly clock = inject(TickingClock);

  /** The route's :id. */
  readonly id = input.required<string>();
  protected readonly estimatorId = computed(() => Number(this.id()));
  protected readonly range = signal<TimeRange>(DEFAULT_RANGE);
  protected readonly verdictLook = VERDICT_LOOK;
  protected readonly stateWord = STATE_WORD;
  protected readonly ruleWords = ruleWords;
  protected readonly format = formatStat;
  protected readonly formatDateTime = formatDateTime;

  private readonly id$ = toObservable(this.estimatorId);
  private readonly range$ = toObservable(this.range);
  private readonly retry$ = new Subject<void>();
  /** Live changes of this estimator (gathered for 2 s). */
  private readonly changes$ = combineLatest([this.id$, this.live.events$]).pipe(
    filter(([id, e]) => e.data.estimatorId === id),
    auditTime(2000),
  );

  protected readonly detail = toSignal(
    this.id$.pipe(
      switchMap((id) =>
        merge(this.changes$, interval(15_000), this.retry$).pipe(
          startWith(null),
          switchMap(() => loadSteps(this.api.detail(id))),
          foldLoad(),
        ),
      ),
    ),
    { initialValue: initialLoad<EstimatorDetailData>() },
  );

  protected readonly series = toSignal(
    this.id$.pipe(
      switchMap((id) =>
        this.range$.pipe(
          switchMap((range) =>
            // A moving range follows new samples; a fixed one loads once (and on retry).
            merge(range.kind === 'last' ? merge(this.changes$, interval(30_000)) : EMPTY, this.retry$).pipe(
              startWith(null),
              map(() => resolveRange(range)),
              switchMap(({ from, to }) => loadSteps(this.api.series(id, from, to))),
            ),
          ),
          foldLoad(),
        ),
      ),
    ),
    { initialValue: initialLoad<EstimatorSeries>() },
  );

  protected readonly alerts = toSignal(
    this.id$.pipe(
      switchMap((id) =>
        merge(this.live.alerts$.pipe(filter((a) => a.estimatorId === id), auditTime(1000)), this.retry$).pipe(
          startWith(null),
          switchMap(() => loadSteps(this.api.alerts(id))),
          foldLoad(),
        ),
      ),
    ),
    { initialValue: initialLoad<AlertList>() },
  );

  protected readonly estimator = computed(() => {
    const d = this.detail().value;
    return d && d.id === this.estimatorId() ? d : null;
  });
  protected readonly hasSamples = computed(() => (this.series().value?.samples ?? 0) > 0);

  /** Linear, or logarithmic when a few huge NIS values flatten the band. */
  protected readonly nisScale = signal<NisScale>('linear');
  protected readonly nisChart = computed(() => {
    const scale = this.nisScale();
    return this.chart((s, look) => nisOptions(s, look, scale));
  });
  protected readonly histogramChart = computed(() => this.chart(histogramOptions));
  protected readonly autocorrelationChart = computed(() => this.chart(autocorrelationOptions));
  protected readonly cusumChart = computed(() => this.chart(cusumOptions));
  protected readonly biasChart = computed(() => this.chart(biasOptions));

  protected readonly lastSample = computed(() => {
    const e = this.estimator();
    if (!e) return '';
    return formatAge(ageOf(e.lastSampleAt, this.clock.now()));
  });
  protected readonly verdictFor = computed(() => {
    const e = this.estimator();
    const since = e?.verdictSince ? ageOf(e.verdictSince, this.clock.now()) : null;
    return since === null ? '' : `for ${formatDuration(since)}`;
  });

  constructor() {
    const title = inject(Title);
    effect(() => {
      const e = this.estimator();
      if (e) title.setTitle(`${e.unitKey} / ${e.key} · Whitecap`);
    });
  }

  protected showNisScale(scale: NisScale): void {
    this.nisScale.set(scale);
  }

  protected selectRange(range: TimeRange): void {
    this.range.set(range);
  }

  protected retry(): void {
    this.retry$.next();
  }

  protected age(iso: string): string {
    return formatAge(ageOf(iso, this.clock.now()));
  }

  /** "= 0.012" or "≈ 0", to follow "p". */
  protected pText(p: number): string {
    const text = formatP(p);
    return text.startsWith('≈') ? text : `= ${text}`;
  }

  protected percent(x: number | null | undefined): string {
    return x === null || x === undefined ? '—' : `${formatStat(x * 100)} %`;
  }

  protected interval(ms: number): string {
    return ms >= 1000 ? formatDuration(ms) : `${ms} ms`;
  }

  private chart(build: (s: EstimatorSeries, look: ChartLook) => EChartsCoreOption): EChartsCoreOption | null {
    const s = this.series().value;
    return s && s.samples > 0 ? build(s, this.theme.look()) : null;
  }
}
