// The notification side in a real Chromium against the real service and database: an
// administrator reads the demo watch rota and puts the designer on watch for a while
// (times typed in the rota's own time zone), registers a webhook receiver on loopback and
// sees its secret once, reads the delivery log; a responder reads the log without admin
// controls; and an acknowledge link that Whitecap never made, opened signed out, is
// explained in plain words instead of sending anyone to sign in.
import http from 'node:http';
import type { AddressInfo } from 'node:net';
import path from 'node:path';
import { DateTime } from 'luxon';
import type { Browser, BrowserContext, Page } from 'playwright-core';
import type { Page as ListPage, RotaSummary, User, WebhookEndpoint } from '../../shared/src/api/api-types';
import { api, signIn, type Session } from '../support/api';
import { launchBrowser, screenshotDir, signInOnPage } from '../support/browser';
import { createTestDatabase, type TestDatabase } from '../support/database';
import { runCli, startService, type ServiceHandle } from '../support/service';

jest.setTimeout(180_000);

const DEMO_ROTA = 'Saltmarsh Terminal watch';

describe('notifications in the dashboard', () => {
  let db: TestDatabase;
  let service: ServiceHandle;
  let browser: Browser;
  let adminContext: BrowserContext;
  let page: Page;
  let admin: Session;
  let receiver: http.Server;
  let receiverUrl = '';
  const requested: string[] = [];
  const pageErrors: string[] = [];

  beforeAll(async () => {
    db = await createTestDatabase('browser_notifications');
    await runCli('ingest/cli/seed.ts', [], { WHITECAP_DATABASE_URL: db.url });
    service = await startService({ WHITECAP_DATABASE_URL: db.url });
    admin = await signIn(service.url, 'admin@saltmarsh.example', 'saltmarsh-admin');
    // A webhook receiver on loopback that accepts whatever it is sent.
    receiver = http.createServer((req, res) => {
      req.resume();
      req.on('end', () => res.writeHead(204).end());
    });
    await new Promise<void>((resolve) => receiver.listen(0, '127.0.0.1', resolve));
    receiverUrl = `http://127.0.0.1:${(receiver.address() as AddressInfo).port}/whitecap-hook`;

    browser = await launchBrowser();
    adminContext = await browser.newContext({ viewport: { width: 1440, height: 1000 } });
    page = await adminContext.newPage();
    page.on('request', (r) => requested.push(r.url()));
    page.on('pageerror', (e) => pageErrors.push(String(e)));
    page.on('console', (m) => {
      // The session check on the first, signed-out page load answers 401 by design.
      if (m.type() === 'error' && !/status of 401/.test(m.text())) pageErrors.push(m.text());
    });
  });
  afterAll(async () => {
    await browser?.close();
    await service?.stop();
    await new Promise((resolve) => (receiver ? receiver.close(resolve) : resolve(null)));
    await db?.drop();
  });

  it('shows an administrator the demo rota with who is on watch, and adds an override read in the rota time zone', async () => {
    await signInOnPage(page, service.url, 'admin@saltmarsh.example', 'saltmarsh-admin');
    const nav = page.getByRole('navigation', { name: 'Main' });
    expect(await nav.getByRole('link').allTextContents()).toEqual(
      expect.arrayContaining([expect.stringContaining('Watch rota'), expect.stringContaining('Notifications')]),
    );
    await nav.getByRole('link', { name: /Watch rota/ }).click();
    await page.getByRole('heading', { name: 'Watch rota', exact: true }).waitFor();
    expect(page.url()).toBe(`${service.url}/rota`);

    // What the service says about the seeded rota, to compare the page with.
    const { body: rotas } = await api<RotaSummary[]>(service.url, admin, '/rotas');
    const demo = rotas.find((r) => r.name === DEMO_ROTA);
    expect(demo).toBeDefined();
    expect(demo!.scope.kind).toBe('fleet');
    const { body: users } = await api<ListPage<User>>(service.url, admin, '/users?limit=100');
    const responder = users.items.find((u) => u.email === 'responder@saltmarsh.example')!;
    const designer = users.items.find((u) => u.email === 'designer@saltmarsh.example')!;
    expect(demo!.onWatch?.userId).toBe(responder.id);

    const card = page.locator('wc-rota-card', { hasText: DEMO_ROTA });
    await card.getByRole('heading', { name: DEMO_ROTA }).waitFor();
    await card.getByText('Whole fleet').waitFor();
    await card.getByText(`Time zone ${demo!.timeZone}`).waitFor();
    const onWatch = card.getByRole('region', { name: 'On watch now' });
    await onWatch.getByText(responder.displayName).waitFor();
    expect(await card.locator('ol.chain li').first().textContent()).toContain(responder.displayName);

    // Tomorrow 10:00 to 18:00 on the rota's clock, typed as the form asks.
    const zone = demo!.timeZone;
    const day = DateTime.now().setZone(zone).plus({ days: 1 }).startOf('day');
    const fromLocal = day.set({ hour: 10 }).toFormat("yyyy-MM-dd'T'HH:mm");
    const toLocal = day.set({ hour: 18 }).toFormat("yyyy-MM-dd'T'HH:mm");
    const form = card.locator('wc-override-form');
    await form.getByText(`read in the rota's time zone, ${zone}`).waitFor();
    await form.getByLabel(/^From/).fill(fromLocal);
    await form.getByLabel(/^To/).fill(toLocal);
    await form.getByRole('combobox', { name: /On watch instead/ }).click({ force: true }); // the floating label lies over the select until it opens
    await page.getByRole('option', { name: designer.displayName }).click();
    await form.getByLabel('Note').fill('Swapped for the yard drill');
    await form.getByRole('button', { name: 'Add override' }).click();

    const listed = card.locator('[data-override-id]', { hasText: 'Swapped for the yard drill' });
    await listed.waitFor();
    expect(await listed.textContent()).toContain(designer.displayName);
    const { body: after } = await api<RotaSummary[]>(service.url, admin, '/rotas');
    const override = after.find((r) => r.id === demo!.id)!.overrides.find((o) => o.note === 'Swapped for the yard drill');
    expect(override?.userId).toBe(designer.id);
    // The instants are those the rota's clock reads, whatever the browser's own zone.
    expect(Date.parse(override!.from)).toBe(DateTime.fromISO(fromLocal, { zone }).toMillis());
    expect(Date.parse(override!.to)).toBe(DateTime.fromISO(toLocal, { zone }).toMillis());
    await page.screenshot({ path: path.join(screenshotDir, 'watch-rota.png'), fullPage: true });
  });

  it('registers a webhook receiver on loopback and shows its secret once', async () => {
    await page.getByRole('navigation', { name: 'Main' }).getByRole('link', { name: /Notifications/ }).click();
    await page.getByRole('heading', { name: 'Notifications', exact: true }).waitFor();
    await page.getByRole('heading', { name: 'Notification rules' }).waitFor();
    await page.locator('tr[data-severity="critical"]').waitFor();

    const register = page.locator('form[aria-labelledby="new-webhook-title"]');
    // The form explains plain http to another machine before the service is asked.
    await register.getByLabel(/Address/).fill('http://hooks.example.org/whitecap');
    await register.getByRole('button', { name: 'Register endpoint' }).click();
    await register.getByText('Plain http:// is accepted only for a receiver on this machine').waitFor();

    await register.getByLabel(/Address/).fill(receiverUrl);
    await register.getByLabel('Description').fill('browser test receiver');
    await register.getByRole('button', { name: 'Register endpoint' }).click();
    const secretPanel = page.locator('section.secret');
    await secretPanel.getByText('This is the only time the secret is shown.').waitFor();
    const secret = ((await secretPanel.locator('.secret-value').textContent()) ?? '').trim();
    expect(secret.length).toBeGreaterThanOrEqual(16);
    await secretPanel.getByRole('button', { name: /Copy secret/ }).waitFor();
    const row = page.locator('table[aria-label="Webhook endpoints"] tr', { hasText: receiverUrl });
    await row.waitFor();
    expect(await row.textContent()).toContain(`…${secret.slice(-4)}`);
    await page.screenshot({ path: path.join(screenshotDir, 'webhook-secret-once.png'), fullPage: true });

    await secretPanel.getByRole('button', { name: 'I have stored it' }).click();
    await secretPanel.waitFor({ state: 'detached' });
    expect(await page.content()).not.toContain(secret);
    // Not from the service either: the list keeps only the hint.
    const { body: hooks } = await api<WebhookEndpoint[]>(service.url, admin, '/webhooks');
    expect(JSON.stringify(hooks)).not.toContain(secret);
    expect(hooks.find((h) => h.url === receiverUrl)?.secretHint).toBe(secret.slice(-4));
  });

  it('opens the delivery log with its filters', async () => {
    const log = page.locator('#deliveries');
    await log.getByRole('heading', { name: 'Delivery log' }).waitFor();
    await log.locator('table[aria-label="Deliveries"]').waitFor();
    await Promise.all([
      page.waitForResponse((r) => r.url().includes('/api/deliveries') && r.url().includes('status=failed') && r.status() === 200),
      log.locator('mat-button-toggle', { hasText: 'Failed' }).click(),
    ]);
    await log.locator('mat-button-toggle', { hasText: 'Any outcome' }).click();
    await log.locator('mat-paginator').waitFor();
    await page.screenshot({ path: path.join(screenshotDir, 'notifications.png'), fullPage: true });

    const foreign = requested.filter((u) => !u.startsWith(service.url) && !u.startsWith('data:') && !u.startsWith('blob:'));
    expect(foreign).toEqual([]);
    expect(pageErrors).toEqual([]);
  });

  it('lets a responder read the delivery log and the rules, without the administrator controls', async () => {
    const context = await browser.newContext({ viewport: { width: 1440, height: 1000 } });
    const responderPage = await context.newPage();
    try {
      await signInOnPage(responderPage, service.url, 'responder@saltmarsh.example', 'saltmarsh-responder');
      await responderPage.goto(`${service.url}/notifications`);
      await responderPage.getByRole('heading', { name: 'Delivery log' }).waitFor();
      await responderPage.getByText('Administrators can retry a failed delivery by hand.').waitFor();
      await responderPage.getByText('Administrators change these rules.').waitFor();
      expect(await responderPage.getByRole('heading', { name: 'Webhook endpoints' }).count()).toBe(0);
      await responderPage.goto(`${service.url}/rota`);
      await responderPage.locator('wc-rota-card', { hasText: DEMO_ROTA }).waitFor();
      expect(await responderPage.getByRole('button', { name: 'Add override' }).count()).toBe(0);
    } finally {
      await context.close();
    }
  });

  it('explains an acknowledge link Whitecap never made, signed out, without sending anyone to sign in', async () => {
    const context = await browser.newContext({ viewport: { width: 1024, height: 800 } });
    const visitor = await context.newPage();
    const posts: string[] = [];
    visitor.on('request', (r) => {
      if (r.method() === 'POST') posts.push(r.url());
    });
    try {
      await visitor.goto(`${service.url}/ack/not-a-link-whitecap-made`, { waitUntil: 'networkidle' });
      await visitor.getByRole('heading', { name: 'Acknowledge an alert' }).waitFor();
      await visitor.getByRole('alert').getByText('This link is not valid').waitFor();
      expect(visitor.url()).toBe(`${service.url}/ack/not-a-link-whitecap-made`);
      expect(await visitor.title()).toBe('Acknowledge an alert · Whitecap');
      expect(await visitor.getByRole('button', { name: 'Acknowledge' }).count()).toBe(0);
      // Opening the page uses nothing: no acknowledge, no session refresh.
      expect(posts).toEqual([]);
      await visitor.screenshot({ path: path.join(screenshotDir, 'ack-link-not-valid.png'), fullPage: true });
    } finally {
      await context.close();
    }
  });
});
