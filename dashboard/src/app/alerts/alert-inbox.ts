import { ChangeDetectionStrategy, Component, computed, inject, signal } from '@angular/core';
import { toObservable, toSignal } from '@angular/core/rxjs-interop';
import { MatButtonModule } from '@angular/material/button';
import { MatButtonToggleModule } from '@angular/material/button-toggle';
import { MatFormFieldModule } from '@angular/material/form-field';
import { MatInputModule } from '@angular/material/input';
import { MatPaginatorModule, type PageEvent } from '@angular/material/paginator';
import { MatProgressBarModule } from '@angular/material/progress-bar';
import { MatSelectModule } from '@angular/material/select';
import { MatSortModule, type Sort } from '@angular/material/sort';
import { MatTableModule } from '@angular/material/table';
import { NavigationEnd, Router, RouterLink, RouterOutlet } from '@angular/router';
import {
  Subject,
  auditTime,
  combineLatest,
  distinctUntilChanged,
  filter,
  interval,
  map,
  merge,
  startWith,
  switchMap,
} from 'rxjs';
import type { AlertList, AlertListItem, AlertSeverity, AlertState } from '../../../../shared/src/api/api-types';
import { foldLoad, initialLoad, loadSteps } from '../feedback/load-state';
import { Notice } from '../feedback/notice';
import { LiveEvents } from '../live/live-events';
import { ageOf, formatAge } from '../time/age';
import { TickingClock } from '../time/ticking-clock';
import { AlertsApi, type AlertQuery, type AlertSort } from './alerts-api';
import { SeverityBadge } from './severity-badge';
import { SEVERITIES, SEVERITY_LOOK, STATE_WORD, ruleWords } from './severity-look';
import { settleAfterFirst } from '../time/settle';

const TABS: { state: AlertState; label: string; empty: string }[] = [
  { state: 'open', label: 'Open', empty: 'No open alerts: nothing is waiting for a responder.' },
  { state: 'acknowledged', label: 'Acknowledged', empty: 'No acknowledged alerts: nobody is working on one right now.' },
  { state: 'resolved', label: 'Resolved', empty: 'No resolved alerts yet.' },
];

/** The alert inbox: open, acknowledged and resolved alerts, with the selected one's detail beside the list. */
@Component({
  selector: 'wc-alert-inbox',
  imports: [
    RouterLink,
    RouterOutlet,
    MatTableModule,
    MatSortModule,
    MatPaginatorModule,
    MatButtonModule,
    MatButtonToggleModule,
    MatFormFieldModule,
    MatInputModule,
    MatSelectModule,
    MatProgressBarModule,
    SeverityBadge,
    Notice,
  ],
  templateUrl: './alert-inbox.html',
  styleUrl: './alert-inbox.scss',
  changeDetection: ChangeDetectionStrategy.OnPush,
})
export class AlertInbox {
  private readonly api = inject(AlertsApi);
  private readonly live = inject(LiveEvents);
  private readonly router = inject(Router);
  private readonly clock = inject(TickingClock);

  protected readonly tabs = TABS;
  protected readonly severities = SEVERITIES;
  protected readonly severityLook = SEVERITY_LOOK;
  protected readonly stateWord = STATE_WORD;
  protected readonly ruleWords = ruleWords;
  protected readonly columns = ['severity', 'unit', 'rule', 'openedAt', 'acknowledgedBy'];

  protected readonly state = signal<AlertState>('open');
  protected readonly severity = signal<AlertSeverity | ''>('');
  protected readonly searchText = signal('');
  protected readonly sort = signal<{ sort: AlertSort; order: 'asc' | 'desc' }>({ sort: 'openedAt', order: 'desc' });
  protected readonly page = signal({ pageIndex: 0, pageSize: 25 });
  protected readonly emptyText = computed(() =>
    this.severity() || this.searchText().trim()
      ? 'No alert here matches these filters.'
      : TABS.find((t) => t.state === this.state())!.empty,
  );

  private readonly query$ = combineLatest([
    toObservable(
      computed(() => ({ state: this.state(), severity: this.severity(), ...this.sort(), ...this.page() })),
    ),
    toObservable(this.searchText).pipe(settleAfterFirst(300), distinctUntilChanged()),
  ]).pipe(
    map(([base, q]): AlertQuery => ({ ...base, q })),
    distinctUntilChanged((a, b) => JSON.stringify(a) === JSON.stringify(b)),
  );
  private readonly retry$ = new Subject<void>();
  private readonly refresh$ = merge(
    this.live.alerts$.pipe(auditTime(1000)),
    toObservable(this.api.changed),
    interval(30_000),
    this.retry$,
  ).pipe(startWith(null));

  protected readonly alerts = toSignal(
    combineLatest([this.query$, this.refresh$]).pipe(
      switchMap(([q]) => loadSteps(this.api.list(q), 'It retries every 30 seconds.')),
      foldLoad(),
    ),
    { initialValue: initialLoad<AlertList>() },
  );
  protected readonly rows = computed(() => this.alerts().value?.items ?? []);

  /** The alert open beside the list (the child route's :id). */
  protected readonly selectedId = toSignal(
    this.router.events.pipe(
      filter((e) => e instanceof NavigationEnd),
      startWith(null),
      map(() => Number(/^\/alerts\/(\d+)/.exec(this.router.url)?.[1] ?? NaN)),
    ),
    { initialValue: NaN },
  );
  protected readonly hasSelection = computed(() => Number.isFinite(this.selectedId()));

  protected age(row: AlertListItem): string {
    return formatAge(ageOf(row.openedAt, this.clock.now()));
  }

  protected showState(state: AlertState): void {
    this.state.set(state);
    this.firstPage();
  }

  protected filterSeverity(severity: AlertSeverity | ''): void {
    this.severity.set(severity);
    this.firstPage();
  }

  protected search(text: string): void {
    this.searchText.set(text);
    this.firstPage();
  }

  protected sortBy(sort: Sort): void {
    this.sort.set({ sort: (sort.active || 'openedAt') as AlertSort, order: sort.direction || 'desc' });
    this.firstPage();
  }

  protected pageTo(event: PageEvent): void {
    this.page.set({ pageIndex: event.pageIndex, pageSize: event.pageSize });
  }

  protected retry(): void {
    this.retry$.next();
  }

  protected openRow(row: AlertListItem, event: MouseEvent): void {
    if ((event.target as HTMLElement).closest('a, button')) return;
    void this.router.navigate(['/alerts', row.id]);
  }

  private firstPage(): void {
    this.page.update((p) => (p.pageIndex === 0 ? p : { ...p, pageIndex: 0 }));
  }
}
