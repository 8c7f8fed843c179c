import { DOCUMENT } from '@angular/common';
import { ChangeDetectionStrategy, Component, computed, effect, inject, input, signal } from '@angular/core';
import { toObservable, toSignal } from '@angular/core/rxjs-interop';
import { MatButtonModule } from '@angular/material/button';
import { MatProgressBarModule } from '@angular/material/progress-bar';
import { Title } from '@angular/platform-browser';
import { RouterLink } from '@angular/router';
import { Subject, firstValueFrom, merge, startWith, switchMap } from 'rxjs';
import { DESIGN_MATRICES, type DesignMatrixKey } from '../../../../../shared/src/design/design-validation';
import { Session } from '../../auth/session';
import { foldLoad, initialLoad, loadSteps } from '../../feedback/load-state';
import { Notice } from '../../feedback/notice';
import { problemMessage } from '../../feedback/problem-message';
import { formatDateTime } from '../../time/age';
import { CautionBanner } from '../caution-banner';
import { MatrixTable } from '../matrix-table';
import { SignalMark } from '../signal-mark';
import { RevisionStatusMark } from './revision-status';
import { RevisionsApi, type DesignRevisionDetail } from './revisions-api';

/** One design revision, read-only: its matrices, notes and the check of its model now; download it, start a new revision from it; release or retire it (administrators). */
@Component({
  selector: 'wc-revision-view',
  imports: [RouterLink, MatButtonModule, MatProgressBarModule, CautionBanner, MatrixTable, Notice, SignalMark, RevisionStatusMark],
  template: `
    <nav class="crumbs" aria-label="Breadcrumb">
      <a routerLink="/workbench">Workbench</a>
      <span aria-hidden="true">›</span>
      <a routerLink="/workbench/designs">Design registry</a>
      <span aria-hidden="true">›</span>
      <a [routerLink]="['/workbench/designs', designId()]">{{ revision()?.designKey ?? 'Design ' + designId() }}</a>
      <span aria-hidden="true">›</span>
      <span aria-current="page">Revision {{ revision()?.revision ?? '' }}</span>
    </nav>
    @if (loaded().error; as e) {
      <wc-notice kind="error" [message]="e" retryLabel="Retry now" (retry)="reload()" />
    } @else if (!revision()) {
      <wc-notice kind="loading" message="Loading the revision…" />
    }
    @if (revision(); as r) {
      <header class="head">
        <h1>{{ r.designKey }} revision {{ r.revision }}</h1>
        <p class="sub">
          <wc-revision-status [status]="r.status" /> · {{ r.designName }} · {{ r.stateDim }} states, {{ r.measurementDim }} measured
          {{ r.measurementDim === 1 ? 'component' : 'components' }}@if (r.model.dt) {, dt = {{ r.model.dt }} s} · run by {{ r.estimators }}
          {{ r.estimators === 1 ? 'estimator' : 'estimators' }} · made {{ formatDateTime(r.createdAt) }}
        </p>
      </header>
      <wc-caution-banner [text]="r.caution" />
      <div class="buttons" role="group" aria-label="Revision actions">
        <a mat-stroked-button [routerLink]="['/workbench/designs', r.designId, 'revisions', 'new']" [queryParams]="{ from: r.id }">
          <span class="material-symbols-outlined" aria-hidden="true">content_copy</span> New revision from this one
        </a>
        <button mat-stroked-button type="button" (click)="downloadJson(r)">
          <span class="material-symbols-outlined" aria-hidden="true">download</span> Download JSON
        </button>
        @if (isAdmin()) {
          @if (r.status === 'draft') {
            <button mat-flat-button type="button" (click)="changeStatus('released')" [disabled]="changing() || r.check.problems.length > 0">Release</button>
          }
          @if (r.status !== 'retired') {
            <button mat-stroked-button type="button" (click)="changeStatus('retired')" [disabled]="changing()">Retire</button>
          }
          @if (changing()) {
            <mat-progress-bar class="inline-progress" mode="indeterminate" aria-label="Changing the status" />
          }
        }
      </div>
      @if (statusProblem(); as p) {
        <p class="problems" role="alert">{{ p }}</p>
      }
      <section class="card" aria-labelledby="check-title">
        <h2 id="check-title">Check of the model</h2>
        @if (r.check.problems.length) {
          <div class="problems">
            <wc-signal-mark kind="problem" [word]="r.check.problems.length + (r.check.problems.length === 1 ? ' problem' : ' problems')" />
            <ul>
              @for (p of r.check.problems; track $index) {
                <li><code>{{ p.path || 'model' }}</code>: {{ p.message }}</li>
              }
            </ul>
          </div>
          <p class="hint">This revision was made without the editor's check and cannot be released as it is; make a new revision from it with these fixed.</p>
        } @else {
          <p class="warning"><wc-signal-mark kind="ok" word="Passes the checks" /> Sizes, finite entries, Q and R, (A, C) and (A, B) check out.</p>
        }
        @for (w of r.check.warnings; track $index) {
          <p class="warning"><wc-signal-mark kind="warning" word="Warning" /> {{ w }}</p>
        }
      </section>
      <section class="card" aria-labelledby="model-title">
        <h2 id="model-title">Model</h2>
        <p class="hint">Entries to four significant figures; Download JSON has them in full.</p>
        <div class="matrices">
          @for (m of matrices(); track m.key) {
            <wc-matrix-table [matrix]="m.values" [label]="m.key" [caption]="m.key + ' · ' + m.meaning" />
          }
        </div>
      </section>
      <section class="card" aria-labelledby="notes-title">
        <h2 id="notes-title">Notes</h2>
        <p class="notes">{{ r.notes || 'No notes.' }}</p>
      </section>
    }
  `,
  styleUrl: './revisions.scss',
  styles: `
    .sub { display: flex; flex-wrap: wrap; align-items: center; gap: 4px 6px; }
    .matrices { display: flex; flex-wrap: wrap; gap: 16px 32px; align-items: flex-start; }
    .notes { margin: 0; white-space: pre-wrap; max-width: 110ch; }
  `,
  changeDetection: ChangeDetectionStrategy.OnPush,
})
export class RevisionView {
  private readonly api = inject(RevisionsApi);
  private readonly document = inject(DOCUMENT);
  private readonly reload$ = new Subject<void>();
  private readonly session = inject(Session);
  protected readonly isAdmin = computed(() => this.session.can('administer'));

