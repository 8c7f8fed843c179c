import { ChangeDetectionStrategy, Component, computed, effect, inject, input } from '@angular/core';
import { toSignal } from '@angular/core/rxjs-interop';
import { MatButtonModule } from '@angular/material/button';
import { Title } from '@angular/platform-browser';
import { RouterLink } from '@angular/router';
import { Subject, startWith, switchMap } from 'rxjs';
import type { DesignSummary } from '../../../../../shared/src/api/api-types';
import { foldLoad, initialLoad, loadSteps } from '../../feedback/load-state';
import { Notice } from '../../feedback/notice';
import { formatDateTime } from '../../time/age';
import { SignalMark } from '../signal-mark';
import { RevisionStatusMark } from './revision-status';
import { RevisionsApi } from './revisions-api';

/** One design: its revisions, newest first, with status and a link to each; a new revision. */
@Component({
  selector: 'wc-design-revisions',
  imports: [RouterLink, MatButtonModule, Notice, SignalMark, RevisionStatusMark],
  template: `
    <nav class="crumbs" aria-label="Breadcrumb">
      <a routerLink="/workbench">Workbench</a>
      <span aria-hidden="true">›</span>
      <a routerLink="/workbench/designs">Design registry</a>
      <span aria-hidden="true">›</span>
      <span aria-current="page">{{ design()?.key ?? 'Design ' + designId() }}</span>
    </nav>
    @if (designs().error; as e) {
      <wc-notice kind="error" [message]="e" retryLabel="Retry now" (retry)="reload()" />
    } @else if (designs().value && !design()) {
      <wc-notice kind="error" message="There is no such design. Pick one from the design registry." />
    } @else if (!designs().value) {
      <wc-notice kind="loading" message="Loading the design…" />
    }
    @if (design(); as d) {
      <header class="head">
        <h1>{{ d.name }}</h1>
        <p class="sub"><code>{{ d.key }}</code>@if (d.description) { · {{ d.description }} }</p>
      </header>
      @if (savedRevision(); as r) {
        <p class="done" role="status">
          <wc-signal-mark kind="ok" word="Saved" />
          <span>Draft revision <strong data-testid="saved-revision">{{ r.revision }}</strong> of {{ d.key }} is saved. No estimator runs it until an administrator releases it.</span>
        </p>
      }
      <div class="buttons">
        <a mat-flat-button [routerLink]="['/workbench/designs', d.id, 'revisions', 'new']">
          <span class="material-symbols-outlined" aria-hidden="true">note_add</span> New revision
        </a>
      </div>
      <section class="card" aria-labelledby="revisions-title">
        <h2 id="revisions-title">Revisions</h2>
        @if (revisions().length) {
          <div class="table-wrap">
            <table class="list" aria-label="Revisions">
              <thead>
                <tr>
                  <th scope="col">Revision</th>
                  <th scope="col">Status</th>
                  <th scope="col" class="num">States</th>
                  <th scope="col" class="num">Measured</th>
                  <th scope="col" class="num">Estimators</th>
                  <th scope="col">Made</th>
                </tr>
              </thead>
              <tbody>
                @for (r of revisions(); track r.id) {
                  <tr [attr.data-revision]="r.revision" [class.saved]="r.id === savedId()">
                    <td><a [routerLink]="['/workbench/designs', d.id, 'revisions', r.id]">Revision {{ r.revision }}</a></td>
                    <td><wc-revision-status [status]="r.status" /></td>
                    <td class="num">{{ r.stateDim }}</td>
                    <td class="num">{{ r.measurementDim }}</td>
                    <td class="num">{{ r.estimators }}</td>
                    <td>{{ formatDateTime(r.createdAt) }}</td>
                  </tr>
                }
              </tbody>
            </table>
          </div>
        } @else {
          <wc-notice kind="empty" message="No revisions yet. Make the first with New revision." />
        }
      </section>
    }
  `,
  styleUrl: './revisions.scss',
  styles: `
    tr.saved td { background: color-mix(in srgb, var(--wc-teal-500) 8%, transparent); }
  `,
  changeDetection: ChangeDetectionStrategy.OnPush,
})
export class DesignRevisions {
  private readonly api = inject(RevisionsApi);
  private readonly reload$ = new Subject<void>();

  /** The route's :id. */
  readonly id = input.required<string>();
  /** ?saved=<revision id>, after the editor saved a draft. */
  readonly saved = input<string | undefined>(undefined);

  protected readonly formatDateTime = formatDateTime;
  protected readonly designId = computed(() => Number(this.id()));
  protected readonly savedId = computed(() => Number(this.saved() ?? NaN));
  protected readonly designs = toSignal(
    this.reload$.pipe(
      startWith(null),
      switchMap(() => loadSteps(this.api.designs())),
      foldLoad(),
    ),
    { initialValue: initialLoad<{ items: DesignSummary[] }>() },
  );
  protected readonly design = computed(() => this.designs().value?.items.find((d) => d.id === this.designId()) ?? null);
  protected readonly revisions = computed(() => [...(this.design()?.revisions ?? [])].sort((a, b) => b.revision - a.revision));
  protected readonly savedRevision = computed(() => this.revisions().find((r) => r.id === this.savedId()) ?? null);

  constructor() {
    const title = inject(Title);
    effect(() => {
      const d = this.design();
      if (d) title.setTitle(`${d.key} · Design registry · Whitecap`);
    });
  }

  protected reload(): void {
    this.reload$.next();
  }
}
