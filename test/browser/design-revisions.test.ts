// The design registry in a real Chromium against the real service and database: a
// designer opens the revision editor for tractor-position, uploads a JSON file with
// problems and sees each beside its matrix, uploads a corrected file, saves it as a draft,
// finds it in the design's list of revisions and opens it read-only.
import fs from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import type { Browser, Page } from 'playwright-core';
import { STUDY_CAUTION } from '../../ingest/src/workbench/study-service';
import { api, signIn } from '../support/api';
import { launchBrowser, screenshotDir, signInOnPage } from '../support/browser';
import { createTestDatabase, type TestDatabase } from '../support/database';
import { runCli, startService, type ServiceHandle } from '../support/service';

jest.setTimeout(120_000);

const tractor = {
  A: [[1, 0, 1, 0], [0, 1, 0, 1], [0, 0, 1, 0], [0, 0, 0, 1]],
  C: [[1, 0, 0, 0], [0, 1, 0, 0]],
  G: [[0.5, 0], [0, 0.5], [1, 0], [0, 1]],
  Q: [[0.02, 0], [0, 0.02]],
  R: [[0.25, 0], [0, 0.25]],
  dt: 1,
};

describe('design revisions in the dashboard', () => {
  let db: TestDatabase;
  let service: ServiceHandle;
  let browser: Browser;
  let page: Page;
  let dir: string;
  const requested: string[] = [];
  const pageErrors: string[] = [];

  beforeAll(async () => {
    db = await createTestDatabase('browser_design_revisions');
    await runCli('ingest/cli/seed.ts', [], { WHITECAP_DATABASE_URL: db.url });
    service = await startService({ WHITECAP_DATABASE_URL: db.url });
    dir = fs.mkdtempSync(path.join(os.tmpdir(), 'whitecap-design-files-'));
    browser = await launchBrowser();
    const context = await browser.newContext({ viewport: { width: 1440, height: 1000 } });
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
    if (dir) fs.rmSync(dir, { recursive: true, force: true });
  });

  async function uploadFile(name: string, content: unknown): Promise<void> {
    const file = path.join(dir, name);
    fs.writeFileSync(file, JSON.stringify(content, null, 2));
    const choosing = page.waitForEvent('filechooser');
    await page.getByRole('button', { name: 'Upload JSON' }).click();
    await (await choosing).setFiles(file);
  }

  it('opens the editor for tractor-position from the workbench, starting from revision 2 under the caution', async () => {
    await signInOnPage(page, service.url, 'designer@saltmarsh.example', 'saltmarsh-designer');
    await page.getByRole('navigation', { name: 'Main' }).getByRole('link', { name: /Workbench/ }).click();
    await page.getByRole('link', { name: 'Design registry' }).click();
    await page.getByRole('heading', { name: 'Design registry', exact: true }).waitFor();
    await page.getByRole('link', { name: 'Tractor planar position/velocity' }).click();
    await page.getByRole('heading', { name: 'Tractor planar position/velocity' }).waitFor();
    await page.getByRole('link', { name: 'New revision' }).click();
    await page.getByRole('heading', { name: 'New revision of Tractor planar position/velocity' }).waitFor();
    expect(page.url()).toMatch(/\/workbench\/designs\/\d+\/revisions\/new$/);

    const caution = page.getByRole('note', { name: 'Caution' });
    expect((await caution.textContent())?.replace(/\s+/g, ' ')).toContain(STUDY_CAUTION);
    await page.getByText('The editor holds revision 2 (released).').waitFor();
    expect(await page.getByLabel('Q row 1, column 1').inputValue()).toBe('0.0005');
  });

  it('shows the problems of an uploaded file beside their matrices', async () => {
    await uploadFile('tractor-bad.json', {
      ...tractor,
      C: [[1, 0, 0], [0, 1, 0]], // 2 × 3 for 4 states
      Q: [[0.02, 0.01], [0, 0.02]], // not symmetric
      R: [[0.25, 0.5], [0.5, 0.25]], // indefinite
      comment: 'from the bench laptop',
    });
    const report = page.getByTestId('upload-report');
    await report.getByText('tractor-bad.json (1 KB) is in the editor with 4 problems.').waitFor();
    await report.getByText(/"comment" is not part of a design model/).waitFor();
    const matrix = (key: string) => page.locator(`wc-matrix-editor[data-matrix="${key}"]`);
    await matrix('C').getByText('C is 2 × 3; it must be 2 × 4 (one row per measured component, one column per state)').waitFor();
    await matrix('Q').getByText(/^Q must be symmetric \(a covariance\): row 1, column 2 is 0\.01 but row 2, column 1 is 0/).waitFor();
    await matrix('R').getByText(/^R must be positive definite .* the smallest eigenvalue of R is -0\.25$/).waitFor();
    await page.getByTestId('check-summary').getByText('3 problems').waitFor();
    await page.screenshot({ path: path.join(screenshotDir, 'design-revision-problems.png'), fullPage: true });

    // Save refuses while problems show; nothing reaches the service.
    await page.getByRole('button', { name: 'Save as draft' }).click();
    await page.getByText('Not saved: the model still has 3 problems.').waitFor();
  });

  it('takes a corrected file, saves it as a draft and lists it with the design’s revisions', async () => {
    await uploadFile('tractor-good.json', { model: tractor, notes: 'Process noise between revisions 1 and 2.' });
    await page.getByTestId('upload-report').getByText('tractor-good.json (1 KB) is in the editor and passes every check.').waitFor();
    await page.getByTestId('check-summary').getByText('Passes the checks').waitFor();
    expect(await page.getByLabel('What changed, and why').inputValue()).toBe('Process noise between revisions 1 and 2.');
    await page.getByRole('button', { name: 'Save as draft' }).click();
    await page.waitForURL(/\/workbench\/designs\/\d+\?saved=\d+$/);
    await page.getByTestId('saved-revision').getByText('3', { exact: true }).waitFor();
    const row = page.locator('tr[data-revision="3"]');
    await row.getByText('Draft').waitFor();

    const designId = Number(new URL(page.url()).pathname.split('/').pop());
    const revisionId = Number(new URL(page.url()).searchParams.get('saved'));
    const designer = await signIn(service.url, 'designer@saltmarsh.example', 'saltmarsh-designer');
    const { status, body } = await api(service.url, designer, `/designs/${designId}/revisions/${revisionId}`);
    expect(status).toBe(200);
    expect(body).toMatchObject({ revision: 3, status: 'draft', model: tractor });
    expect(body.notes).toMatch(/^Process noise between revisions 1 and 2\./);
    await page.screenshot({ path: path.join(screenshotDir, 'design-revisions.png'), fullPage: true });

    await row.getByRole('link', { name: 'Revision 3' }).click();
    await page.getByRole('heading', { name: 'tractor-position revision 3' }).waitFor();
    await page.getByRole('table', { name: 'Q', exact: true }).waitFor();
    await page.getByRole('note', { name: 'Caution' }).waitFor();
    expect(await page.getByRole('button', { name: 'Release' }).count()).toBe(0); // administrators release
    await page.screenshot({ path: path.join(screenshotDir, 'design-revision.png'), fullPage: true });

    const foreign = requested.filter((u) => !u.startsWith(service.url) && !u.startsWith('data:') && !u.startsWith('blob:'));
    expect(foreign).toEqual([]);
    expect(pageErrors).toEqual([]);
  });
});