  /** The route's :id (the design) and :revisionId. */
  readonly id = input.required<string>();
  readonly revisionId = input.required<string>();

  protected readonly formatDateTime = formatDateTime;
  protected readonly designId = computed(() => Number(this.id()));
  private readonly updated = signal<DesignRevisionDetail | null>(null);
  protected readonly loaded = toSignal(
    toObservable(computed(() => ({ designId: this.designId(), revisionId: Number(this.revisionId()) }))).pipe(
      switchMap(({ designId, revisionId }) =>
        merge(this.reload$).pipe(
          startWith(null),
          switchMap(() => loadSteps(this.api.revision(designId, revisionId))),
          foldLoad(),
        ),
      ),
    ),
    { initialValue: initialLoad<DesignRevisionDetail>() },
  );
  protected readonly revision = computed(() => {
    const fresh = this.updated();
    const r = this.loaded().value;
    const wanted = Number(this.revisionId());
    if (fresh && fresh.id === wanted) return fresh;
    return r && r.id === wanted ? r : null;
  });
  protected readonly matrices = computed(() => {
    const model = this.revision()?.model as unknown as Record<string, number[][] | undefined> | undefined;
    if (!model) return [];
    return DESIGN_MATRICES.filter((m) => Array.isArray(model[m.key])).map((m) => ({ key: m.key as DesignMatrixKey, meaning: m.meaning, values: model[m.key]! }));
  });
  protected readonly changing = signal(false);
  protected readonly statusProblem = signal<string | null>(null);

  constructor() {
    const title = inject(Title);
    effect(() => {
      const r = this.revision();
      if (r) title.setTitle(`${r.designKey} revision ${r.revision} · Whitecap`);
    });
  }

  protected reload(): void {
    this.reload$.next();
  }

  protected downloadJson(r: DesignRevisionDetail): void {
    const body = JSON.stringify({ model: r.model, notes: r.notes }, null, 2);
    const url = URL.createObjectURL(new Blob([body], { type: 'application/json' }));
    const a = this.document.createElement('a');
    a.href = url;
    a.download = `${r.designKey}-rev${r.revision}.json`;
    a.click();
    setTimeout(() => URL.revokeObjectURL(url), 0);
  }

  protected async changeStatus(status: 'released' | 'retired'): Promise<void> {
    const r = this.revision();
    if (!r || this.changing()) return;
    this.changing.set(true);
    this.statusProblem.set(null);
    try {
      this.updated.set(await firstValueFrom(this.api.changeStatus(r.designId, r.id, status)));
    } catch (err) {
      this.statusProblem.set(problemMessage(err));
    } finally {
      this.changing.set(false);
    }
  }
}
