/**
 * The page in real headless Chromium (Debian's package, driven by playwright-core): launching it,
 * opening the page with every page error AND every console error collected (a TypeError thrown in
 * a draw callback shows up only in the console), and screenshots for a person to look at.
 */
import { mkdirSync } from 'node:fs';
import { join } from 'node:path';
import { chromium, type Browser, type Page } from 'playwright-core';
import { PROJECT_ROOT } from './reference.js';

export const ARTIFACTS = join(PROJECT_ROOT, 'test-artifacts');

export function launch(): Promise<Browser> {
  return chromium.launch({
    executablePath: '/usr/bin/chromium',
    // No background traffic: this machine's network is closed.
    args: ['--disable-gpu', '--disable-background-networking', '--disable-component-update', '--no-first-run', '--disable-sync'],
  });
}

/**
 * Opens the page and waits until it is live with its forms filled. `errors` collects uncaught
 * page errors and console messages of level error, each with where it came from.
 */
export async function openPage(browser: Browser, url: string): Promise<{ page: Page; errors: string[] }> {
  const page = await browser.newPage({ viewport: { width: 1600, height: 1250 } });
  const errors: string[] = [];
  page.on('pageerror', (e) => errors.push(`page error: ${e.message}`));
  page.on('console', (m) => {
    if (m.type() === 'error') errors.push(`console error: ${m.text()}`);
  });
  await page.goto(url);
  await page.waitForFunction(() => (window as any).__plumbline && document.querySelector('#conn')?.getAttribute('data-state') === 'live');
  await page.waitForFunction(() => (document.querySelector('#model-select') as HTMLSelectElement).options.length > 0);
  return { page, errors };
}

/** A full-page screenshot in test-artifacts/ (the page is scrolled back to the top after it). */
export async function snap(page: Page, name: string): Promise<void> {
  mkdirSync(ARTIFACTS, { recursive: true });
  await page.screenshot({ path: join(ARTIFACTS, name), fullPage: true });
  await page.evaluate(() => window.scrollTo(0, 0));
}
