import { ChangeDetectionStrategy, Component, computed, inject, signal } from '@angular/core';
import { toObservable, toSignal } from '@angular/core/rxjs-interop';
import { MatFormFieldModule } from '@angular/material/form-field';
import { MatInputModule } from '@angular/material/input';
import { MatPaginatorModule, type PageEvent } from '@angular/material/paginator';
import { MatProgressBarModule } from '@angular/material/progress-bar';
import { MatTableModule } from '@angular/material/table';
import { RouterLink } from '@angular/router';
import { Subject, combineLatest, distinctUntilChanged, startWith, switchMap } from 'rxjs';
import type { Page } from '../../../../shared/src/api/api-types';
import { foldLoad, initialLoad, loadSteps } from '../feedback/load-state';
import { Notice } from '../feedback/notice';
import { formatDuration } from '../time/age';
import { AdminApi, type EstimatorListItem } from './admin-api';
import { settleAfterFirst } from '../time/settle';

/** The estimator registry: which filter runs on which unit, on which design revision. */
@Component({
  selector: 'wc-estimators-admin',
  imports: [RouterLink, MatTableModule, MatPaginatorModule, MatFormFieldModule, MatInputModule, MatProgressBarModule, Notice],
  template: `
    <div class="toolbar">
      <mat-form-field appearance="outline" subscriptSizing="dynamic">
        <mat-label>Unit</mat-label>
        <input matInput [value]="unit()" (input)="filterUnit($any($event.target).value)" placeholder="e.g. tractor-33" />
      </mat-form-field>
      <mat-form-field appearance="outline" subscriptSizing="dynamic" class="grow">
        <mat-label>Search unit or estimator</mat-label>
        <input matInput type="search" [value]="searchText()" (input)="search($any($event.target).value)" />
      </mat-form-field>
    </div>
    @if (estimators().error; as e) {
      <wc-notice kind="error" [message]="e" retryLabel="Retry now" (retry)="retry()" />
    }
    <div class="progress">
      @if (estimators().loading) {
        <mat-progress-bar mode="indeterminate" aria-label="Loading estimators" />
      }
    </div>
    <div class="table-wrap">
      <table mat-table [dataSource]="rows()" aria-label="Estimators">
        <ng-container matColumnDef="unit">
          <th mat-header-cell *matHeaderCellDef>Unit</th>
          <td mat-cell *matCellDef="let e">{{ e.unitKey }} <span class="secondary">{{ e.siteKey }}</span></td>
        </ng-container>
        <ng-container matColumnDef="key">
          <th mat-header-cell *matHeaderCellDef>Estimator</th>
          <td mat-cell *matCellDef="let e"><a [routerLink]="['/estimators', e.id]">{{ e.key }}</a></td>
        </ng-container>
        <ng-container matColumnDef="design">
          <th mat-header-cell *matHeaderCellDef>Design revision</th>
          <td mat-cell *matCellDef="let e">{{ e.designKey }} rev {{ e.revision }}</td>
        </ng-container>
        <ng-container matColumnDef="m">
          <th mat-header-cell *matHeaderCellDef class="num">Components (m)</th>
          <td mat-cell *matCellDef="let e" class="num">{{ e.measurementDim }}</td>
        </ng-container>
        <ng-container matColumnDef="interval">
          <th mat-header-cell *matHeaderCellDef>Expected every</th>
          <td mat-cell *matCellDef="let e">{{ interval(e.expectedIntervalMs) }}</td>
        </ng-container>
        <tr mat-header-row *matHeaderRowDef="columns"></tr>
        <tr mat-row *matRowDef="let e; columns: columns"></tr>
        <tr class="mat-mdc-row no-data" *matNoDataRow>
          <td class="mat-mdc-cell" [attr.colspan]="columns.length">
            {{ estimators().loading ? 'Loading estimators…' : 'No estimator matches.' }}
          </td>
        </tr>
      </table>
    </div>
    <mat-paginator
      [length]="estimators().value?.total ?? 0"
      [pageIndex]="page().pageIndex"
      [pageSize]="page().pageSize"
      [pageSizeOptions]="[10, 25, 50, 100]"
      (page)="pageTo($event)"
      aria-label="Pages of estimators"
    />
  `,
  styleUrl: './admin-section.scss',
  changeDetection: ChangeDetectionStrategy.OnPush,
})
export class EstimatorsAdmin {
  private readonly api = inject(AdminApi);
  protected readonly columns = ['unit', 'key', 'design', 'm', 'interval'];
  protected readonly unit = signal('');
  protected readonly searchText = signal('');
  protected readonly page = signal({ pageIndex: 0, pageSize: 25 });
  private readonly reload$ = new Subject<void>();
  protected readonly estimators = toSignal(
    combineLatest([
      toObservable(computed(() => ({ unit: this.unit().trim(), q: this.searchText() }))).pipe(
        settleAfterFirst(300),
        distinctUntilChanged((a, b) => a.unit === b.unit && a.q === b.q),
      ),
      toObservable(this.page),
      this.reload$.pipe(startWith(null)),
    ]).pipe(
      switchMap(([f, p]) => loadSteps(this.api.estimators(f.unit, f.q, p.pageIndex, p.pageSize))),
      foldLoad(),
    ),
    { initialValue: initialLoad<Page<EstimatorListItem>>() },
  );
  protected readonly rows = computed(() => this.estimators().value?.items ?? []);

  protected filterUnit(unit: string): void {
    this.unit.set(unit);
    this.page.update((p) => ({ ...p, pageIndex: 0 }));
  }

  protected search(text: string): void {
    this.searchText.set(text);
    this.page.update((p) => ({ ...p, pageIndex: 0 }));
  }

  protected pageTo(event: PageEvent): void {
    this.page.set({ pageIndex: event.pageIndex, pageSize: event.pageSize });
  }

  protected retry(): void {
    this.reload$.next();
  }

  protected interval(ms: number): string {
    return ms >= 1000 ? formatDuration(ms) : `${ms} ms`;
  }
}
