import { provideHttpClient } from '@angular/common/http';
import { HttpTestingController, provideHttpClientTesting } from '@angular/common/http/testing';
import { provideZonelessChangeDetection } from '@angular/core';
import { TestBed, type ComponentFixture } from '@angular/core/testing';
import { TestbedHarnessEnvironment } from '@angular/cdk/testing/testbed';
import type { HarnessLoader } from '@angular/cdk/testing';
import { MatButtonHarness } from '@angular/material/button/testing';
import { MatInputHarness } from '@angular/material/input/testing';
import { MatSlideToggleHarness } from '@angular/material/slide-toggle/testing';
import type { WebhookEndpoint } from '../../../../shared/src/api/api-types';
import { WebhookEndpoints } from './webhook-endpoints';

const existing: WebhookEndpoint = {
  id: 1,
  url: 'https://hooks.example.org/whitecap',
  description: 'yard chat bridge',
  active: true,
  createdAt: '2026-03-01T08:00:00Z',
  secretHint: 'a1b2',
};

describe('WebhookEndpoints', () => {
  let fixture: ComponentFixture<WebhookEndpoints>;
  let http: HttpTestingController;
  let loader: HarnessLoader;

  beforeEach(async () => {
    TestBed.configureTestingModule({ providers: [provideZonelessChangeDetection(), provideHttpClient(), provideHttpClientTesting()] });
    http = TestBed.inject(HttpTestingController);
    fixture = TestBed.createComponent(WebhookEndpoints);
    loader = TestbedHarnessEnvironment.loader(fixture);
    await fixture.whenStable();
    http.expectOne('/api/webhooks').flush([existing]);
    await fixture.whenStable();
  });
  afterEach(() => http.verify());

  const settle = async () => {
    await new Promise((r) => setTimeout(r, 0));
    await fixture.whenStable();
  };
  const text = () => ((fixture.nativeElement as HTMLElement).textContent ?? '').replace(/\s+/g, ' ');

  it('lists endpoints with their secret hint, never a secret', () => {
    expect(text()).toContain('https://hooks.example.org/whitecap');
    expect(text()).toContain('yard chat bridge');
    expect(text()).toContain('…a1b2');
  });

  it('refuses plain http to another machine on the form and explains why', async () => {
    await (await loader.getHarness(MatInputHarness.with({ selector: '[formControlName=url]' }))).setValue('http://hooks.example.org/in');
    await (await loader.getHarness(MatButtonHarness.with({ text: 'Register endpoint' }))).click();
    await settle();
    http.expectNone((r) => r.method === 'POST');
    expect(text()).toContain('Plain http:// is accepted only for a receiver on this machine');
  });

  it('registers a loopback receiver and shows its secret once', async () => {
    await (await loader.getHarness(MatInputHarness.with({ selector: '[formControlName=url]' }))).setValue('http://127.0.0.1:9000/hook');
    await (await loader.getHarness(MatInputHarness.with({ selector: '[formControlName=description]' }))).setValue('test receiver');
    await (await loader.getHarness(MatButtonHarness.with({ text: 'Register endpoint' }))).click();
    const req = http.expectOne((r) => r.url === '/api/webhooks' && r.method === 'POST');
    expect(req.request.body).toEqual({ url: 'http://127.0.0.1:9000/hook', description: 'test receiver' });
    const created = { ...existing, id: 2, url: 'http://127.0.0.1:9000/hook', description: 'test receiver', secretHint: 'zz99', secret: 'whsec-very-secret-zz99' };
    req.flush(created, { status: 201, statusText: 'Created' });
    await settle();
    http.expectOne('/api/webhooks').flush([existing, { ...created, secret: undefined }]);
    await settle();
    expect(text()).toContain('whsec-very-secret-zz99');
    expect(text()).toContain('This is the only time the secret is shown.');
    expect(await loader.getAllHarnesses(MatButtonHarness.with({ text: /Copy secret/ }))).toHaveLength(1);

    await (await loader.getHarness(MatButtonHarness.with({ text: 'I have stored it' }))).click();
    await settle();
    expect(text()).not.toContain('whsec-very-secret-zz99');
    expect(text()).toContain('…zz99');
  });

  it('pauses an endpoint with its toggle', async () => {
    await (await loader.getHarness(MatSlideToggleHarness)).toggle();
    const req = http.expectOne('/api/webhooks/1');
    expect(req.request.method).toBe('PATCH');
    expect(req.request.body).toEqual({ active: false });
    req.flush({ ...existing, active: false });
    await settle();
    http.expectOne('/api/webhooks').flush([{ ...existing, active: false }]);
    await settle();
    expect(text()).toContain('paused');
  });
});
