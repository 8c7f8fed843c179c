import { provideHttpClient } from '@angular/common/http';
import { HttpTestingController, provideHttpClientTesting } from '@angular/common/http/testing';
import { provideZonelessChangeDetection } from '@angular/core';
import { TestBed, type ComponentFixture } from '@angular/core/testing';
import { TestbedHarnessEnvironment } from '@angular/cdk/testing/testbed';
import type { HarnessLoader } from '@angular/cdk/testing';
import { MatButtonHarness } from '@angular/material/button/testing';
import { MatInputHarness } from '@angular/material/input/testing';
import { MatSelectHarness } from '@angular/material/select/testing';
import { provideRouter } from '@angular/router';
import type { Role, RotaSummary } from '../../../../shared/src/api/api-types';
import { Session } from '../auth/session';
import { WatchRota } from './watch-rota';

const terminalWatch: RotaSummary = {
  id: 1,
  name: 'Saltmarsh Terminal watch',
  scope: { kind: 'fleet' },
  timeZone: 'Europe/London',
  shifts: [{ weekday: 1, handover: '08:00', userId: 2, displayName: 'Ravi Castellan (on call)' }],
  backups: [{ userId: 4, displayName: 'Ade Marsh (administrator)' }],
  overrides: [],
  onWatch: { userId: 2, displayName: 'Ravi Castellan (on call)', since: '2026-03-09T08:00:00Z', until: '2026-03-16T08:00:00Z', source: 'weekly' },
  next: [{ userId: 3, displayName: 'Dana Whitlow (estimator design)', at: '2026-03-16T08:00:00Z' }],
  handoffChain: [
    { userId: 2, displayName: 'Ravi Castellan (on call)' },
    { userId: 4, displayName: 'Ade Marsh (administrator)' },
  ],
};

const users = {
  total: 3,
  limit: 500,
  offset: 0,
  items: [
    { id: 2, email: 'responder@saltmarsh.example', displayName: 'Ravi Castellan (on call)', role: 'responder', active: true },
    { id: 3, email: 'designer@saltmarsh.example', displayName: 'Dana Whitlow (estimator design)', role: 'designer', active: true },
    { id: 4, email: 'admin@saltmarsh.example', displayName: 'Ade Marsh (administrator)', role: 'admin', active: true },
  ],
};
const sites = { items: [{ id: 7, key: 'north-yard', name: 'North Yard', timeZone: 'Europe/Amsterdam', units: 20 }] };

