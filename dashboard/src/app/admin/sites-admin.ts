import { ChangeDetectionStrategy, Component, computed, inject } from '@angular/core';
import { toSignal } from '@angular/core/rxjs-interop';
import { MatTableModule } from '@angular/material/table';
import { Subject, startWith, switchMap } from 'rxjs';
import type { Site } from '../../../../shared/src/api/api-types';
import { foldLoad, initialLoad, loadSteps } from '../feedback/load-state';
import { Notice } from '../feedback/notice';
import { AdminApi } from './admin-api';

/** Sites, their time zones and how many units each has. */
@Component({
  selector: 'wc-sites-admin',
  imports: [MatTableModule, Notice],
  template: `
    @if (sites().error; as e) {
      <wc-notice kind="error" [message]="e" retryLabel="Retry now" (retry)="retry()" />
    } @else if (sites().value) {
      @if (rows().length) {
        <table mat-table [dataSource]="rows()" aria-label="Sites">
          <ng-container matColumnDef="key">
            <th mat-header-cell *matHeaderCellDef>Site</th>
            <td mat-cell *matCellDef="let s"><strong>{{ s.name }}</strong> <span class="secondary">{{ s.key }}</span></td>
          </ng-container>
          <ng-container matColumnDef="timeZone">
            <th mat-header-cell *matHeaderCellDef>Time zone</th>
            <td mat-cell *matCellDef="let s">{{ s.timeZone }}</td>
          </ng-container>
          <ng-container matColumnDef="units">
            <th mat-header-cell *matHeaderCellDef class="num">Units</th>
            <td mat-cell *matCellDef="let s" class="num">{{ s.units }}</td>
          </ng-container>
          <tr mat-header-row *matHeaderRowDef="columns"></tr>
          <tr mat-row *matRowDef="let s; columns: columns"></tr>
        </table>
      } @else {
        <wc-notice kind="empty" message="No sites yet." />
      }
    } @else {
      <wc-notice kind="loading" message="Loading sites…" />
    }
  `,
  styleUrl: './admin-section.scss',
  changeDetection: ChangeDetectionStrategy.OnPush,
})
export class SitesAdmin {
  private readonly api = inject(AdminApi);
  private readonly reload$ = new Subject<void>();
  protected readonly columns = ['key', 'timeZone', 'units'];
  protected readonly sites = toSignal(
    this.reload$.pipe(
      startWith(null),
      switchMap(() => loadSteps(this.api.sites())),
      foldLoad(),
    ),
    { initialValue: initialLoad<{ items: Site[] }>() },
  );
  protected readonly rows = computed(() => this.sites().value?.items ?? []);

  protected retry(): void {
    this.reload$.next();
  }
}
