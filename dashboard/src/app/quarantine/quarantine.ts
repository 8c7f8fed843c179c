import { ChangeDetectionStrategy, Component, computed, inject, signal } from '@angular/core';
import { toObservable, toSignal } from '@angular/core/rxjs-interop';
import { MatButtonModule } from '@angular/material/button';
import { MatButtonToggleModule } from '@angular/material/button-toggle';
import { MatFormFieldModule } from '@angular/material/form-field';
import { MatInputModule } from '@angular/material/input';
import { MatPaginatorModule, type PageEvent } from '@angular/material/paginator';
import { MatProgressBarModule } from '@angular/material/progress-bar';
import { MatTableModule } from '@angular/material/table';
import { Subject, combineLatest, distinctUntilChanged, interval, map, merge, startWith, switchMap } from 'rxjs';
import type { Page, QuarantineItem, QuarantineSummary } from '../../../../shared/src/api/api-types';
import { foldLoad, initialLoad, loadSteps } from '../feedback/load-state';
import { Notice } from '../feedback/notice';
import { formatAge, formatDateTime } from '../time/age';
import { TickingClock } from '../time/ticking-clock';
import { QuarantineApi, type QuarantineQuery } from './quarantine-api';
import { settleAfterFirst } from '../time/settle';
import { REASON_WORDS } from './quarantine-reasons';


/** Rejected payloads: how often by unit and reason, and each one with its reason and the start of its payload. */
@Component({
  selector: 'wc-quarantine',
  imports: [
    MatTableModule,
    MatPaginatorModule,
    MatFormFieldModule,
    MatInputModule,
    MatButtonModule,
    MatButtonToggleModule,
    MatProgressBarModule,
    Notice,
  ],
  templateUrl: './quarantine.html',
  styleUrl: './quarantine.scss',
  changeDetection: ChangeDetectionStrategy.OnPush,
})
export class Quarantine {
  private readonly api = inject(QuarantineApi);
  private readonly clock = inject(TickingClock);
  protected readonly formatDateTime = formatDateTime;
  protected readonly summaryColumns = ['unit', 'reason', 'count', 'last'];
  protected readonly columns = ['receivedAt', 'unit', 'reason', 'topic', 'payload'];

  protected readonly hours = signal(24);
  protected readonly unit = signal('');
  protected readonly reason = signal('');
  protected readonly searchText = signal('');
  protected readonly page = signal({ pageIndex: 0, pageSize: 25 });
  protected readonly filtered = computed(() => !!(this.unit() || this.reason() || this.searchText().trim()));

  private readonly retry$ = new Subject<void>();
  private readonly refresh$ = merge(interval(30_000), this.retry$).pipe(startWith(null));

  protected readonly summary = toSignal(
    combineLatest([toObservable(this.hours), this.refresh$]).pipe(
      switchMap(([h]) => loadSteps(this.api.summary(h))),
      foldLoad(),
    ),
    { initialValue: initialLoad<QuarantineSummary>() },
  );
  protected readonly summaryTotal = computed(() => (this.summary().value?.rows ?? []).reduce((n, r) => n + r.count, 0));

  protected readonly list = toSignal(
    combineLatest([
      toObservable(computed(() => ({ unit: this.unit(), reason: this.reason(), ...this.page() }))),
      toObservable(this.searchText).pipe(settleAfterFirst(300), distinctUntilChanged()),
      this.refresh$,
    ]).pipe(
      map(([base, q]): QuarantineQuery => ({ ...base, q })),
      switchMap((q) => loadSteps(this.api.list(q))),
      foldLoad(),
    ),
    { initialValue: initialLoad<Page<QuarantineItem>>() },
  );
  protected readonly rows = computed(() => this.list().value?.items ?? []);

  protected reasonWords(code: string): string {
    return REASON_WORDS[code] ?? code.replace(/_/g, ' ');
  }

  protected age(iso: string): string {
    const t = Date.parse(iso);
    return Number.isFinite(t) ? formatAge(this.clock.now() - t) : '—';
  }

  protected showHours(hours: number): void {
    this.hours.set(hours);
  }

  /** Picking a summary row shows those payloads in the list. */
  protected showPayloadsOf(unit: string | null, reason: string): void {
    this.unit.set(unit ?? '');
    this.reason.set(reason);
    this.firstPage();
  }

  protected filterUnit(unit: string): void {
    this.unit.set(unit.trim());
    this.firstPage();
  }

  protected filterReason(reason: string): void {
    this.reason.set(reason.trim());
    this.firstPage();
  }

  protected search(text: string): void {
    this.searchText.set(text);
    this.firstPage();
  }

  protected clearFilters(): void {
    this.unit.set('');
    this.reason.set('');
    this.searchText.set('');
    this.firstPage();
  }

  protected pageTo(event: PageEvent): void {
    this.page.set({ pageIndex: event.pageIndex, pageSize: event.pageSize });
  }

  protected retry(): void {
    this.retry$.next();
  }

  private firstPage(): void {
    this.page.update((p) => (p.pageIndex === 0 ? p : { ...p, pageIndex: 0 }));
  }
}
