// The designer's workbench in a real Chromium against the real service, database and
// broker: two tractors on design revision 2 (process noise set too low) publish; a
// designer runs a retune study on that cohort over the last 24 h, reads the caution, the
// estimated Q and the pole chart, makes a draft revision from it, and exports one
// tractor's residuals as CSV; a viewer cannot open the workbench.
import fs from 'node:fs';
import path from 'node:path';
import type { Browser, BrowserContext, Page } from 'playwright-core';
import { demoDeviceSecret } from '../../ingest/src/demo/saltmarsh';
import type { DesignSummary, FleetResponse, RetuneStudy } from '../../shared/src/api/api-types';
import { publishSamples } from '../../simulators/src/index';
import { api, signIn, type Session } from '../support/api';
import { launchBrowser, screenshotDir, signInOnPage } from '../support/browser';
import { createTestDatabase, type TestDatabase } from '../support/database';
import { runCli, startService, type ServiceHandle } from '../support/service';

jest.setTimeout(240_000);

const SAMPLES_EACH = 2_000;

async function waitFor<T>(what: string, probe: () => Promise<T | null | undefined | false>, timeoutMs = 60_000): Promise<T> {
  const deadline = Date.now() + timeoutMs;
  while (Date.now() < deadline) {
    const v = await probe();
    if (v) return v;
    await new Promise((r) => setTimeout(r, 250));
  }
  throw new Error(`timed out waiting for ${what}`);
}

