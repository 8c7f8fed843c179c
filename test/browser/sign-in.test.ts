import path from 'node:path';
import type { Browser, Page } from 'playwright-core';
import { launchBrowser, screenshotDir } from '../support/browser';
import { createTestDatabase, type TestDatabase } from '../support/database';
import { runCli, startService, type ServiceHandle } from '../support/service';

jest.setTimeout(90_000);

describe('the dashboard, signed out', () => {
  let db: TestDatabase;
  let service: ServiceHandle;
  let browser: Browser;
  let page: Page;
  const requested: string[] = [];

  beforeAll(async () => {
    db = await createTestDatabase('browser_sign_in');
    await runCli('ingest/cli/seed.ts', [], { WHITECAP_DATABASE_URL: db.url });
    service = await startService({ WHITECAP_DATABASE_URL: db.url });
    browser = await launchBrowser();
    page = await browser.newPage();
    page.on('request', (r) => requested.push(r.url()));
  });
  afterAll(async () => {
    await browser?.close();
    await service?.stop();
    await db?.drop();
  });

  it('shows the Whitecap sign-in screen, with fonts served by the app itself', async () => {
    await page.goto(service.url + '/', { waitUntil: 'networkidle' });
    await page.getByRole('heading', { name: 'Sign in to Whitecap' }).waitFor();
    expect(page.url()).toBe(`${service.url}/sign-in`);
    expect(await page.title()).toBe('Sign in · Whitecap');
    await expect(page.getByLabel('E-mail').count()).resolves.toBe(1);
    await expect(page.getByLabel('Password').count()).resolves.toBe(1);

    await page.evaluate(() => document.fonts.ready);
    const roboto = await page.evaluate(() =>
      [...document.fonts].some((f) => f.family.replace(/"/g, '') === 'Roboto' && f.status === 'loaded'),
    );
    expect(roboto).toBe(true);
    const bodyFont = await page.evaluate(() => getComputedStyle(document.body).fontFamily);
    expect(bodyFont).toContain('Roboto');
    expect(requested.some((u) => /\.woff2($|\?)/.test(u))).toBe(true);

    const foreign = requested.filter((u) => !u.startsWith(service.url) && !u.startsWith('data:'));
    expect(foreign).toEqual([]);
    await page.screenshot({ path: path.join(screenshotDir, 'sign-in.png'), fullPage: true });
  });

  it('says what went wrong on a bad password and signs in a demo user', async () => {
    await page.getByLabel('E-mail').fill('responder@saltmarsh.example');
    await page.getByLabel('Password').fill('wrong-password');
    await page.getByRole('button', { name: 'Sign in' }).click();
    await expect(page.getByRole('alert').textContent()).resolves.toContain('do not match an active account');

    await page.getByLabel('Password').fill('saltmarsh-responder');
    await page.getByRole('button', { name: 'Sign in' }).click();
    await page.getByRole('heading', { name: 'Fleet', exact: true }).waitFor();
    expect(page.url()).toBe(`${service.url}/fleet`);
    await page.getByText('Ravi Castellan (on call)').waitFor();
    await page.getByText('Database: up').waitFor();
    await page.screenshot({ path: path.join(screenshotDir, 'signed-in.png'), fullPage: true });
  });

  it('keeps the session across a reload and ends it on sign-out', async () => {
    await page.reload({ waitUntil: 'load' });
    await page.getByRole('heading', { name: 'Fleet', exact: true }).waitFor();
    expect(page.url()).toBe(`${service.url}/fleet`);
    await page.getByRole('button', { name: 'Sign out' }).click();
    await page.getByRole('heading', { name: 'Sign in to Whitecap' }).waitFor();
    await page.goto(`${service.url}/alerts`, { waitUntil: 'load' });
    await page.getByRole('heading', { name: 'Sign in to Whitecap' }).waitFor();
    expect(page.url()).toBe(`${service.url}/sign-in?returnUrl=%2Falerts`);
  });
});
