// Debian's chromium driven by playwright-core (no browser download).
import fs from 'node:fs';
import path from 'node:path';
import { chromium, type Browser } from 'playwright-core';
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
