import { ChangeDetectionStrategy, Component, computed, inject } from '@angular/core';
import { toSignal } from '@angular/core/rxjs-interop';
import { MatProgressBarModule } from '@angular/material/progress-bar';
import { RouterLink } from '@angular/router';
import { Subject, startWith, switchMap } from 'rxjs';
import type { StudyListItem } from '../../../../shared/src/api/api-types';
import { foldLoad, initialLoad, loadSteps } from '../feedback/load-state';
import { Notice } from '../feedback/notice';
import { formatDateTime } from '../time/age';
import { SignalMark } from './signal-mark';
import { WorkbenchApi } from './workbench-api';

/** The saved retune studies, newest first, each linking to its page. */
@Component({
  selector: 'wc-study-list',
  imports: [RouterLink, MatProgressBarModule, Notice, SignalMark],
  template: `
    <div class="progress">
      @if (studies().loading) {
        <mat-progress-bar mode="indeterminate" aria-label="Loading studies" />
      }
    </div>
    @if (studies().error; as e) {
      <wc-notice kind="error" [message]="e" retryLabel="Retry now" (retry)="retry()" />
    }
    @if (studies().value) {
      @if (rows().length) {
        <div class="table-wrap">
          <table aria-label="Saved retune studies">
            <thead>
              <tr>
                <th scope="col">Study</th>
                <th scope="col">Design revision</th>
                <th scope="col" class="num">Samples</th>
                <th scope="col">Made</th>
                <th scope="col">Draft revision</th>
              </tr>
            </thead>
            <tbody>
              @for (s of rows(); track s.id) {
                <tr [attr.data-study-id]="s.id">
                  <td><a [routerLink]="['/workbench/studies', s.id]">{{ s.title || 'Study ' + s.id }}</a></td>
                  <td>{{ s.designKey }} rev {{ s.revision }}</td>
                  <td class="num">{{ s.samples.toLocaleString('en-GB') }}</td>
                  <td>{{ formatDateTime(s.createdAt) }} <span class="secondary">by {{ s.createdBy }}</span></td>
                  <td>
                    @if (s.draftRevisionId !== null) {
                      <wc-signal-mark kind="ok" word="Draft made" />
                    } @else {
                      <span class="secondary">none yet</span>
                    }
                  </td>
                </tr>
              }
            </tbody>
          </table>
        </div>
      } @else {
        <wc-notice kind="empty" message="No studies yet. Start one above; it is saved here for the team to open." />
      }
    }
  `,
  styles: `
    :host { display: flex; flex-direction: column; gap: 8px; }
    .progress { height: 4px; }
    .table-wrap { overflow-x: auto; }
    table { width: 100%; border-collapse: collapse; }
    th, td { padding: 8px 12px 8px 0; text-align: left; border-bottom: 1px solid var(--mat-sys-outline-variant); vertical-align: middle; }
    th { font-weight: 500; font-size: 0.85rem; color: var(--mat-sys-on-surface-variant); }
    .num { text-align: right; font-variant-numeric: tabular-nums; padding-right: 24px; }
    .secondary { color: var(--mat-sys-on-surface-variant); font-size: 0.9em; }
    a { color: var(--mat-sys-primary); font-weight: 500; }
  `,
  changeDetection: ChangeDetectionStrategy.OnPush,
})
export class StudyList {
  private readonly api = inject(WorkbenchApi);
  private readonly reload$ = new Subject<void>();
  protected readonly formatDateTime = formatDateTime;
  protected readonly studies = toSignal(
    this.reload$.pipe(
      startWith(null),
      switchMap(() => loadSteps(this.api.studies())),
      foldLoad(),
    ),
    { initialValue: initialLoad<StudyListItem[]>() },
  );
  protected readonly rows = computed(() => [...(this.studies().value ?? [])].sort((a, b) => Date.parse(b.createdAt) - Date.parse(a.createdAt)));

  protected retry(): void {
    this.reload$.next();
  }
}
