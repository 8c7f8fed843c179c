import { toSignal } from '@angular/core/rxjs-interop';
import { catchError, of } from 'rxjs';
import type { ResidualUpload } from '../../../../shared/src/api/api-types';
import { ChangeDetectionStrategy, Component, DestroyRef, computed, inject, input, signal } from '@angular/core';
import { MatButtonModule } from '@angular/material/button';
import { MatButtonToggleModule } from '@angular/material/button-toggle';
import { MatFormFieldModule } from '@angular/material/form-field';
import { MatInputModule } from '@angular/material/input';
import { MatProgressBarModule } from '@angular/material/progress-bar';
import { MatSelectModule } from '@angular/material/select';
import { Router } from '@angular/router';
import { firstValueFrom } from 'rxjs';
import { problemIssues } from '../feedback/problem-issues';
import { problemMessage } from '../feedback/problem-message';
import { cohortLabel, type CohortGroup } from './cohorts';
import { EstimatorPicker, type PickedEstimator } from './estimator-picker';
import { DEFAULT_LAGS, LAGS_MAX, LAGS_MIN, studyRequest, type CovarianceStructure, type StudySource } from './study-request';
import { DEFAULT_WINDOW, type StudyWindow } from './study-window';
import { WindowPicker } from './window-picker';
import { WorkbenchApi } from './workbench-api';

/** What the service is doing while a study runs, in the order it does it (shown as time passes). */
const STAGES = [
  { afterMs: 0, words: 'Reading the residuals of the window' },
  { afterMs: 1_500, words: 'Estimating Q and R from the innovations’ autocovariance' },
  { afterMs: 4_000, words: 'Computing the proposed gain, its poles and the loop’s margins' },
  { afterMs: 10_000, words: 'Still working: a long window or many estimators takes longer' },
];

/** Starts a retune study: a cohort or chosen estimators, a window, lags and how Q and R are parametrized. */
@Component({
  selector: 'wc-study-form',
  imports: [
    MatButtonModule,
    MatButtonToggleModule,
    MatFormFieldModule,
    MatInputModule,
    MatProgressBarModule,
    MatSelectModule,
    EstimatorPicker,
    WindowPicker,
  ],
  templateUrl: './study-form.html',
  styleUrl: './workbench-forms.scss',
  changeDetection: ChangeDetectionStrategy.OnPush,
})
export class StudyForm {
  private readonly api = inject(WorkbenchApi);
  private readonly router = inject(Router);
  readonly cohorts = input.required<CohortGroup[]>();

  protected readonly cohortLabel = cohortLabel;
  protected readonly lagsMin = LAGS_MIN;
  protected readonly lagsMax = LAGS_MAX;
  protected readonly source = signal<StudySource>('cohort');
  protected readonly revisionId = signal<number | null>(null);
  protected readonly picked = signal<PickedEstimator[]>([]);
  protected readonly window = signal<StudyWindow | null>(DEFAULT_WINDOW);
  protected readonly lags = signal(String(DEFAULT_LAGS));
  protected readonly estimateQ = signal<CovarianceStructure>('diagonal');
  protected readonly estimateR = signal<CovarianceStructure>('diagonal');
  protected readonly title = signal('');
  protected readonly uploadIds = signal<number[]>([]);
  protected readonly uploads = toSignal(this.api.residualUploads().pipe(catchError(() => of([] as ResidualUpload[]))), { initialValue: [] as ResidualUpload[] });

  protected chooseUploads(select: HTMLSelectElement): void {
    this.uploadIds.set(Array.from(select.selectedOptions).map((o) => Number(o.value)));
  }

  protected readonly problems = signal<string[]>([]);
  protected readonly running = signal(false);
  private readonly startedAt = signal(0);
  private readonly now = signal(0);
  protected readonly elapsed = computed(() => `${Math.floor(Math.max(0, this.now() - this.startedAt()) / 1000)} s`);
  protected readonly stage = computed(() => {
    const ms = this.now() - this.startedAt();
    return [...STAGES].reverse().find((s) => ms >= s.afterMs)?.words ?? STAGES[0].words;
  });

  protected readonly chosenCohort = computed(() => {
    const id = this.revisionId();
    for (const g of this.cohorts()) {
      const o = g.options.find((x) => x.revisionId === id);
      if (o) return o;
    }
    return null;
  });
  protected readonly allCohorts = computed(() => this.cohorts().flatMap((g) => g.options));

  private ticker: ReturnType<typeof setInterval> | undefined;

  constructor() {
    inject(DestroyRef).onDestroy(() => clearInterval(this.ticker));
  }

  protected chooseSource(source: StudySource): void {
    this.source.set(source);
    this.problems.set([]);
  }

  protected async runStudy(event: Event): Promise<void> {
    event.preventDefault();
    if (this.running()) return;
    const check = studyRequest({
      source: this.source(),
      revisionId: this.revisionId(),
      picked: this.picked(),
      uploadIds: this.uploadIds(),
      window: this.window(),
      lags: this.lags(),
      estimateQ: this.estimateQ(),
      estimateR: this.estimateR(),
      title: this.title(),
    });
    if (!check.ok) {
      this.problems.set(check.problems);
      return;
    }
    this.problems.set([]);
    this.running.set(true);
    this.startedAt.set(Date.now());
    this.now.set(Date.now());
    this.ticker = setInterval(() => this.now.set(Date.now()), 500);
    try {
      const study = await firstValueFrom(this.api.runStudy(check.request));
      await this.router.navigate(['/workbench/studies', study.id]);
    } catch (err) {
      const message = problemMessage(err, 'Try again, or a shorter window.');
      const fields = problemIssues(err)
        .map((i) => (i.path ? `${i.path}: ${i.message}` : i.message))
        .filter((f) => !message.includes(f));
      this.problems.set([message, ...fields]);
    } finally {
      clearInterval(this.ticker);
      this.running.set(false);
    }
  }
}
