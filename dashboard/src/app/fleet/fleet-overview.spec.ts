import { provideHttpClient } from '@angular/common/http';
import { HttpTestingController, provideHttpClientTesting, type TestRequest } from '@angular/common/http/testing';
import { provideZonelessChangeDetection } from '@angular/core';
import { TestBed, type ComponentFixture } from '@angular/core/testing';
import { TestbedHarnessEnvironment } from '@angular/cdk/testing/testbed';
import type { HarnessLoader } from '@angular/cdk/testing';
import { MatFormFieldHarness } from '@angular/material/form-field/testing';
import { MatInputHarness } from '@angular/material/input/testing';
import { MatPaginatorHarness } from '@angular/material/paginator/testing';
import { MatSelectHarness } from '@angular/material/select/testing';
import { MatSortHarness } from '@angular/material/sort/testing';
import { MatTableHarness } from '@angular/material/table/testing';
import { provideRouter } from '@angular/router';
import type { FleetEstimator, FleetResponse } from '../../../../shared/src/api/api-types';
import { LiveEventsStub, provideLiveEventsStub } from '../live/live-events-stub';
import { FleetOverview } from './fleet-overview';

function estimator(id: number, unitKey: string, verdict: FleetEstimator['verdict']): FleetEstimator {
  return {
    id,
    key: 'position',
    unitKey,
    unitName: `Yard tractor ${unitKey.slice(-2)}`,
    siteKey: 'north-yard',
    siteName: 'North Yard',
    designKey: 'tractor-position',
    designName: 'Tractor planar position/velocity',
    revision: 2,
    measurementDim: 2,
    verdict,
    verdictSince: '2026-03-01T08:00:00Z',
    lastSampleAt: '2026-03-01T08:59:58Z',
    lastSampleAgeMs: 2000,
    samplesTotal: 600,
    window: {
      verdict: 'inconsistent',
      reasons: ['NIS window mean 4.6 above its upper bound 2.6'],
      samples: 100,
      pValue: 1e-9,
      m: 2,
      nis: {
        ready: true,
        average: 4.6,
        expected: 2,
        averageBounds: { lower: 1.5, upper: 2.6 },
        pValue: 1e-9,
        exceedanceRate: 0.12,
        expectedExceedanceRate: 0.01,
      },
      cusum: { up: 1.3, down: 0 },
      whiteness: null,
      bias: null,
      sequence: null,
    },
    openAlerts: 2,
    worstOpenSeverity: 'critical',
  };
}

function fleetResponse(items: FleetEstimator[], total = 60): FleetResponse {
  return {
    generatedAt: '2026-03-01T09:00:00Z',
    total,
    limit: 25,
    offset: 0,
    items,
    counts: { consistent: 50, marginal: 4, inconsistent: 5, silent: 1 },
    liveAlerts: { critical: 3, warning: 2, info: 0 },
    discoveries: { q: 0.05, estimatorIds: [33] },
  };
}

