import { ChangeDetectionStrategy, Component, computed, inject } from '@angular/core';
import { toSignal } from '@angular/core/rxjs-interop';
import { RouterLink } from '@angular/router';
import { Subject, startWith, switchMap } from 'rxjs';
import type { DesignSummary } from '../../../../shared/src/api/api-types';
import { foldLoad, initialLoad, loadSteps } from '../feedback/load-state';
import { Notice } from '../feedback/notice';
import { cohortGroups } from './cohorts';
import { ResidualExport } from './residual-export';
import { StudyForm } from './study-form';
import { StudyList } from './study-list';
import { ResidualUploadPanel } from './upload/residual-upload-panel';
import { WorkbenchApi } from './workbench-api';

/** The designer's workbench: start a retune study, export field residuals, open saved studies. */
@Component({
  selector: 'wc-workbench',
  imports: [RouterLink, Notice, StudyForm, ResidualExport, StudyList, ResidualUploadPanel],
  template: `
    <header class="page-head">
      <h1>Workbench</h1>
      <p class="sub">
        From field residuals to a proposed retune: estimate the noise your estimators really see, compare the gain it implies
        with the one in service, and check the control loop before anything reaches a machine.
      </p>
      <p class="sub"><a routerLink="/workbench/designs">Design registry</a>: the designs, their revisions, and new revisions by form or JSON file.</p>
    </header>
    @if (designs().error; as e) {
      <wc-notice kind="error" [message]="e" retryLabel="Retry now" (retry)="retry()" />
    }
    <div class="columns">
      <section class="card">
        @if (designs().value) {
          <wc-study-form [cohorts]="groups()" />
        } @else if (!designs().error) {
          <wc-notice kind="loading" message="Loading the design revisions…" />
        }
      </section>
      <section class="card">
        <wc-residual-export [cohorts]="cohortOptions()" />
      </section>
      <section class="card">
        <wc-residual-upload-panel [cohorts]="cohortOptions()" />
      </section>
    </div>
    <section class="card" aria-labelledby="studies-title">
      <h2 id="studies-title">Saved studies</h2>
      <wc-study-list />
    </section>
  `,
  styles: `
    :host { display: flex; flex-direction: column; gap: 16px; }
    h1 { margin: 0; font: var(--mat-sys-headline-medium); }
    .sub { margin: 4px 0 0; color: var(--mat-sys-on-surface-variant); max-width: 110ch; }
    .sub a { color: var(--mat-sys-primary); font-weight: 500; }
    .columns {
      display: grid;
      grid-template-columns: repeat(auto-fit, minmax(min(100%, 520px), 1fr));
      gap: 16px;
      align-items: start;
    }
    .card {
      padding: 16px;
      border-radius: 12px;
      border: 1px solid var(--mat-sys-outline-variant);
      background: var(--mat-sys-surface-container-low);
      min-width: 0;
    }
    h2 { margin: 0 0 8px; font: var(--mat-sys-title-large); }
  `,
  changeDetection: ChangeDetectionStrategy.OnPush,
})
export class Workbench {
  private readonly api = inject(WorkbenchApi);
  private readonly reload$ = new Subject<void>();
  protected readonly designs = toSignal(
    this.reload$.pipe(
      startWith(null),
      switchMap(() => loadSteps(this.api.designs())),
      foldLoad(),
    ),
    { initialValue: initialLoad<{ items: DesignSummary[] }>() },
  );
  protected readonly groups = computed(() => cohortGroups(this.designs().value?.items ?? []));
  protected readonly cohortOptions = computed(() => this.groups().flatMap((g) => g.options));

  protected retry(): void {
    this.reload$.next();
  }
}