describe('WatchRota', () => {
  let fixture: ComponentFixture<WatchRota>;
  let http: HttpTestingController;
  let loader: HarnessLoader;

  async function openAs(role: Role, rotas: RotaSummary[] = [terminalWatch]): Promise<void> {
    TestBed.configureTestingModule({
      providers: [provideZonelessChangeDetection(), provideHttpClient(), provideHttpClientTesting(), provideRouter([])],
    });
    http = TestBed.inject(HttpTestingController);
    const signingIn = TestBed.inject(Session).signIn(`${role}@saltmarsh.example`, 'pw');
    http.expectOne('/api/auth/sign-in').flush({
      accessToken: 'token',
      expiresIn: 900,
      user: { id: 4, email: `${role}@saltmarsh.example`, displayName: `A ${role}`, role },
    });
    await signingIn;
    fixture = TestBed.createComponent(WatchRota);
    loader = TestbedHarnessEnvironment.loader(fixture);
    await fixture.whenStable();
    http.expectOne('/api/rotas').flush(rotas);
    if (role === 'admin') {
      http.expectOne((r) => r.url === '/api/users').flush(users);
      http.expectOne('/api/sites').flush(sites);
    }
    await fixture.whenStable();
  }

  const settle = async () => {
    await new Promise((r) => setTimeout(r, 0));
    await fixture.whenStable();
  };
  const text = () => (fixture.nativeElement as HTMLElement).textContent ?? '';
  const buttonTexts = async () => Promise.all((await loader.getAllHarnesses(MatButtonHarness)).map((b) => b.getText()));

  afterEach(() => http.verify());

  it('shows a viewer who is on watch, in the rota time zone, the next handover and the handoff chain, without edit controls', async () => {
    await openAs('viewer');
    expect(text()).toContain('Saltmarsh Terminal watch');
    expect(text()).toContain('Whole fleet');
    expect(text()).toContain('Time zone Europe/London');
    expect(text()).toContain('On watch now');
    expect(text()).toContain('Ravi Castellan (on call)');
    expect(text()).toMatch(/Mon,? (9 Mar|Mar 9), 08:00 GMT/);
    expect(text()).toMatch(/Mon,? (16 Mar|Mar 16), 08:00 GMT/);
    expect(text()).toContain('Dana Whitlow (estimator design)');
    const chain = [...fixture.nativeElement.querySelectorAll('ol.chain li')].map((li: Element) => li.textContent?.replace(/\s+/g, ' ').trim());
    expect(chain).toEqual(['Ravi Castellan (on call) · on watch', 'Ade Marsh (administrator) · next in line']);
    const buttons = await buttonTexts();
    for (const b of ['New rota', 'Edit', 'Delete', 'Add override']) expect(buttons).not.toContain(b);
    // Viewers cannot read the delivery log, so it is not offered.
    expect(text()).not.toContain('delivery log');
  });

  it('says plainly when nobody is on watch', async () => {
    await openAs('responder', [{ ...terminalWatch, onWatch: null, next: [], handoffChain: [] }]);
    expect(text()).toContain('Nobody');
    expect(text()).toContain('page no one');
    expect(text()).toContain('the delivery log');
  });

  it('adds an override whose times are read in the rota time zone', async () => {
    await openAs('admin');
    expect(text()).toContain("read in the rota's time zone, Europe/London");
    const from = await loader.getHarness(MatInputHarness.with({ selector: '[formControlName=from]' }));
    const to = await loader.getHarness(MatInputHarness.with({ selector: '[formControlName=to]' }));
    await from.setValue('2026-07-01T18:00');
    await to.setValue('2026-07-02T06:00');
    const person = await loader.getHarness(MatSelectHarness.with({ selector: 'wc-override-form mat-select' }));
    await person.open();
    await person.clickOptions({ text: 'Dana Whitlow (estimator design)' });
    await (await loader.getHarness(MatInputHarness.with({ selector: '[formControlName=note]' }))).setValue('yard drill');
    await (await loader.getHarness(MatButtonHarness.with({ text: 'Add override' }))).click();
    const req = http.expectOne('/api/rotas/1/overrides');
    expect(req.request.method).toBe('POST');
    // 18:00 British Summer Time is 17:00 UTC.
    expect(req.request.body).toEqual({ from: '2026-07-01T17:00:00.000Z', to: '2026-07-02T05:00:00.000Z', userId: 3, note: 'yard drill' });
    const withOverride: RotaSummary = {
      ...terminalWatch,
      overrides: [{ id: 9, userId: 3, displayName: 'Dana Whitlow (estimator design)', from: '2026-07-01T17:00:00Z', to: '2026-07-02T05:00:00Z', note: 'yard drill' }],
    };
    req.flush(withOverride, { status: 201, statusText: 'Created' });
    await settle();
    http.expectOne('/api/rotas').flush([withOverride]);
    await settle();
    expect(fixture.nativeElement.querySelector('[data-override-id="9"]')?.textContent).toContain('yard drill');
  });

  it('refuses an override that ends before it starts, without asking the service', async () => {
    await openAs('admin');
    await (await loader.getHarness(MatInputHarness.with({ selector: '[formControlName=from]' }))).setValue('2026-07-02T06:00');
    await (await loader.getHarness(MatInputHarness.with({ selector: '[formControlName=to]' }))).setValue('2026-07-01T18:00');
    await (await loader.getHarness(MatButtonHarness.with({ text: 'Add override' }))).click();
    await settle();
    http.expectNone('/api/rotas/1/overrides');
    const alert = fixture.nativeElement.querySelector('wc-override-form [role=alert]')?.textContent ?? '';
    expect(alert).toContain('The end must be after the start.');
    expect(alert).toContain('Pick who is on watch instead.');
  });

  it('creates a rota and shows the service refusal of a field beside the form', async () => {
    await openAs('admin');
    await (await loader.getHarness(MatButtonHarness.with({ text: /New rota/ }))).click();
    await settle();
    const editor = () => fixture.nativeElement.querySelector('wc-rota-editor') as HTMLElement;
    await (await loader.getHarness(MatInputHarness.with({ selector: 'wc-rota-editor [formControlName=name]' }))).setValue('North Yard nights');
    const zone = await loader.getHarness(MatInputHarness.with({ selector: 'wc-rota-editor [formControlName=timeZone]' }));
    await zone.setValue('Europe/Amsterdam');
    const selects = await loader.getAllHarnesses(MatSelectHarness.with({ ancestor: 'wc-rota-editor' }));
    // Scope, then the first shift's weekday and person, then the backup picker.
    await selects[0].open();
    await selects[0].clickOptions({ text: 'Site: North Yard' });
    await selects[2].open();
    await selects[2].clickOptions({ text: 'Ravi Castellan (on call)' });
    await (await loader.getHarness(MatButtonHarness.with({ text: 'Create rota' }))).click();
    const req = http.expectOne((r) => r.url === '/api/rotas' && r.method === 'POST');
    expect(req.request.body).toEqual({
      name: 'North Yard nights',
      siteId: 7,
      timeZone: 'Europe/Amsterdam',
      shifts: [{ weekday: 1, handover: '08:00', userId: 2 }],
      backups: [],
    });
    req.flush(
      {
        type: 'https://whitecap.invalid/problems/invalid-request',
        title: 'Invalid request',
        status: 400,
        detail: 'A site has one rota at most.',
        errors: [{ path: 'siteId', message: 'North Yard has a rota already.' }],
      },
      { status: 400, statusText: 'Bad Request' },
    );
    await settle();
    const alert = editor().querySelector('[role=alert]')?.textContent ?? '';
    expect(alert).toContain('A site has one rota at most.');
    expect(alert).toContain('Scope: North Yard has a rota already.');
  });
});
