import { ChangeDetectionStrategy, Component, computed, inject, signal } from '@angular/core';
import { toObservable, toSignal } from '@angular/core/rxjs-interop';
import { MatAutocompleteModule } from '@angular/material/autocomplete';
import { MatButtonModule } from '@angular/material/button';
import { MatButtonToggleModule } from '@angular/material/button-toggle';
import { MatFormFieldModule } from '@angular/material/form-field';
import { MatInputModule } from '@angular/material/input';
import { MatPaginatorModule, type PageEvent } from '@angular/material/paginator';
import { MatProgressBarModule } from '@angular/material/progress-bar';
import { MatSelectModule } from '@angular/material/select';
import { MatSortModule, type Sort } from '@angular/material/sort';
import { MatTableModule } from '@angular/material/table';
import { MatTooltipModule } from '@angular/material/tooltip';
import { Router, RouterLink } from '@angular/router';
import {
  Subject,
  auditTime,
  catchError,
  combineLatest,
  distinctUntilChanged,
  interval,
  map,
  merge,
  of,
  scan,
  startWith,
  switchMap,
} from 'rxjs';
import type { EstimatorVerdict, FleetEstimator, FleetHeatmap as FleetHeatmapData, FleetResponse } from '../../../../shared/src/api/api-types';
import { SeverityBadge } from '../alerts/severity-badge';
import { SEVERITIES, SEVERITY_LOOK } from '../alerts/severity-look';
import { foldLoad, initialLoad, loadSteps } from '../feedback/load-state';
import { Notice } from '../feedback/notice';
import { LiveEvents } from '../live/live-events';
import { formatAge } from '../time/age';
import { TickingClock } from '../time/ticking-clock';
import { VerdictBadge } from '../verdict/verdict-badge';
import { VERDICTS, VERDICT_LOOK } from '../verdict/verdict-look';
import { FleetApi } from './fleet-api';
import { FleetHeatmap } from './fleet-heatmap';
import { DEFAULT_FLEET_QUERY, type FleetQuery, type FleetSort } from './fleet-query';
import { NisGauge } from './nis-gauge';
import { settleAfterFirst } from '../time/settle';

const HEATMAP_RANGES = [
  { key: '1h', label: '1 h', ms: 3_600_000 },
  { key: '6h', label: '6 h', ms: 6 * 3_600_000 },
  { key: '24h', label: '24 h', ms: 24 * 3_600_000 },
] as const;
type HeatmapRange = (typeof HEATMAP_RANGES)[number]['key'];

/** The whole fleet at a glance: counts by verdict, live alerts, the NIS ratio over time, and every estimator. */
@Component({
  selector: 'wc-fleet-overview',
  imports: [
    RouterLink,
    MatTableModule,
    MatSortModule,
    MatPaginatorModule,
    MatFormFieldModule,
    MatInputModule,
    MatSelectModule,
    MatAutocompleteModule,
    MatButtonModule,
    MatButtonToggleModule,
    MatProgressBarModule,
    MatTooltipModule,
    VerdictBadge,
    SeverityBadge,
    NisGauge,
    Notice,
    FleetHeatmap,
  ],
  templateUrl: './fleet-overview.html',
  styleUrl: './fleet-overview.scss',
  changeDetection: ChangeDetectionStrategy.OnPush,
})
export class FleetOverview {
  private readonly api = inject(FleetApi);
  private readonly live = inject(LiveEvents);
  private readonly router = inject(Router);
  private readonly clock = inject(TickingClock);

  protected readonly columns = ['verdict', 'unit', 'estimator', 'site', 'design', 'lastSampleAt', 'nisRatio', 'openAlerts'];
  protected readonly verdicts = VERDICTS;
  protected readonly verdictLook = VERDICT_LOOK;
  protected readonly severities = SEVERITIES;
  protected readonly severityLook = SEVERITY_LOOK;
  protected readonly heatmapRanges = HEATMAP_RANGES;
  protected readonly pageSizes = [10, 25, 50, 100];

  // The table's state: filters, sort, page. The search text is debounced before it queries.
  protected readonly site = signal('');
  protected readonly design = signal('');
  protected readonly verdict = signal<EstimatorVerdict | ''>('');
  protected readonly searchText = signal('');
  protected readonly sort = signal<{ sort: FleetSort; order: 'asc' | 'desc' }>({
    sort: DEFAULT_FLEET_QUERY.sort,
    order: DEFAULT_FLEET_QUERY.order,
  });
  protected readonly page = signal({ pageIndex: 0, pageSize: DEFAULT_FLEET_QUERY.pageSize });
  protected readonly filtered = computed(() => !!(this.site() || this.design() || this.verdict() || this.searchText().trim()));

  private readonly baseQuery = computed(() => ({
    site: this.site(),
    design: this.design(),
    verdict: this.verdict(),
    ...this.sort(),
    ...this.page(),
  }));
  private readonly query$ = combineLatest([
    toObservable(this.baseQuery),
    toObservable(this.searchText).pipe(settleAfterFirst(300), distinctUntilChanged()),
  ]).pipe(
    map(([base, q]): FleetQuery => ({ ...base, q })),
    distinctUntilChanged((a, b) => JSON.stringify(a) === JSON.stringify(b)),
  );

