/**
 * The page when the station's status answers late: the websocket's snapshot of a finished session
 * (with its analysis settings) can arrive before GET /api/status, which is what builds the
 * Analysis form's input fields. Seen once on a loaded machine as "Cannot set properties of null
 * (setting 'value')". Here the status reply is held back on purpose (the browser's own request
 * routing), with the real daemon and the real page in headless Chromium.
 */
import { join } from 'node:path';
import type { Browser } from 'playwright-core';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { launch } from '../helpers/browser.js';
import { api, startDaemon, tempDir, type DaemonProcess } from '../helpers/daemon.js';

describe('page with a late station status', () => {
  let browser: Browser;
  let daemon: DaemonProcess;
  beforeAll(async () => {
    browser = await launch();
    daemon = await startDaemon(['--scenario', 'oxide-fn', '--fast', '--no-autostart', '--data', join(tempDir(), 'data')]);
  });
  afterAll(async () => {
    await browser?.close();
    await daemon?.stop();
  });

  it('shows a finished session, then fills the Analysis form from it once the status arrives, without an error', { timeout: 60_000 }, async () => {
    const r = await api(daemon.url, 'POST', '/api/run', { plan: { kind: 'linear', start: 0, stop: 9, points: 46, repeat: 2, compliance: 1e-3 } });
    expect(r.status).toBe(201);
    for (let k = 0; k < 300 && (await api(daemon.url, 'GET', '/api/status')).json.running; k++) await new Promise((res) => setTimeout(res, 50));
    const page = await browser.newPage({ viewport: { width: 1400, height: 1000 } });
    const errors: string[] = [];
    page.on('pageerror', (e) => errors.push(`page error: ${e.message}`));
    page.on('console', (m) => {
      if (m.type() === 'error') errors.push(`console error: ${m.text()}`);
    });
    // Every status request is held until the session has been drawn (the page asks at start and
    // again when the snapshot names a session): a gate, not a delay, so a loaded machine that
    // draws slowly cannot let the status in first.
    let release: () => void = () => undefined;
    const gate = new Promise<void>((res) => {
      release = res;
    });
    await page.route('**/api/status', async (route) => {
      await gate;
      await route.continue();
    });
    await page.goto(daemon.url);
    // The session is drawn while the status is still on its way.
    await page.waitForFunction(() => (window as any).__plumbline?.store.session !== null && (window as any).__plumbline.store.allSweeps.length > 0, undefined, {
      timeout: 20_000,
    });
    const modelsEarly = await page.evaluate(() => (document.querySelector('#model-select') as HTMLSelectElement).options.length);
    expect(modelsEarly).toBe(0);
    release();
    // Then the status arrives and the form is filled with the session's thickness (7 nm for this scenario's film).
    await page.waitForFunction(() => (document.querySelector('#model-select') as HTMLSelectElement).options.length > 0, undefined, { timeout: 20_000 });
    await page.waitForTimeout(300);
    const thickness = await page.inputValue('#analysis-form [name="thickness"]');
    const session = (await api(daemon.url, 'GET', `/api/sessions/${r.json.session}`)).json.events.find((e: any) => e.type === 'session');
    expect(Number(thickness)).toBeCloseTo(session.analysis.inputs.thickness * 1e9, 6);
    expect(errors).toEqual([]);
    await page.close();
  });
});
