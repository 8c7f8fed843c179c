import { ChangeDetectionStrategy, Component, computed, inject, input, output, signal } from '@angular/core';
import { toObservable, toSignal } from '@angular/core/rxjs-interop';
import { MatButtonModule } from '@angular/material/button';
import { MatCheckboxModule } from '@angular/material/checkbox';
import { MatFormFieldModule } from '@angular/material/form-field';
import { MatInputModule } from '@angular/material/input';
import { MatProgressBarModule } from '@angular/material/progress-bar';
import { MatSelectModule } from '@angular/material/select';
import { EMPTY, expand, lastValueFrom, map, reduce, switchMap } from 'rxjs';
import type { EstimatorListItem, Page } from '../../../../shared/src/api/api-types';
import { foldLoad, initialLoad, loadSteps } from '../feedback/load-state';
import { problemMessage } from '../feedback/problem-message';
import { settleAfterFirst } from '../time/settle';
import type { CohortOption } from './cohorts';
import { WorkbenchApi } from './workbench-api';

/** An estimator chosen for a study or an export. */
export interface PickedEstimator {
  id: number;
  unitKey: string;
  key: string;
  designKey: string;
  revision: number;
}

/** The most estimators one pick may hold (the service's limit for an export or a study). */
export const MAX_PICKED = 500;

/** Finds estimators by unit or estimator key and keeps a list of the chosen; can add a whole cohort at once. */
@Component({
  selector: 'wc-estimator-picker',
  imports: [MatFormFieldModule, MatInputModule, MatCheckboxModule, MatButtonModule, MatSelectModule, MatProgressBarModule],
  templateUrl: './estimator-picker.html',
  styleUrl: './estimator-picker.scss',
  changeDetection: ChangeDetectionStrategy.OnPush,
})
export class EstimatorPicker {
  private readonly api = inject(WorkbenchApi);
  readonly picked = input.required<PickedEstimator[]>();
  readonly pickedChange = output<PickedEstimator[]>();
  /** Design revisions to offer under "Add a cohort" (none: no such field). */
  readonly cohorts = input<CohortOption[]>([]);
  /** Prefix for element ids, unique per page. */
  readonly idPrefix = input.required<string>();

  protected readonly query = signal('');
  protected readonly matches = toSignal(
    toObservable(this.query).pipe(
      settleAfterFirst(300),
      switchMap((q) => loadSteps(this.api.searchEstimators(q, 20))),
      foldLoad(),
    ),
    { initialValue: initialLoad<Page<EstimatorListItem>>() },
  );
  protected readonly pickedIds = computed(() => new Set(this.picked().map((e) => e.id)));
  protected readonly adding = signal(false);
  protected readonly addProblem = signal<string | null>(null);

  protected toggle(e: EstimatorListItem, checked: boolean): void {
    const rest = this.picked().filter((p) => p.id !== e.id);
    this.pickedChange.emit(checked ? [...rest, { id: e.id, unitKey: e.unitKey, key: e.key, designKey: e.designKey, revision: e.revision }] : rest);
  }

  protected remove(id: number): void {
    this.pickedChange.emit(this.picked().filter((p) => p.id !== id));
  }

  protected clear(): void {
    this.pickedChange.emit([]);
  }

  /** Adds every estimator on one design revision (read from the fleet list, a page at a time). */
  protected async addCohort(option: CohortOption | null): Promise<void> {
    if (!option) return;
    this.adding.set(true);
    this.addProblem.set(null);
    try {
      const pageSize = 500;
      const found = await lastValueFrom(
        this.api.fleetOfDesign(option.designKey, 0, pageSize).pipe(
          expand((page) => (page.offset + page.items.length < Math.min(page.total, MAX_PICKED) && page.items.length ? this.api.fleetOfDesign(option.designKey, page.offset + page.items.length, pageSize) : EMPTY)),
          map((page) => page.items.filter((e) => e.revision === option.revision)),
          reduce((all, items) => [...all, ...items], [] as { id: number; unitKey: string; key: string; designKey: string; revision: number }[]),
        ),
      );
      const have = this.pickedIds();
      const added = found.filter((e) => !have.has(e.id)).map((e) => ({ id: e.id, unitKey: e.unitKey, key: e.key, designKey: e.designKey, revision: e.revision }));
      const next = [...this.picked(), ...added].slice(0, MAX_PICKED);
      if (!found.length) this.addProblem.set(`No estimator runs ${option.designKey} rev ${option.revision}.`);
      this.pickedChange.emit(next);
    } catch (err) {
      this.addProblem.set(problemMessage(err));
    } finally {
      this.adding.set(false);
    }
  }

  protected search(text: string): void {
    this.query.set(text);
  }
}
