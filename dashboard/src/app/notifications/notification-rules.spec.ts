import { provideHttpClient } from '@angular/common/http';
import { HttpTestingController, provideHttpClientTesting } from '@angular/common/http/testing';
import { provideZonelessChangeDetection } from '@angular/core';
import { TestBed, type ComponentFixture } from '@angular/core/testing';
import { TestbedHarnessEnvironment } from '@angular/cdk/testing/testbed';
import type { HarnessLoader } from '@angular/cdk/testing';
import { MatButtonHarness } from '@angular/material/button/testing';
import { MatSlideToggleHarness } from '@angular/material/slide-toggle/testing';
import type { NotificationRule, Role } from '../../../../shared/src/api/api-types';
import { Session } from '../auth/session';
import { NotificationRules } from './notification-rules';

const rules: NotificationRule[] = [
  { severity: 'info', pages: false, handoffAfterMinutes: 30, quietFrom: '22:00', quietTo: '07:00' },
  { severity: 'critical', pages: true, handoffAfterMinutes: 10, quietFrom: null, quietTo: null },
  { severity: 'warning', pages: true, handoffAfterMinutes: 15, quietFrom: null, quietTo: null },
];

describe('NotificationRules', () => {
  let fixture: ComponentFixture<NotificationRules>;
  let http: HttpTestingController;
  let loader: HarnessLoader;

  async function openAs(role: Role): Promise<void> {
    TestBed.configureTestingModule({ providers: [provideZonelessChangeDetection(), provideHttpClient(), provideHttpClientTesting()] });
    http = TestBed.inject(HttpTestingController);
    const signingIn = TestBed.inject(Session).signIn(`${role}@saltmarsh.example`, 'pw');
    http.expectOne('/api/auth/sign-in').flush({ accessToken: 't', expiresIn: 900, user: { id: 1, email: 'x', displayName: 'X', role } });
    await signingIn;
    fixture = TestBed.createComponent(NotificationRules);
    loader = TestbedHarnessEnvironment.loader(fixture);
    await fixture.whenStable();
    http.expectOne('/api/notification-rules').flush(rules);
    await fixture.whenStable();
  }
  const settle = async () => {
    await new Promise((r) => setTimeout(r, 0));
    await fixture.whenStable();
  };
  const rowText = (severity: string) => (fixture.nativeElement.querySelector(`tr[data-severity=${severity}]`)?.textContent ?? '').replace(/\s+/g, ' ').trim();

  afterEach(() => http.verify());

  it('shows a responder the rules read-only, critical first', async () => {
    await openAs('responder');
    const order = [...fixture.nativeElement.querySelectorAll('tr[data-severity]')].map((r: Element) => r.getAttribute('data-severity'));
    expect(order).toEqual(['critical', 'warning', 'info']);
    expect(rowText('critical')).toContain('pages');
    expect(rowText('critical')).toContain('10 min');
    expect(rowText('info')).toContain('dashboard only');
    expect(rowText('info')).toContain('22:00 to 07:00 (past midnight)');
    expect(await loader.getAllHarnesses(MatSlideToggleHarness)).toHaveLength(0);
  });

  it('lets an administrator change a row in place and sends only what changed', async () => {
    await openAs('admin');
    const minutes = fixture.nativeElement.querySelector('tr[data-severity=warning] input[type=number]') as HTMLInputElement;
    minutes.value = '20';
    minutes.dispatchEvent(new Event('input'));
    await settle();
    await (await loader.getHarness(MatButtonHarness.with({ text: 'Save' }))).click();
    const req = http.expectOne('/api/notification-rules/warning');
    expect(req.request.method).toBe('PATCH');
    expect(req.request.body).toEqual({ handoffAfterMinutes: 20 });
    req.flush({ ...rules[2], handoffAfterMinutes: 20 });
    await settle();
    http.expectOne('/api/notification-rules').flush([rules[0], rules[1], { ...rules[2], handoffAfterMinutes: 20 }]);
    await settle();
    expect(fixture.nativeElement.querySelector('[role=status]')?.textContent).toContain('Rule for warning alerts saved.');
  });

  it('explains half-set quiet hours instead of sending them', async () => {
    await openAs('admin');
    const from = fixture.nativeElement.querySelector('tr[data-severity=critical] input[type=time]') as HTMLInputElement;
    from.value = '23:00';
    from.dispatchEvent(new Event('input'));
    await settle();
    await (await loader.getHarness(MatButtonHarness.with({ text: 'Save' }))).click();
    await settle();
    http.expectNone('/api/notification-rules/critical');
    expect(fixture.nativeElement.querySelector('[role=alert]')?.textContent).toContain('both a start and an end');
  });
});
