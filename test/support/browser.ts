// Debian's chromium driven by playwright-core (no browser download).
import fs from 'node:fs';
import path from 'node:path';
import { chromium, type Browser, type Page } from 'playwright-core';
import { projectRoot } from './service';

export const screenshotDir = path.join(projectRoot, '.output', 'screenshots');

export async function launchBrowser(): Promise<Browser> {
  fs.mkdirSync(screenshotDir, { recursive: true });
  return chromium.launch({
    executablePath: process.env.WHITECAP_CHROMIUM ?? '/usr/bin/chromium',
    headless: true,
    args: [
      '--no-sandbox',
      '--disable-gpu',
      '--disable-background-networking',
      '--disable-component-update',
      '--disable-sync',
      '--no-first-run',
      '--disable-quic',
    ],
  });
}

/** Signs in through the dashboard's own form and waits for the fleet overview. */
export async function signInOnPage(page: Page, url: string, email: string, password: string): Promise<void> {
  await page.goto(`${url}/`, { waitUntil: 'networkidle' });
  await page.getByLabel('E-mail').fill(email);
  await page.getByLabel('Password').fill(password);
  await page.getByRole('button', { name: 'Sign in' }).click();
  await page.getByRole('heading', { name: 'Fleet', exact: true }).waitFor();
}
