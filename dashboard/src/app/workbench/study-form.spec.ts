import { provideHttpClient } from '@angular/common/http';
import { HttpTestingController, provideHttpClientTesting } from '@angular/common/http/testing';
import { provideZonelessChangeDetection } from '@angular/core';
import { TestBed, type ComponentFixture } from '@angular/core/testing';
import { TestbedHarnessEnvironment } from '@angular/cdk/testing/testbed';
import type { HarnessLoader } from '@angular/cdk/testing';
import { MatButtonHarness } from '@angular/material/button/testing';
import { MatButtonToggleHarness } from '@angular/material/button-toggle/testing';
import { MatCheckboxHarness } from '@angular/material/checkbox/testing';
import { MatSelectHarness } from '@angular/material/select/testing';
import { Router, provideRouter } from '@angular/router';
import type { DesignSummary, EstimatorListItem } from '../../../../shared/src/api/api-types';
import { cohortGroups } from './cohorts';
import { StudyForm } from './study-form';

const designs: DesignSummary[] = [
  {
    id: 1,
    key: 'tractor-position',
    name: 'Tractor planar position/velocity',
    description: '',
    revisions: [
      { id: 11, revision: 1, status: 'released', stateDim: 4, measurementDim: 2, estimators: 32, createdAt: '2026-01-01T00:00:00Z' },
      { id: 12, revision: 2, status: 'released', stateDim: 4, measurementDim: 2, estimators: 8, createdAt: '2026-02-01T00:00:00Z' },
    ],
  },
];
const estimator = (id: number, unitKey: string, revision: number): EstimatorListItem => ({
  id,
  key: 'position',
  unitKey,
  siteKey: 'north-yard',
  designKey: 'tractor-position',
  revision,
  measurementDim: 2,
  expectedIntervalMs: 1000,
});

describe('StudyForm', () => {
  let fixture: ComponentFixture<StudyForm>;
  let http: HttpTestingController;
  let loader: HarnessLoader;
  let navigated: unknown[] = [];
  const settle = async () => {
    await new Promise((r) => setTimeout(r, 0));
    await fixture.whenStable();
  };

  beforeEach(async () => {
    TestBed.configureTestingModule({ providers: [provideZonelessChangeDetection(), provideHttpClient(), provideHttpClientTesting(), provideRouter([])] });
    http = TestBed.inject(HttpTestingController);
    navigated = [];
    jest.spyOn(TestBed.inject(Router), 'navigate').mockImplementation(async (commands) => {
      navigated.push(commands);
      return true;
    });
    fixture = TestBed.createComponent(StudyForm);
    fixture.componentRef.setInput('cohorts', cohortGroups(designs));
    loader = TestbedHarnessEnvironment.loader(fixture);
    await fixture.whenStable();
    // The form lists uploaded runs as a source: none here.
    for (const r of http.match('/api/residual-uploads')) r.flush([]);
    await fixture.whenStable();
  });

  afterEach(() => http.verify());

  it('runs a study on a cohort over the last 24 h and opens it', async () => {
    const select = await loader.getHarness(MatSelectHarness);
    await select.open();
    await select.clickOptions({ text: /tractor-position rev 2 · released · 8 estimators/ });
    expect(fixture.nativeElement.textContent).toContain('8 estimators run this revision');
    await (await loader.getHarness(MatButtonToggleHarness.with({ text: 'Full', selector: '[value=full]' }))).check();
    await (await loader.getHarness(MatButtonHarness.with({ text: /Run study/ }))).click();
    const req = http.expectOne('/api/studies');
    expect(req.request.method).toBe('POST');
    expect(req.request.body).toEqual(expect.objectContaining({ designRevisionId: 12, lags: 15, estimateQ: 'full', estimateR: 'diagonal' }));
    expect(Date.parse(req.request.body.to) - Date.parse(req.request.body.from)).toBe(24 * 3_600_000);
    expect(fixture.nativeElement.querySelector('[role=status]')?.textContent).toContain('Reading the residuals');
    req.flush({ id: 5 }, { status: 201, statusText: 'Created' });
    await settle();
    expect(navigated).toEqual([['/workbench/studies', 5]]);
  });

  it('refuses estimators on different revisions before sending anything', async () => {
    await (await loader.getHarness(MatButtonToggleHarness.with({ text: 'Chosen estimators' }))).check();
    await settle();
    http.expectOne((r) => r.url === '/api/estimators').flush({ total: 2, limit: 20, offset: 0, items: [estimator(1, 'tractor-01', 1), estimator(33, 'tractor-33', 2)] });
    await settle();
    for (const box of await loader.getAllHarnesses(MatCheckboxHarness)) await box.check();
    await (await loader.getHarness(MatButtonHarness.with({ text: /Run study/ }))).click();
    http.expectNone('/api/studies');
    expect(fixture.nativeElement.querySelector('[role=alert]')?.textContent).toContain('a study covers one design revision');
  });

  it('shows the service’s reason when it refuses a study', async () => {
    const select = await loader.getHarness(MatSelectHarness);
    await select.open();
    await select.clickOptions({ text: /rev 1/ });
    await (await loader.getHarness(MatButtonHarness.with({ text: /Run study/ }))).click();
    http
      .expectOne('/api/studies')
      .flush(
        { type: 'https://whitecap.example/problems/invalid-request', title: 'Invalid request', status: 422, detail: 'No samples in the window.', errors: [{ path: 'lags', message: 'at most 40 for this window' }] },
        { status: 422, statusText: 'Unprocessable Entity' },
      );
    await settle();
    const alert = fixture.nativeElement.querySelector('[role=alert]')?.textContent ?? '';
    expect(alert).toContain('No samples in the window.');
    expect(alert).toContain('lags: at most 40 for this window');
    expect(navigated).toEqual([]);
  });
});
