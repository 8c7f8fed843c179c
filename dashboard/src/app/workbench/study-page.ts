import { Clipboard } from '@angular/cdk/clipboard';
import { DOCUMENT } from '@angular/common';
import { ApplicationRef, ChangeDetectionStrategy, Component, computed, effect, inject, input, signal } from '@angular/core';
import { toObservable, toSignal } from '@angular/core/rxjs-interop';
import { MatButtonModule } from '@angular/material/button';
import { MatProgressBarModule } from '@angular/material/progress-bar';
import { Title } from '@angular/platform-browser';
import { RouterLink } from '@angular/router';
import type { ECharts } from 'echarts/core';
import { NgxEchartsDirective, provideEchartsCore } from 'ngx-echarts';
import { Subject, firstValueFrom, merge, startWith, switchMap } from 'rxjs';
import type { RetuneStudy } from '../../../../shared/src/api/api-types';
import { ChartTheme, type ChartLook } from '../charts/chart-look';
import { foldLoad, initialLoad, loadSteps } from '../feedback/load-state';
import { Notice } from '../feedback/notice';
import { problemMessage } from '../feedback/problem-message';
import { formatDateTime, formatDuration } from '../time/age';
import { CautionBanner } from './caution-banner';
import { LoopCheck } from './loop-check';
import { MatrixTable } from './matrix-table';
import { PrintCharts } from './print-charts';
import { PrintFrame } from './print-frame';
import { SignalMark } from './signal-mark';
import { autocovarianceOptions, poleOptions } from './study-charts';
import {
  diagonalRatioWords,
  formatEntry,
  identifiabilityWords,
  marginFloors,
  nisWords,
  poleRows,
  spectralRadius,
  type PoleRow,
} from './study-format';
import { WorkbenchApi, type DraftRevisionCreated } from './workbench-api';

/** Row i of a pole table, or null past its end (the filters could differ in order). */
function rowAt(rows: PoleRow[], i: number): PoleRow | null {
  return i < rows.length ? rows[i] : null;
}

/** How many estimators the header names before "and N more". */
const NAMED_ESTIMATORS = 6;

/** One saved retune study: the caution, the estimated noise, the proposed gain, the poles, the loop, the notes; share, print, draft a revision. */
@Component({
  selector: 'wc-study-page',
  imports: [RouterLink, MatButtonModule, MatProgressBarModule, NgxEchartsDirective, Notice, CautionBanner, MatrixTable, SignalMark, LoopCheck, PrintFrame],
  providers: [provideEchartsCore({ echarts: () => import('./workbench-echarts') }), PrintCharts],
  templateUrl: './study-page.html',
  styleUrls: ['./study-page.scss', './study-sections.scss'],
  changeDetection: ChangeDetectionStrategy.OnPush,
})
export class StudyPage {
  private readonly api = inject(WorkbenchApi);
  private readonly theme = inject(ChartTheme);
  private readonly print = inject(PrintCharts);
  private readonly clipboard = inject(Clipboard);
  private readonly document = inject(DOCUMENT);
  private readonly appRef = inject(ApplicationRef);

  /** The route's :id. */
  readonly id = input.required<string>();
  protected readonly studyId = computed(() => Number(this.id()));
  private readonly reload$ = new Subject<void>();

  protected readonly loaded = toSignal(
    toObservable(this.studyId).pipe(
      switchMap((id) =>
        merge(this.reload$).pipe(
          startWith(null),
          switchMap(() => loadSteps(this.api.study(id))),
          foldLoad(),
        ),
      ),
    ),
    { initialValue: initialLoad<RetuneStudy>() },
  );
  protected readonly study = computed(() => {
    const s = this.loaded().value;
    return s && s.id === this.studyId() ? s : null;
  });

  protected readonly formatDateTime = formatDateTime;
  protected readonly formatEntry = formatEntry;
  protected readonly printedAt = signal(new Date().toISOString());

