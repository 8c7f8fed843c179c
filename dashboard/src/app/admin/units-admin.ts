import { ChangeDetectionStrategy, Component, computed, inject, signal } from '@angular/core';
import { toObservable, toSignal } from '@angular/core/rxjs-interop';
import { MatButtonModule } from '@angular/material/button';
import { MatDialog } from '@angular/material/dialog';
import { MatFormFieldModule } from '@angular/material/form-field';
import { MatPaginatorModule, type PageEvent } from '@angular/material/paginator';
import { MatProgressBarModule } from '@angular/material/progress-bar';
import { MatSelectModule } from '@angular/material/select';
import { MatTableModule } from '@angular/material/table';
import { Subject, catchError, combineLatest, firstValueFrom, map, of, startWith, switchMap } from 'rxjs';
import type { Page, Unit } from '../../../../shared/src/api/api-types';
import { foldLoad, initialLoad, loadSteps } from '../feedback/load-state';
import { Notice } from '../feedback/notice';
import { problemMessage } from '../feedback/problem-message';
import { AdminApi } from './admin-api';
import { ConfirmDialog, type ConfirmData } from './confirm-dialog';
import { CredentialsDialog } from './credentials-dialog';

/** Units with their device credentials: issue (or rotate) a secret, shown once; revoke all. */
@Component({
  selector: 'wc-units-admin',
  imports: [MatTableModule, MatPaginatorModule, MatFormFieldModule, MatSelectModule, MatButtonModule, MatProgressBarModule, Notice],
  templateUrl: './units-admin.html',
  styleUrl: './admin-section.scss',
  changeDetection: ChangeDetectionStrategy.OnPush,
})
export class UnitsAdmin {
  private readonly api = inject(AdminApi);
  private readonly dialog = inject(MatDialog);
  protected readonly columns = ['key', 'kind', 'site', 'estimators', 'credentials', 'actions'];

  protected readonly site = signal('');
  protected readonly page = signal({ pageIndex: 0, pageSize: 25 });
  private readonly reload$ = new Subject<void>();
  protected readonly sites = toSignal(
    this.api.sites().pipe(
      map((r) => r.items),
      catchError(() => of([])),
    ),
    { initialValue: [] },
  );
  protected readonly units = toSignal(
    combineLatest([toObservable(this.site), toObservable(this.page), this.reload$.pipe(startWith(null))]).pipe(
      switchMap(([site, p]) => loadSteps(this.api.units(site, p.pageIndex, p.pageSize))),
      foldLoad(),
    ),
    { initialValue: initialLoad<Page<Unit>>() },
  );
  protected readonly rows = computed(() => this.units().value?.items ?? []);
  protected readonly busyUnit = signal<number | null>(null);
  protected readonly error = signal<string | null>(null);
  protected readonly done = signal<string | null>(null);

  protected filterSite(site: string): void {
    this.site.set(site);
    this.page.update((p) => ({ ...p, pageIndex: 0 }));
  }

  protected pageTo(event: PageEvent): void {
    this.page.set({ pageIndex: event.pageIndex, pageSize: event.pageSize });
  }

  protected retry(): void {
    this.reload$.next();
  }

  protected async issueCredentials(unit: Unit): Promise<void> {
    if (
      unit.credentials > 0 &&
      !(await this.confirm({
        title: `Rotate the credentials of ${unit.key}?`,
        message: `${unit.key} has ${unit.credentials} live credential${unit.credentials === 1 ? '' : 's'}. A new secret replaces them: the unit must be given the new secret before it can publish again.`,
        confirm: 'Rotate',
      }))
    ) {
      return;
    }
    await this.run(unit, async () => {
      const issued = await firstValueFrom(this.api.issueCredentials(unit.id));
      this.dialog.open(CredentialsDialog, { data: issued, disableClose: true, width: '560px', ariaLabel: `Device credentials for ${unit.key}` });
      return `New credentials issued for ${unit.key}.`;
    });
  }

  protected async revokeCredentials(unit: Unit): Promise<void> {
    const sure = await this.confirm({
      title: `Revoke every credential of ${unit.key}?`,
      message: `${unit.key} will no longer be able to sign in to the broker until it is given new credentials. Samples it sends meanwhile are refused.`,
      confirm: 'Revoke all',
    });
    if (!sure) return;
    await this.run(unit, async () => {
      const { revoked } = await firstValueFrom(this.api.revokeCredentials(unit.id));
      return `Revoked ${revoked} credential${revoked === 1 ? '' : 's'} of ${unit.key}.`;
    });
  }

  private async run(unit: Unit, action: () => Promise<string>): Promise<void> {
    this.busyUnit.set(unit.id);
    this.error.set(null);
    this.done.set(null);
    try {
      this.done.set(await action());
      this.reload$.next();
    } catch (err) {
      this.error.set(problemMessage(err));
    } finally {
      this.busyUnit.set(null);
    }
  }

  private confirm(data: ConfirmData): Promise<boolean> {
    return firstValueFrom(this.dialog.open<ConfirmDialog, ConfirmData, boolean>(ConfirmDialog, { data }).afterClosed()).then(
      (ok) => ok === true,
    );
  }
}