describe('FleetOverview', () => {
  let fixture: ComponentFixture<FleetOverview>;
  let http: HttpTestingController;
  let loader: HarnessLoader;
  let live: LiveEventsStub;

  const fleetRequest = (): TestRequest => http.expectOne((r) => r.url === '/api/fleet');
  const params = (req: TestRequest): Record<string, string> =>
    Object.fromEntries(req.request.params.keys().map((k) => [k, req.request.params.get(k)!]));

  beforeEach(async () => {
    live = new LiveEventsStub();
    TestBed.configureTestingModule({
      imports: [FleetOverview],
      providers: [
        provideZonelessChangeDetection(),
        provideHttpClient(),
        provideHttpClientTesting(),
        provideRouter([]),
        provideLiveEventsStub(live),
      ],
    });
    http = TestBed.inject(HttpTestingController);
    fixture = TestBed.createComponent(FleetOverview);
    loader = TestbedHarnessEnvironment.loader(fixture);
    await fixture.whenStable();
    http.expectOne('/api/sites').flush({ items: [{ id: 1, key: 'north-yard', name: 'North Yard', timeZone: 'Europe/Amsterdam', units: 20 }] });
    http.expectOne((r) => r.url === '/api/fleet/heatmap').flush({ from: '', to: '', bucketMs: 60000, times: [], rows: [] });
  });

  afterEach(() => http.verify());

  it('asks for the worst verdicts first, 25 to a page, and shows each row with its verdict badge and NIS', async () => {
    const req = fleetRequest();
    expect(params(req)).toEqual({ sort: 'verdict', order: 'desc', limit: '25', offset: '0' });
    req.flush(fleetResponse([estimator(33, 'tractor-33', 'inconsistent'), estimator(34, 'tractor-34', 'marginal')]));
    await fixture.whenStable();

    const table = await loader.getHarness(MatTableHarness);
    const rows = await table.getRows();
    expect(rows.length).toBe(2);
    const first = await rows[0].getCellTextByColumnName();
    expect(first['verdict']).toContain('Inconsistent');
    expect(first['verdict']).toContain('flagged fleet-wide');
    expect(first['unit']).toContain('tractor-33');
    expect(first['nisRatio']).toContain('4.6 / 2');
    expect(first['openAlerts']).toContain('Critical');
    expect(first['lastSampleAt']).toMatch(/s ago|just now/);
    const el: HTMLElement = fixture.nativeElement;
    expect(el.textContent).toContain('60 estimators');
    expect(el.querySelector('a[href="/estimators/33"]')).not.toBeNull();
  });

  it('asks the server to sort by the header clicked, back on the first page', async () => {
    fleetRequest().flush(fleetResponse([estimator(33, 'tractor-33', 'inconsistent')]));
    const paginator = await loader.getHarness(MatPaginatorHarness);
    await paginator.goToNextPage();
    expect(params(fleetRequest())).toMatchObject({ offset: '25' });

    const sort = await loader.getHarness(MatSortHarness);
    const [unit] = await sort.getSortHeaders({ label: 'Unit' });
    await unit.click();
    expect(params(fleetRequest())).toEqual({ sort: 'unit', order: 'asc', limit: '25', offset: '0' });
    await unit.click();
    expect(params(fleetRequest())).toMatchObject({ sort: 'unit', order: 'desc' });
  });

  it('sends the verdict, site and text filters to the server', async () => {
    fleetRequest().flush(fleetResponse([]));
    const verdict = await (await loader.getHarness(MatFormFieldHarness.with({ floatingLabelText: 'Verdict' }))).getControl(MatSelectHarness);
    await verdict!.open();
    await verdict!.clickOptions({ text: /Inconsistent/ });
    expect(params(fleetRequest())).toMatchObject({ verdict: 'inconsistent', offset: '0' });

    const site = await (await loader.getHarness(MatFormFieldHarness.with({ floatingLabelText: 'Site' }))).getControl(MatSelectHarness);
    await site!.open();
    await site!.clickOptions({ text: 'North Yard' });
    expect(params(fleetRequest())).toMatchObject({ verdict: 'inconsistent', site: 'north-yard' });

    const search = await (
      await loader.getHarness(MatFormFieldHarness.with({ floatingLabelText: 'Search unit or estimator' }))
    ).getControl(MatInputHarness);
    await search!.setValue('tractor-3');
    await new Promise((r) => setTimeout(r, 350)); // typing settles for 300 ms before it queries
    await fixture.whenStable();
    expect(params(fleetRequest())).toEqual({
      sort: 'verdict',
      order: 'desc',
      limit: '25',
      offset: '0',
      verdict: 'inconsistent',
      site: 'north-yard',
      q: 'tractor-3',
    });
  });

  it('asks for the page and page size picked', async () => {
    fleetRequest().flush(fleetResponse([estimator(33, 'tractor-33', 'inconsistent')], 120));
    const paginator = await loader.getHarness(MatPaginatorHarness);
    await paginator.goToNextPage();
    expect(params(fleetRequest())).toMatchObject({ limit: '25', offset: '25' });
    await paginator.setPageSize(50);
    expect(params(fleetRequest())).toMatchObject({ limit: '50', offset: '0' });
  });

  it('refetches the current page when a verdict changes live', async () => {
    fleetRequest().flush(fleetResponse([estimator(33, 'tractor-33', 'consistent')]));
    live.push.next({ type: 'verdict', data: { estimatorId: 33, verdict: 'inconsistent', previous: 'consistent', at: '2026-03-01T09:00:01Z' } });
    await new Promise((r) => setTimeout(r, 1600)); // live changes are gathered for 1.5 s
    await fixture.whenStable();
    expect(params(fleetRequest())).toMatchObject({ sort: 'verdict', offset: '0' });
  });

  it('says what to do when the fleet cannot be loaded', async () => {
    fleetRequest().flush({ title: 'Service unavailable', detail: 'The database is not answering; try again shortly.' }, { status: 503, statusText: 'Unavailable' });
    await fixture.whenStable();
    expect((fixture.nativeElement as HTMLElement).querySelector('[role=alert]')?.textContent).toContain('The database is not answering');
  });
});