  private readonly retry$ = new Subject<void>();
  /** Refetch on any live change (gathered for 1.5 s), every 30 s, and on request. */
  private readonly refresh$ = merge(this.live.events$.pipe(auditTime(1500)), interval(30_000), this.retry$).pipe(startWith(null));

  protected readonly fleet = toSignal(
    combineLatest([this.query$, this.refresh$]).pipe(
      switchMap(([q]) =>
        loadSteps(this.api.fleet(q).pipe(map((res) => ({ res, receivedAt: Date.now() }))), 'It retries every 30 seconds.'),
      ),
      foldLoad(),
    ),
    { initialValue: initialLoad<{ res: FleetResponse; receivedAt: number }>() },
  );
  protected readonly response = computed(() => this.fleet().value?.res ?? null);
  protected readonly rows = computed(() => this.response()?.items ?? []);
  private readonly discovered = computed(() => new Set(this.response()?.discoveries.estimatorIds ?? []));
  protected readonly totalEstimators = computed(() => {
    const c = this.response()?.counts;
    return c ? c.consistent + c.marginal + c.inconsistent + c.silent : 0;
  });
  protected readonly liveAlertTotal = computed(() => {
    const a = this.response()?.liveAlerts;
    return a ? a.critical + a.warning + a.info : 0;
  });

  /** Design keys seen so far, for the design filter's suggestions. */
  protected readonly designOptions = toSignal(
    toObservable(this.rows).pipe(
      scan((seen, rows) => {
        for (const r of rows) seen.set(r.designKey, r.designName);
        return seen;
      }, new Map<string, string>()),
      map((seen) => [...seen].map(([key, name]) => ({ key, name })).sort((a, b) => a.key.localeCompare(b.key))),
    ),
    { initialValue: [] },
  );
  protected readonly sites = toSignal(
    this.api.sites().pipe(
      map((r) => r.items),
      catchError(() => of([])),
    ),
    { initialValue: [] },
  );

  protected readonly heatmapRange = signal<HeatmapRange>('1h');
  protected readonly heatmap = toSignal(
    combineLatest([
      toObservable(this.heatmapRange),
      merge(interval(60_000), this.live.verdicts$.pipe(auditTime(10_000)), this.retry$).pipe(startWith(null)),
    ]).pipe(
      switchMap(([key]) => {
        const ms = HEATMAP_RANGES.find((r) => r.key === key)!.ms;
        const to = new Date();
        return loadSteps(this.api.heatmap(new Date(to.getTime() - ms), to, 60), 'It retries every minute.');
      }),
      foldLoad(),
    ),
    { initialValue: initialLoad<FleetHeatmapData>() },
  );

  protected readonly updatedAgo = computed(() => {
    const at = this.fleet().value?.receivedAt;
    return at ? formatAge(this.clock.now() - at) : '';
  });

  protected lastSampleAge(row: FleetEstimator): string {
    if (row.lastSampleAgeMs === null) return 'never';
    const receivedAt = this.fleet().value?.receivedAt ?? this.clock.now();
    return formatAge(row.lastSampleAgeMs + Math.max(0, this.clock.now() - receivedAt));
  }

  protected isDiscovery(row: FleetEstimator): boolean {
    return this.discovered().has(row.id);
  }

  protected sortBy(sort: Sort): void {
    const active = (sort.active || DEFAULT_FLEET_QUERY.sort) as FleetSort;
    this.sort.set({ sort: active, order: sort.direction || (sort.active ? 'asc' : DEFAULT_FLEET_QUERY.order) });
    this.firstPage();
  }

  protected pageTo(event: PageEvent): void {
    this.page.set({ pageIndex: event.pageIndex, pageSize: event.pageSize });
  }

  protected filterSite(site: string): void {
    this.site.set(site);
    this.firstPage();
  }

  protected filterDesign(design: string): void {
    this.design.set(design.trim());
    this.firstPage();
  }

  protected filterVerdict(verdict: EstimatorVerdict | ''): void {
    this.verdict.set(verdict);
    this.firstPage();
  }

  /** The verdict tiles toggle their verdict as the filter. */
  protected toggleVerdict(verdict: EstimatorVerdict): void {
    this.filterVerdict(this.verdict() === verdict ? '' : verdict);
  }

  protected search(text: string): void {
    this.searchText.set(text);
    this.firstPage();
  }

  protected clearFilters(): void {
    this.site.set('');
    this.design.set('');
    this.verdict.set('');
    this.searchText.set('');
    this.firstPage();
  }

  protected retry(): void {
    this.retry$.next();
  }

  protected openEstimator(id: number): void {
    void this.router.navigate(['/estimators', id]);
  }

  /** A click anywhere on a row opens its estimator (the link in the row does the same from the keyboard). */
  protected openRow(row: FleetEstimator, event: MouseEvent): void {
    if ((event.target as HTMLElement).closest('a, button')) return;
    this.openEstimator(row.id);
  }

  protected selectHeatmapRange(key: HeatmapRange): void {
    this.heatmapRange.set(key);
  }

  private firstPage(): void {
    this.page.update((p) => (p.pageIndex === 0 ? p : { ...p, pageIndex: 0 }));
  }
}
