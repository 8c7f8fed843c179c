import { provideHttpClient } from '@angular/common/http';
import { HttpTestingController, provideHttpClientTesting } from '@angular/common/http/testing';
import { provideZonelessChangeDetection } from '@angular/core';
import { TestBed, type ComponentFixture } from '@angular/core/testing';
import { TestbedHarnessEnvironment } from '@angular/cdk/testing/testbed';
import type { HarnessLoader } from '@angular/cdk/testing';
import { MatButtonHarness } from '@angular/material/button/testing';
import { provideRouter } from '@angular/router';
import type { AcknowledgeLinkInfo } from '../../../../shared/src/api/api-types';
import { AcknowledgeLink } from './acknowledge-link';

const TOKEN = 'tok.en-1';
const URL = `/api/acknowledgements/${TOKEN}`;

const usable: AcknowledgeLinkInfo = {
  alert: {
    id: 41,
    rule: 'nis-window',
    severity: 'critical',
    summary: 'NIS window mean far above its chi-square bound.',
    unitKey: 'tractor-33',
    estimatorKey: 'position',
    openedAt: '2026-03-01T08:50:00Z',
    state: 'open',
  },
  recipient: 'responder@saltmarsh.example',
  expiresAt: '2026-03-01T09:50:00Z',
  usable: true,
  reason: null,
};

const problem = (status: number, kind: string, detail = 'refused') => ({
  body: { type: `https://whitecap.invalid/problems/${kind}`, title: 'Refused', status, detail },
  options: { status, statusText: 'Refused' },
});

describe('AcknowledgeLink', () => {
  let fixture: ComponentFixture<AcknowledgeLink>;
  let http: HttpTestingController;
  let loader: HarnessLoader;

  async function open(): Promise<void> {
    TestBed.configureTestingModule({
      providers: [provideZonelessChangeDetection(), provideHttpClient(), provideHttpClientTesting(), provideRouter([])],
    });
    http = TestBed.inject(HttpTestingController);
    fixture = TestBed.createComponent(AcknowledgeLink);
    fixture.componentRef.setInput('token', TOKEN);
    loader = TestbedHarnessEnvironment.loader(fixture);
    await fixture.whenStable();
  }
  const settle = async () => {
    await new Promise((r) => setTimeout(r, 0));
    await fixture.whenStable();
  };
  const text = () => ((fixture.nativeElement as HTMLElement).textContent ?? '').replace(/\s+/g, ' ');

  afterEach(() => http.verify());

  it('shows the alert and who the link was for, and acknowledges only when the button is pressed', async () => {
    await open();
    const look = http.expectOne(URL);
    expect(look.request.method).toBe('GET');
    expect(look.request.headers.has('Authorization')).toBe(false);
    look.flush(usable);
    await settle();
    expect(text()).toContain('NIS window test');
    expect(text()).toContain('Critical');
    expect(text()).toContain('tractor-33 / position');
    expect(text()).toContain('NIS window mean far above its chi-square bound.');
    expect(text()).toContain('responder@saltmarsh.example');
    expect(text()).toContain('Nothing happens until you press the button.');
    // Opening the page (as a mail scanner would) acknowledges nothing.
    http.expectNone((r) => r.method === 'POST');

    await (await loader.getHarness(MatButtonHarness.with({ text: 'Acknowledge' }))).click();
    const press = http.expectOne((r) => r.url === URL && r.method === 'POST');
    press.flush({ alertId: 41, acknowledgedBy: 'Ravi Castellan (on call)', acknowledgedAt: '2026-03-01T09:01:00Z' });
    await settle();
    expect(text()).toMatch(/Acknowledged by Ravi Castellan \(on call\) at .+\./);
    const link = fixture.nativeElement.querySelector('[role=status] a') as HTMLAnchorElement;
    expect(link.getAttribute('href')).toBe('/alerts/41');
    expect(await loader.getAllHarnesses(MatButtonHarness.with({ text: 'Acknowledge' }))).toHaveLength(0);
  });

  it('says a link that does not exist is not valid', async () => {
    await open();
    const p = problem(404, 'link-invalid');
    http.expectOne(URL).flush(p.body, p.options);
    await settle();
    expect(fixture.nativeElement.querySelector('[role=alert]')?.textContent).toContain('This link is not valid');
    expect(await loader.getAllHarnesses(MatButtonHarness)).toHaveLength(0);
  });

  it('explains an expired link without offering the button', async () => {
    await open();
    http.expectOne(URL).flush({ ...usable, usable: false, reason: 'expired' });
    await settle();
    expect(text()).toContain('This link has expired');
    expect(text()).toContain('It was valid until');
    expect(await loader.getAllHarnesses(MatButtonHarness)).toHaveLength(0);
  });

  it('explains that the alert is no longer open', async () => {
    await open();
    http.expectOne(URL).flush({ ...usable, usable: false, reason: 'not-open', alert: { ...usable.alert, state: 'resolved' } });
    await settle();
    expect(text()).toContain('This alert is no longer open');
    expect(text()).toContain('resolved already');
  });

  it('says so when someone used the link between opening and pressing', async () => {
    await open();
    http.expectOne(URL).flush(usable);
    await settle();
    await (await loader.getHarness(MatButtonHarness.with({ text: 'Acknowledge' }))).click();
    const p = problem(409, 'link-used');
    http.expectOne((r) => r.method === 'POST').flush(p.body, p.options);
    await settle();
    expect(fixture.nativeElement.querySelector('[role=alert]')?.textContent).toContain('This link has already been used');
  });
});
