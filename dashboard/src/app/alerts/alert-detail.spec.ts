import { provideHttpClient } from '@angular/common/http';
import { HttpTestingController, provideHttpClientTesting } from '@angular/common/http/testing';
import { provideZonelessChangeDetection } from '@angular/core';
import { TestBed, type ComponentFixture } from '@angular/core/testing';
import { TestbedHarnessEnvironment } from '@angular/cdk/testing/testbed';
import type { HarnessLoader } from '@angular/cdk/testing';
import { MatButtonHarness } from '@angular/material/button/testing';
import { MatInputHarness } from '@angular/material/input/testing';
import { provideRouter } from '@angular/router';
import type { AlertDetail as AlertDetailData, Role } from '../../../../shared/src/api/api-types';
import { Session } from '../auth/session';
import { provideLiveEventsStub } from '../live/live-events-stub';
import { AlertDetail } from './alert-detail';

const openAlert: AlertDetailData = {
  id: 5,
  rule: 'nis-window',
  severity: 'critical',
  state: 'open',
  summary: 'NIS window sum far above its chi-square bound: the innovations are larger than the filter believes.',
  openedAt: '2026-03-01T08:50:00Z',
  lastEvidenceAt: '2026-03-01T08:59:00Z',
  acknowledgedAt: null,
  acknowledgedBy: null,
  resolvedAt: null,
  estimatorId: 33,
  estimatorKey: 'position',
  unitKey: 'tractor-33',
  siteKey: 'south-yard',
  evidence: { pValue: 2.1e-9, nisAverage: 4.62, bounds: { lower: 1.5, upper: 2.6 }, windowLength: 100 },
  events: [{ id: 1, at: '2026-03-01T08:50:00Z', kind: 'opened', actor: null, note: null, data: { atSeq: 212 } }],
};

const ACTIONS = ['Acknowledge', 'Add note', 'Resolve'];

describe('AlertDetail', () => {
  let fixture: ComponentFixture<AlertDetail>;
  let http: HttpTestingController;
  let loader: HarnessLoader;

  async function showAlertAs(role: Role, alert: AlertDetailData = openAlert): Promise<void> {
    TestBed.configureTestingModule({
      providers: [provideZonelessChangeDetection(), provideHttpClient(), provideHttpClientTesting(), provideRouter([]), provideLiveEventsStub()],
    });
    http = TestBed.inject(HttpTestingController);
    const signingIn = TestBed.inject(Session).signIn(`${role}@saltmarsh.example`, 'pw');
    http.expectOne('/api/auth/sign-in').flush({
      accessToken: 'token',
      expiresIn: 900,
      user: { id: 7, email: `${role}@saltmarsh.example`, displayName: `A ${role}`, role },
    });
    await signingIn;

    fixture = TestBed.createComponent(AlertDetail);
    fixture.componentRef.setInput('id', String(alert.id));
    loader = TestbedHarnessEnvironment.loader(fixture);
    await fixture.whenStable();
    http.expectOne(`/api/alerts/${alert.id}`).flush(alert);
    await fixture.whenStable();
  }

  /** Lets the action's promise finish, then renders. */
  const settle = async () => {
    await new Promise((r) => setTimeout(r, 0));
    await fixture.whenStable();
  };
  const buttonTexts = async () => Promise.all((await loader.getAllHarnesses(MatButtonHarness)).map((b) => b.getText()));
  const text = () => (fixture.nativeElement as HTMLElement).textContent ?? '';

  afterEach(() => http.verify());

  it('shows the summary, the evidence in words and the trail', async () => {
    await showAlertAs('viewer');
    expect(text()).toContain('NIS window test');
    expect(text()).toContain('larger than the filter believes');
    expect(text()).toContain('p-value');
    expect(text()).toContain('2.10e-9');
    expect(text()).toContain('bounds › upper bound');
    expect(text()).toContain('Opened');
    expect(text()).toContain('by Whitecap');
    expect(text()).toContain('Advisory.');
  });

  it('offers a viewer no actions and says who can act', async () => {
    await showAlertAs('viewer');
    const texts = await buttonTexts();
    for (const action of ACTIONS) expect(texts).not.toContain(action);
    expect(text()).toContain('Your role (viewer) can read alerts');
  });

  it('offers a designer no actions either', async () => {
    await showAlertAs('designer');
    const texts = await buttonTexts();
    for (const action of ACTIONS) expect(texts).not.toContain(action);
  });

  it.each(['responder', 'admin'] as const)('offers a %s acknowledge, add note and resolve on an open alert', async (role) => {
    await showAlertAs(role);
    expect(await buttonTexts()).toEqual(expect.arrayContaining(ACTIONS));
  });

  it('acknowledges with the note typed in and shows the new state and trail', async () => {
    await showAlertAs('responder');
    await (await loader.getHarness(MatInputHarness)).setValue('Looking at it from the yard.');
    await (await loader.getHarness(MatButtonHarness.with({ text: 'Acknowledge' }))).click();
    const req = http.expectOne('/api/alerts/5/acknowledge');
    expect(req.request.method).toBe('POST');
    expect(req.request.body).toEqual({ note: 'Looking at it from the yard.' });
    req.flush({
      ...openAlert,
      state: 'acknowledged',
      acknowledgedAt: '2026-03-01T09:00:00Z',
      acknowledgedBy: 'A responder',
      events: [
        ...openAlert.events,
        { id: 2, at: '2026-03-01T09:00:00Z', kind: 'acknowledged', actor: 'A responder', note: 'Looking at it from the yard.', data: null },
      ],
    });
    await settle();
    expect(text()).toContain('Acknowledged');
    expect(text()).toContain('by A responder');
    expect(text()).toContain('Looking at it from the yard.');
    expect(await buttonTexts()).not.toContain('Acknowledge');
    expect(await buttonTexts()).toEqual(expect.arrayContaining(['Add note', 'Resolve']));
  });

  it('asks for the note before adding an empty one, and shows the service refusal in words', async () => {
    await showAlertAs('responder');
    await (await loader.getHarness(MatButtonHarness.with({ text: 'Add note' }))).click();
    http.expectNone('/api/alerts/5/notes');
    expect(fixture.nativeElement.querySelector('[role=alert]')?.textContent).toContain('Write the note first');

    await (await loader.getHarness(MatButtonHarness.with({ text: 'Resolve' }))).click();
    http
      .expectOne('/api/alerts/5/resolve')
      .flush({ type: 'about:blank', title: 'Conflict', status: 409, detail: 'The alert is already resolved.' }, { status: 409, statusText: 'Conflict' });
    await settle();
    expect(fixture.nativeElement.querySelector('[role=alert]')?.textContent).toContain('The alert is already resolved.');
  });
});
