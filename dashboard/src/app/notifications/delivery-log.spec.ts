import { provideHttpClient } from '@angular/common/http';
import { HttpTestingController, provideHttpClientTesting, type TestRequest } from '@angular/common/http/testing';
import { provideZonelessChangeDetection } from '@angular/core';
import { TestBed, type ComponentFixture } from '@angular/core/testing';
import { TestbedHarnessEnvironment } from '@angular/cdk/testing/testbed';
import type { HarnessLoader } from '@angular/cdk/testing';
import { MatButtonHarness } from '@angular/material/button/testing';
import { MatButtonToggleHarness } from '@angular/material/button-toggle/testing';
import { provideRouter } from '@angular/router';
import type { Delivery, DeliveryList, Role } from '../../../../shared/src/api/api-types';
import { Session } from '../auth/session';
import { DeliveryLog } from './delivery-log';

const sent: Delivery = {
  id: 1,
  channel: 'email',
  target: 'responder@saltmarsh.example',
  subject: '[Whitecap] Critical: NIS window test on tractor-33',
  status: 'sent',
  attempts: 1,
  lastError: null,
  createdAt: '2026-03-01T08:50:01Z',
  sentAt: '2026-03-01T08:50:02Z',
  nextAttemptAt: null,
  alertIds: [41],
};
const failed: Delivery = {
  ...sent,
  id: 2,
  channel: 'webhook',
  target: 'https://hooks.example.org/whitecap',
  subject: 'alert.opened',
  status: 'failed',
  attempts: 5,
  lastError: 'HTTP 500 from the receiver',
  sentAt: null,
};
const list = (items: Delivery[]): DeliveryList => ({ total: items.length, limit: 25, offset: 0, items });

describe('DeliveryLog', () => {
  let fixture: ComponentFixture<DeliveryLog>;
  let http: HttpTestingController;
  let loader: HarnessLoader;
  const deliveriesRequest = (): TestRequest => http.expectOne((r) => r.url === '/api/deliveries');

  async function openAs(role: Role): Promise<void> {
    TestBed.configureTestingModule({
      providers: [provideZonelessChangeDetection(), provideHttpClient(), provideHttpClientTesting(), provideRouter([])],
    });
    http = TestBed.inject(HttpTestingController);
    const signingIn = TestBed.inject(Session).signIn(`${role}@saltmarsh.example`, 'pw');
    http.expectOne('/api/auth/sign-in').flush({ accessToken: 't', expiresIn: 900, user: { id: 1, email: 'x', displayName: 'X', role } });
    await signingIn;
    fixture = TestBed.createComponent(DeliveryLog);
    loader = TestbedHarnessEnvironment.loader(fixture);
    await fixture.whenStable();
    deliveriesRequest().flush(list([sent, failed]));
    await fixture.whenStable();
  }
  const settle = async () => {
    await new Promise((r) => setTimeout(r, 0));
    await fixture.whenStable();
  };
  const text = () => ((fixture.nativeElement as HTMLElement).textContent ?? '').replace(/\s+/g, ' ');

  afterEach(() => http.verify());

  it('shows each delivery with its outcome as icon and word, attempts and last error', async () => {
    await openAs('responder');
    const statuses = [...fixture.nativeElement.querySelectorAll('wc-delivery-status')].map((e: Element) => [e.getAttribute('data-status'), e.textContent?.trim()]);
    expect(statuses).toEqual([
      ['sent', 'check_circleSent'],
      ['failed', 'errorFailed'],
    ]);
    expect(text()).toContain('responder@saltmarsh.example');
    expect(text()).toContain('HTTP 500 from the receiver');
    expect(text()).toContain('Webhook');
  });

  it('gives a responder no retry button', async () => {
    await openAs('responder');
    expect(await loader.getAllHarnesses(MatButtonHarness.with({ text: 'Retry' }))).toHaveLength(0);
    expect(text()).toContain('Administrators can retry a failed delivery by hand.');
  });

  it('filters by channel and outcome, back to the first page', async () => {
    await openAs('admin');
    await (await loader.getHarness(MatButtonToggleHarness.with({ text: 'Webhook' }))).check();
    let req = deliveriesRequest();
    expect(req.request.params.get('channel')).toBe('webhook');
    expect(req.request.params.get('status')).toBeNull();
    expect(req.request.params.get('offset')).toBe('0');
    req.flush(list([failed]));
    await settle();
    await (await loader.getHarness(MatButtonToggleHarness.with({ text: 'Failed' }))).check();
    req = deliveriesRequest();
    expect(req.request.params.get('status')).toBe('failed');
    req.flush(list([failed]));
    await settle();
  });

  it('lets an administrator retry a failed delivery', async () => {
    await openAs('admin');
    const retry = await loader.getAllHarnesses(MatButtonHarness.with({ text: 'Retry' }));
    expect(retry).toHaveLength(1);
    await retry[0].click();
    const req = http.expectOne('/api/deliveries/2/retry');
    expect(req.request.method).toBe('POST');
    req.flush({ ...failed, status: 'pending', nextAttemptAt: '2026-03-01T09:00:00Z' });
    await settle();
    deliveriesRequest().flush(list([sent, { ...failed, status: 'pending' }]));
    await settle();
    expect(fixture.nativeElement.querySelector('[role=status]')?.textContent).toContain('Queued to be sent again');
  });
});
