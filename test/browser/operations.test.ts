// An operations journey in a real Chromium against the real service, database and broker:
// a mistuned estimator publishes, a responder follows it from the fleet overview to its
// charts and acknowledges its alert; a viewer sees the alert but cannot act on it.
import path from 'node:path';
import type { Browser, BrowserContext, Page } from 'playwright-core';
import { demoDeviceSecret } from '../../ingest/src/demo/saltmarsh';
import type { AlertList } from '../../shared/src/api/api-types';
import { publishSamples } from '../../simulators/src/index';
import { api, signIn } from '../support/api';
import { launchBrowser, screenshotDir, signInOnPage } from '../support/browser';
import { createTestDatabase, type TestDatabase } from '../support/database';
import { runCli, startService, type ServiceHandle } from '../support/service';

jest.setTimeout(180_000);

async function waitFor<T>(what: string, probe: () => Promise<T | null | undefined | false>, timeoutMs = 30_000): Promise<T> {
  const deadline = Date.now() + timeoutMs;
  while (Date.now() < deadline) {
    const v = await probe();
    if (v) return v;
    await new Promise((r) => setTimeout(r, 200));
  }
  throw new Error(`timed out waiting for ${what}`);
}

describe('operations in the dashboard', () => {
  let db: TestDatabase;
  let service: ServiceHandle;
  let browser: Browser;
  let responderContext: BrowserContext;
  let page: Page;
  const requested: string[] = [];
  const pageErrors: string[] = [];
  let acknowledgedAlertId = 0;

  beforeAll(async () => {
    db = await createTestDatabase('browser_operations');
    await runCli('ingest/cli/seed.ts', [], { WHITECAP_DATABASE_URL: db.url });
    service = await startService({ WHITECAP_DATABASE_URL: db.url, WHITECAP_STATUS_EVERY_MS: '200', WHITECAP_SWEEP_EVERY_MS: '200' });
    const mqttUrl = `mqtt://127.0.0.1:${service.mqttPort}`;
    // A healthy tractor, and one on design revision 2 whose process noise is set too low.
    await publishSamples({
      url: mqttUrl, unit: 'tractor-01', secret: demoDeviceSecret('tractor-01'), estimator: 'position',
      kind: 'tractor-position', revision: 1, count: 600, clock: 'model', batchSize: 50, seed: 3,
    });
    await publishSamples({
      url: mqttUrl, unit: 'tractor-33', secret: demoDeviceSecret('tractor-33'), estimator: 'position',
      kind: 'tractor-position', revision: 2, count: 600, clock: 'model', batchSize: 50, seed: 7,
    });
    const responder = await signIn(service.url, 'responder@saltmarsh.example', 'saltmarsh-responder');
    await waitFor('an open alert on tractor-33', async () => {
      const { body } = await api<AlertList>(service.url, responder, '/alerts?state=open&limit=50');
      return body.items.some((a) => a.unitKey === 'tractor-33');
    });
    browser = await launchBrowser();
    responderContext = await browser.newContext({ viewport: { width: 1440, height: 1000 } });
    page = await responderContext.newPage();
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
    await db?.drop();
  });

  it('shows a responder the fleet overview filled with the demo estimators, with counts and the heat map', async () => {
    await signInOnPage(page, service.url, 'responder@saltmarsh.example', 'saltmarsh-responder');
    expect(page.url()).toBe(`${service.url}/fleet`);
    await page.getByText('64 estimators').waitFor();
    const rows = page.locator('table[aria-labelledby="table-title"] tbody tr.row');
    await waitFor('a full first page of estimators', async () => (await rows.count()) === 25);
    // Every row shows its verdict as a shape and a word.
    const firstVerdict = rows.first().locator('wc-verdict-badge');
    expect(await firstVerdict.locator('svg[data-shape]').count()).toBe(1);
    expect((await firstVerdict.textContent())?.trim()).toMatch(/^(Consistent|Marginal|Inconsistent|Silent)$/);
    await page.locator('wc-fleet-heatmap canvas').first().waitFor();
    expect(await page.getByRole('navigation', { name: 'Main' }).getByRole('link').allTextContents()).toEqual([
      expect.stringContaining('Fleet'),
      expect.stringContaining('Alerts'),
      expect.stringContaining('Watch rota'),
      expect.stringContaining('Notifications'),
    ]);
    await page.screenshot({ path: path.join(screenshotDir, 'fleet-overview.png'), fullPage: true });
  });

  it('opens the mistuned estimator, whose NIS chart draws against its band', async () => {
    await page.getByLabel('Search unit or estimator').fill('tractor-33');
    const link = page.getByRole('link', { name: 'Open estimator tractor-33 position' });
    await link.click();
    await page.waitForURL(/\/estimators\/\d+$/);
    await page.getByRole('heading', { name: /tractor-33\s*\/\s*position/ }).waitFor();
    await page.locator('[data-chart="nis"] canvas').waitFor();
    await page.locator('[data-chart="histogram"] canvas').waitFor();
    expect(await page.locator('wc-verdict-badge').first().textContent()).toMatch(/Inconsistent|Marginal|Silent/);
    await page.getByText('Advisory.').waitFor();
    await page.getByText(/NIS window test|CUSUM drift|Whiteness/).first().waitFor();
    await page.waitForTimeout(500); // let the charts finish their first frame
    await page.screenshot({ path: path.join(screenshotDir, 'estimator-detail.png'), fullPage: true });
  });

  it('acknowledges an alert in the inbox and sees its state change', async () => {
    await page.getByRole('navigation', { name: 'Main' }).getByRole('link', { name: /Alerts/ }).click();
    await page.getByRole('heading', { name: 'Alerts', exact: true }).waitFor();
    const open = page.locator('a.open-alert', { hasText: /NIS window test|CUSUM drift|Whiteness|Silence/ }).first();
    await open.waitFor().catch(async (err) => {
      await page.screenshot({ path: path.join(screenshotDir, 'alert-inbox-failed.png'), fullPage: true });
      throw new Error(`${err}\npage errors: ${pageErrors.join('\n')}`);
    });
    await open.click();
    await page.waitForURL(/\/alerts\/\d+$/);
    acknowledgedAlertId = Number(page.url().split('/').pop());
    const acknowledge = page.getByRole('button', { name: 'Acknowledge' });
    await acknowledge.waitFor();
    await page.getByLabel('Note').fill('On it: tractor-33 runs design revision 2.');
    await acknowledge.click();
    await page.getByRole('status').filter({ hasText: 'Acknowledged.' }).waitFor();
    await acknowledge.waitFor({ state: 'detached' });
    const detail = page.locator('wc-alert-detail');
    await detail.locator('.state', { hasText: 'Acknowledged' }).waitFor();
    await detail.getByText('On it: tractor-33 runs design revision 2.').waitFor();
    // The list moves it from Open to Acknowledged.
    await page.locator('mat-button-toggle', { hasText: 'Acknowledged' }).click();
    await page.locator(`tr[data-alert-id="${acknowledgedAlertId}"]`).waitFor();
    await page.screenshot({ path: path.join(screenshotDir, 'alert-inbox.png'), fullPage: true });

    const foreign = requested.filter((u) => !u.startsWith(service.url) && !u.startsWith('data:') && !u.startsWith('blob:'));
    expect(foreign).toEqual([]);
    expect(pageErrors).toEqual([]);
  });

  it('shows a viewer the alert without actions, the API refuses the viewer with 403, and /admin sends them to the fleet', async () => {
    const context = await browser.newContext({ viewport: { width: 1440, height: 1000 } });
    const viewerPage = await context.newPage();
    try {
      await signInOnPage(viewerPage, service.url, 'viewer@saltmarsh.example', 'saltmarsh-viewer');
      const viewer = await signIn(service.url, 'viewer@saltmarsh.example', 'saltmarsh-viewer');
      const { body } = await api<AlertList>(service.url, viewer, '/alerts?state=open&limit=1');
      const alertId = body.items[0]?.id ?? acknowledgedAlertId;

      await viewerPage.goto(`${service.url}/alerts/${alertId}`);
      await viewerPage.getByText('Your role (viewer) can read alerts').waitFor();
      for (const name of ['Acknowledge', 'Add note', 'Resolve']) {
        expect(await viewerPage.getByRole('button', { name, exact: true }).count()).toBe(0);
      }
      const refused = await api(service.url, viewer, `/alerts/${alertId}/acknowledge`, { method: 'POST', body: {} });
      expect(refused.status).toBe(403);

      await viewerPage.goto(`${service.url}/admin`);
      await viewerPage.waitForURL(`${service.url}/fleet`);
      await viewerPage.getByText('Your role (viewer) cannot administer Whitecap').waitFor();
    } finally {
      await context.close();
    }
  });
});
