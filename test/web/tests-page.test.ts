/**
 * Breakdown tests and adaptive sweeps on the live page, end to end: the real daemon (built CLI,
 * child process) on the simulated `oxide-wearout` instrument (a 7 nm oxide that wears out and
 * breaks), the real page in headless Chromium. The page must never throw or log an error while it
 * draws such runs — their use-condition checks are one-reading sweeps with no fit.
 */
import { join } from 'node:path';
import type { Browser } from 'playwright-core';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { launch, openPage } from '../helpers/browser.js';
import { api, startDaemon, tempDir, type DaemonProcess } from '../helpers/daemon.js';

describe('breakdown tests and adaptive sweeps on the page', () => {
  let browser: Browser;
  let daemon: DaemonProcess;
  beforeAll(async () => {
    browser = await launch();
    daemon = await startDaemon(['--scenario', 'oxide-wearout', '--fast', '--no-autostart', '--data', join(tempDir(), 'data')]);
  });
  afterAll(async () => {
    await browser?.close();
    await daemon?.stop();
  });

  it('sweeps with no fit (one-reading use-condition checks; a destroyed device with no point on the plot) draw without a page or console error', async () => {
    const { page, errors } = await openPage(browser, daemon.url);
    const r = await api(daemon.url, 'POST', '/api/run', {
      plan: { kind: 'voltage-ramp', start: 0, stop: 15, step: 0.25, stepTime: 0.02, compliance: 1e-2, useVoltage: 1 },
      device: { device: 'NF1' },
    });
    expect(r.status).toBe(201);
    await page.waitForFunction((id) => (window as any).__plumbline.store.session === id && (window as any).__plumbline.store.runEnd !== null, r.json.session, { timeout: 60_000 });
    await page.waitForTimeout(300);
    // The journal holds sweeps whose final fit is null: the checks at the use voltage.
    const events = (await api(daemon.url, 'GET', `/api/sessions/${r.json.session}`)).json.events as any[];
    const noFit = events.filter((e) => e.type === 'fit' && e.final && e.fit === null).map((e) => e.sweep);
    expect(noFit.length).toBeGreaterThanOrEqual(1);
    // Each of them, picked, shows its reason instead of a plot, with no error.
    for (const sweep of noFit) {
      await page.evaluate((n) => (window as any).__plumbline.pickSweep(n), sweep);
      await page.waitForTimeout(150);
      expect(await page.isVisible('#lin-error')).toBe(true);
      expect(await page.textContent('#lin-error')).toMatch(new RegExp(`^Sweep ${sweep}: `));
    }
    await page.evaluate(() => (window as any).__plumbline.pickSweep(null));
    // The device is destroyed now: a sweep on it reads only its short (every reading at
    // compliance: 0.5 V over the broken film's 200 Ω is 2.5 mA), so its linearized view holds no
    // point at all and there is no fit.
    const after = await api(daemon.url, 'POST', '/api/run', { plan: { kind: 'linear', start: 0.5, stop: 2, points: 11, repeat: 2, compliance: 1e-3 } });
    expect(after.status).toBe(201);
    await page.waitForFunction((id) => (window as any).__plumbline.store.session === id && (window as any).__plumbline.store.runEnd !== null, after.json.session, { timeout: 30_000 });
    await page.waitForTimeout(300);
    // Following the latest sweep: the reason is said, and no plot of an earlier session stands
    // under this sweep's title.
    const fit2 = (await api(daemon.url, 'GET', `/api/sessions/${after.json.session}`)).json.events.find((e: any) => e.type === 'fit' && e.final && e.sweep === 2);
    expect(fit2.fit).toBeNull();
    expect(await page.textContent('#lin-error')).toBe(`Sweep 2: ${fit2.error}.`);
    expect(await page.isVisible('#lin-error')).toBe(true);
    expect(await page.evaluate(() => (window as any).__plumbline.charts.lin.plot)).toBeNull();
    // Picked, each sweep's recorded view comes from the journal: a view without a single point.
    for (const sweep of [1, 2]) {
      await page.evaluate((n) => (window as any).__plumbline.pickSweep(n), sweep);
      await page.waitForTimeout(150);
      expect(await page.evaluate((n) => (window as any).__plumbline.store.views.get(n)?.x.length, sweep)).toBe(0);
      expect(await page.textContent('#lin-error')).toMatch(new RegExp(`^Sweep ${sweep}: model 'fowler-nordheim' has 0 usable points`));
      expect(await page.evaluate(() => (window as any).__plumbline.charts.lin.plot)).toBeNull();
      expect(await page.textContent('#lin-title')).toMatch(new RegExp(`sweep ${sweep}$`));
    }
    expect(errors).toEqual([]);
    await page.close();
  });
});