describe('the designer’s workbench in the dashboard', () => {
  let db: TestDatabase;
  let service: ServiceHandle;
  let browser: Browser;
  let context: BrowserContext;
  let page: Page;
  let designer: Session;
  let studyId = 0;
  const requested: string[] = [];
  const pageErrors: string[] = [];

  beforeAll(async () => {
    db = await createTestDatabase('browser_workbench');
    await runCli('ingest/cli/seed.ts', [], { WHITECAP_DATABASE_URL: db.url });
    service = await startService({ WHITECAP_DATABASE_URL: db.url, WHITECAP_STATUS_EVERY_MS: '200', WHITECAP_SWEEP_EVERY_MS: '200' });
    const mqttUrl = `mqtt://127.0.0.1:${service.mqttPort}`;
    // Two tractors of the cohort on revision 2, whose process noise is set too low; the last sample is now.
    for (const [unit, seed] of [['tractor-33', 7], ['tractor-34', 8]] as const) {
      await publishSamples({
        url: mqttUrl, unit, secret: demoDeviceSecret(unit), estimator: 'position',
        kind: 'tractor-position', revision: 2, count: SAMPLES_EACH, clock: 'model', batchSize: 50, seed,
      });
    }
    designer = await signIn(service.url, 'designer@saltmarsh.example', 'saltmarsh-designer');
    await waitFor('the samples of both tractors stored', async () => {
      const { body } = await api<FleetResponse>(service.url, designer, '/fleet?q=tractor-3&limit=50');
      const stored = (unit: string) => body.items.find((e) => e.unitKey === unit)?.samplesTotal ?? 0;
      return stored('tractor-33') >= SAMPLES_EACH && stored('tractor-34') >= SAMPLES_EACH;
    });
    browser = await launchBrowser();
    context = await browser.newContext({ viewport: { width: 1440, height: 1000 }, acceptDownloads: true });
    page = await context.newPage();
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

  it('runs a study on the revision 2 tractor cohort over the last 24 h and lands on its page, caution first', async () => {
    await signInOnPage(page, service.url, 'designer@saltmarsh.example', 'saltmarsh-designer');
    const nav = page.getByRole('navigation', { name: 'Main' });
    await nav.getByRole('link', { name: /Workbench/ }).click();
    await page.getByRole('heading', { name: 'Workbench', exact: true }).waitFor();
    expect(page.url()).toBe(`${service.url}/workbench`);

    const form = page.locator('wc-study-form');
    await form.getByRole('combobox', { name: /Cohort/ }).click({ force: true }); // the floating label lies over the select until it opens
    await page.getByRole('option', { name: /^tractor-position rev 2 · .* · 8 estimators$/ }).click();
    await form.getByText('8 estimators run this revision').waitFor();
    await form.locator('mat-button-toggle', { hasText: 'Last 24 h' }).click();
    await form.getByRole('button', { name: 'Run study' }).click();
    await page.waitForURL(/\/workbench\/studies\/\d+$/, { timeout: 120_000 }).catch(async (err) => {
      await page.screenshot({ path: path.join(screenshotDir, 'workbench-run-failed.png'), fullPage: true });
      throw new Error(`${err}\nform says: ${await form.textContent()}\npage errors: ${pageErrors.join('\n')}`);
    });
    studyId = Number(page.url().split('/').pop());

    const { status, body: study } = await api<RetuneStudy>(service.url, designer, `/studies/${studyId}`);
    expect(status).toBe(200);
    expect(study.design.designKey).toBe('tractor-position');
    expect(study.design.revision).toBe(2);
    await page.getByRole('heading', { level: 1 }).waitFor();
    await page.getByText(`${study.samples.toLocaleString('en-GB')} from ${study.estimators.length}`).waitFor();

    // The caution stands in its own note, above the results, in the service's words.
    const caution = page.getByRole('note', { name: 'Caution' });
    await caution.waitFor();
    expect(study.caution.length).toBeGreaterThan(40);
    expect((await caution.textContent())?.replace(/\s+/g, ' ')).toContain(study.caution.replace(/\s+/g, ' '));
    expect(await caution.isVisible()).toBe(true);

    // Estimated Q beside the assumed one, of the same size (one row per process-noise input).
    const estimatedQ = page.getByRole('table', { name: 'Estimated Q' });
    await estimatedQ.waitFor();
    expect(await estimatedQ.locator('tbody tr').count()).toBe(study.assumed.Q.length);
    await page.getByRole('table', { name: 'Assumed Q' }).waitFor();
    await page.getByText(/Q determined|Q not determined/).first().waitFor();

    // The poles before and after, drawn on a canvas.
    await page.locator('[data-chart="poles"] canvas').waitFor();
    await page.getByRole('table', { name: 'Estimator poles' }).waitFor();
  });

  it('makes a draft revision from the study and shows its number', async () => {
    const create = page.getByRole('button', { name: 'Create draft revision' });
    expect(await create.isEnabled()).toBe(true);
    await create.click();
    const shown = page.locator('[data-testid="draft-revision"]');
    await shown.waitFor();
    const revision = Number(await shown.textContent());
    expect(Number.isInteger(revision)).toBe(true);
    expect(revision).toBeGreaterThan(2);
    await waitFor('the button to disable', async () => !(await create.isEnabled()));

    const { body: study } = await api<RetuneStudy>(service.url, designer, `/studies/${studyId}`);
    expect(study.draftRevisionId).not.toBeNull();
    const { body: designs } = await api<{ items: DesignSummary[] }>(service.url, designer, '/designs');
    const draft = designs.items.flatMap((d) => d.revisions).find((r) => r.id === study.draftRevisionId);
    expect(draft?.revision).toBe(revision);
    expect(draft?.status).toBe('draft');

    await page.waitForTimeout(500); // let the charts finish their first frame
    await page.screenshot({ path: path.join(screenshotDir, 'workbench-study.png'), fullPage: true });

    // The printed report: no navigation or buttons, the caution at the top and again at the end.
    await page.emulateMedia({ media: 'print' });
    try {
      expect(await page.getByRole('navigation', { name: 'Main' }).isVisible()).toBe(false);
      expect(await page.getByRole('button', { name: 'Print report' }).isVisible()).toBe(false);
      expect(await page.getByRole('note', { name: 'Caution' }).count()).toBe(2);
      await page.screenshot({ path: path.join(screenshotDir, 'workbench-study-print.png'), fullPage: true });
    } finally {
      await page.emulateMedia({ media: 'screen' });
    }
  });

  it('lists the study on the workbench and exports one tractor’s residuals as CSV with a row count', async () => {
    await page.getByRole('navigation', { name: 'Breadcrumb' }).getByRole('link', { name: 'Workbench' }).click();
    await page.locator(`tr[data-study-id="${studyId}"]`).waitFor();
    await page.locator(`tr[data-study-id="${studyId}"]`).getByText('Draft made').waitFor();

    const panel = page.locator('wc-residual-export');
    await panel.getByLabel('Find estimators').fill('tractor-33');
    await panel.getByRole('checkbox', { name: /tractor-33 \/ position/ }).check();
    await panel.getByText('1 estimator chosen').waitFor();
    await panel.locator('mat-button-toggle', { hasText: 'Last 24 h' }).click();
    const downloading = page.waitForEvent('download');
    await panel.getByRole('button', { name: 'Download CSV' }).click();
    const download = await downloading;
    const file = await download.path();
    const lines = fs.readFileSync(file, 'utf8').split(/\r?\n/).filter((l) => l.trim() && !l.startsWith('#'));
    expect(lines.length - 1).toBeGreaterThanOrEqual(SAMPLES_EACH);
    expect(download.suggestedFilename()).toMatch(/\.csv$/);
    const saved = panel.getByRole('status').filter({ hasText: 'Saved ' });
    await saved.waitFor();
    expect((await saved.textContent())?.replace(/\s+/g, ' ')).toContain(`${(lines.length - 1).toLocaleString('en-GB')} rows`);
    await page.screenshot({ path: path.join(screenshotDir, 'workbench.png'), fullPage: true });

    const foreign = requested.filter((u) => !u.startsWith(service.url) && !u.startsWith('data:') && !u.startsWith('blob:'));
    expect(foreign).toEqual([]);
    expect(pageErrors).toEqual([]);
  });

  it('keeps a viewer out of the workbench: no entry in the navigation, and the fleet instead', async () => {
    const viewerContext = await browser.newContext({ viewport: { width: 1440, height: 1000 } });
    const viewerPage = await viewerContext.newPage();
    try {
      await signInOnPage(viewerPage, service.url, 'viewer@saltmarsh.example', 'saltmarsh-viewer');
      expect(await viewerPage.getByRole('navigation', { name: 'Main' }).getByRole('link', { name: /Workbench/ }).count()).toBe(0);
      await viewerPage.goto(`${service.url}/workbench`);
      await viewerPage.waitForURL(`${service.url}/fleet`);
      await viewerPage.getByText(/cannot use the designer's workbench/).waitFor();
    } finally {
      await viewerContext.close();
    }
  });
});