  protected readonly windowText = computed(() => {
    const s = this.study();
    if (!s) return '';
    const ms = Date.parse(s.request.to) - Date.parse(s.request.from);
    return `${formatDateTime(s.request.from)} to ${formatDateTime(s.request.to)} (${formatDuration(ms)})`;
  });
  protected readonly namedEstimators = computed(() => (this.study()?.estimators ?? []).slice(0, NAMED_ESTIMATORS));
  protected readonly moreEstimators = computed(() => Math.max(0, (this.study()?.estimators.length ?? 0) - NAMED_ESTIMATORS));
  protected readonly identifiability = computed(() => {
    const s = this.study();
    if (!s) return null;
    const { identifiable } = s.estimated;
    const reason = identifiable.reason;
    return {
      Q: { ok: identifiable.Q, words: identifiabilityWords('Q', identifiable.Q, reason) },
      R: { ok: identifiable.R, words: identifiabilityWords('R', identifiable.R, identifiable.Q ? reason : '') },
    };
  });
  protected readonly qRatio = computed(() => {
    const s = this.study();
    return s ? diagonalRatioWords(s.assumed.Q, s.estimated.Q) : null;
  });
  protected readonly rRatio = computed(() => {
    const s = this.study();
    return s ? diagonalRatioWords(s.assumed.R, s.estimated.R) : null;
  });
  protected readonly nisRows = computed(() => {
    const s = this.study();
    if (!s) return [];
    const { observed, predictedCurrent, predictedProposed, m } = s.nis;
    return [
      { key: 'observed', label: 'Observed in the field data', value: nisWords(observed, m) },
      { key: 'current', label: 'Predicted for the current gain, under the estimated noise', value: nisWords(predictedCurrent, m) },
      { key: 'proposed', label: 'Predicted for the proposed gain', value: nisWords(predictedProposed, m) },
    ];
  });
  protected readonly poles = computed(() => {
    const s = this.study();
    if (!s) return null;
    const current = poleRows(s.current.poles);
    const proposed = poleRows(s.proposed.poles);
    return {
      rows: Array.from({ length: Math.max(current.length, proposed.length) }, (_, i) => ({ current: rowAt(current, i), proposed: rowAt(proposed, i) })),
      radiusCurrent: formatEntry(spectralRadius(s.current.poles)),
      radiusProposed: formatEntry(spectralRadius(s.proposed.poles)),
    };
  });
  protected readonly floors = computed(() => marginFloors(this.study()?.request ?? {}));

  protected readonly poleChart = computed(() => this.polesFor(this.theme.look()));
  protected readonly autocovarianceChart = computed(() => this.autocovarianceFor(this.theme.look()));

  protected readonly copied = signal(false);
  protected readonly drafting = signal(false);
  protected readonly draft = signal<DraftRevisionCreated | null>(null);
  protected readonly draftProblem = signal<string | null>(null);
  protected readonly draftMade = computed(() => !!this.draft() || (this.study()?.draftRevisionId ?? null) !== null);

  constructor() {
    const title = inject(Title);
    effect(() => {
      const s = this.study();
      if (s) title.setTitle(`${s.title || 'Retune study ' + s.id} · Whitecap`);
    });
  }

  protected retry(): void {
    this.reload$.next();
  }

  protected copyLink(): void {
    const url = new URL(`/workbench/studies/${this.studyId()}`, this.document.location.href).toString();
    this.copied.set(this.clipboard.copy(url));
    setTimeout(() => this.copied.set(false), 4000);
  }

  protected printReport(): void {
    this.printedAt.set(new Date().toISOString());
    // The print dialog takes its snapshot at once: render the new time first.
    this.appRef.tick();
    this.document.defaultView?.print();
  }

  protected async createDraftRevision(): Promise<void> {
    const s = this.study();
    if (!s || this.draftMade() || this.drafting()) return;
    this.drafting.set(true);
    this.draftProblem.set(null);
    try {
      this.draft.set(await firstValueFrom(this.api.createDraftRevision(s.id)));
    } catch (err) {
      this.draftProblem.set(problemMessage(err));
    } finally {
      this.drafting.set(false);
      // Either way the study now knows its draft (or why there is none).
      this.reload$.next();
    }
  }

  protected keepPoles(chart: ECharts): void {
    this.print.register('poles', chart, (look) => this.polesFor(look), 420);
  }

  protected keepAutocovariance(chart: ECharts): void {
    this.print.register('autocovariance', chart, (look) => this.autocovarianceFor(look));
  }

  private polesFor(look: ChartLook) {
    const s = this.study();
    return s ? poleOptions(s.current.poles, s.proposed.poles, look) : null;
  }

  private autocovarianceFor(look: ChartLook) {
    const s = this.study();
    return s && s.autocovariance.lags.length ? autocovarianceOptions(s.autocovariance, look) : null;
  }
}
