/**
 * The live page end to end, in real headless Chromium (Debian's package, driven by playwright-core)
 * against the real daemon (built CLI, child process) on the built-in simulated instrument.
 * Screenshots go to test-artifacts/ for a person to look at.
 */
import { mkdirSync } from 'node:fs';
import { join } from 'node:path';
import { chromium, type Browser, type Page } from 'playwright-core';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { PROJECT_ROOT } from '../helpers/reference.js';
import { api, startDaemon, tempDir, type DaemonProcess } from '../helpers/daemon.js';

const ARTIFACTS = join(PROJECT_ROOT, 'test-artifacts');
mkdirSync(ARTIFACTS, { recursive: true });

async function launch(): Promise<Browser> {
  return chromium.launch({
    executablePath: '/usr/bin/chromium',
    // No background traffic: this machine's network is closed (see the env notes).
    args: ['--disable-gpu', '--disable-background-networking', '--disable-component-update', '--no-first-run', '--disable-sync'],
  });
}

interface PageState {
  readings: number;
  sweeps: Record<number, { v: number[]; i: number[] }>;
  runEnd: { outcome: string } | null;
  session: string | null;
}

function pageState(page: Page): Promise<PageState> {
  return page.evaluate(() => {
    const s = (window as any).__plumbline.store;
    const sweeps: Record<number, { v: number[]; i: number[] }> = {};
    for (const [k, v] of s.sweeps) sweeps[k] = { v: v.v, i: v.i };
    return { readings: s.readingCount, sweeps, runEnd: s.runEnd, session: s.session };
  });
}

async function startFromPage(page: Page, plan: Record<string, string>): Promise<void> {
  for (const [k, v] of Object.entries(plan)) await page.fill(`#plan-form [name="${k}"]`, v);
  await page.click('#run-start');
}

describe('live page in headless Chromium', () => {
  let browser: Browser;
  let daemon: DaemonProcess;
  let data: string;

  beforeAll(async () => {
    browser = await launch();
    data = join(tempDir(), 'data');
    daemon = await startDaemon(['--scenario', 'oxide-fn', '--fast', '--no-autostart', '--data', data]);
  });
  afterAll(async () => {
    await browser?.close();
    await daemon?.stop();
  });

  it('shows a run end to end: the charts hold the streamed points, the parameters are the daemon\'s', async () => {
    const page = await browser.newPage({ viewport: { width: 1600, height: 1250 } });
    const errors: string[] = [];
    page.on('pageerror', (e) => errors.push(e.message));
    await page.goto(daemon.url);
    await page.waitForFunction(() => (window as any).__plumbline && document.querySelector('#conn')?.getAttribute('data-state') === 'live');
    await startFromPage(page, { start: '0', stop: '9', points: '46', repeat: '3', compliance: '0.001' });
    await page.waitForFunction(() => (window as any).__plumbline.store.runEnd !== null, undefined, { timeout: 30_000 });
    await page.waitForTimeout(300); // the last view and ranking
    const st = await pageState(page);
    expect(st.runEnd?.outcome).toBe('completed');
    // Every reading the daemon journaled is in the page, in order, with the same numbers.
    const rd = await api(daemon.url, 'GET', `/api/sessions/${st.session}/readings`);
    const rows = rd.json.rows as number[][];
    expect(rows).toHaveLength(3 * 46);
    for (const sweep of [1, 2, 3]) {
      const mine = rows.filter((r) => r[1] === sweep);
      expect(st.sweeps[sweep].v).toEqual(mine.map((r) => r[4]));
      expect(st.sweeps[sweep].i).toEqual(mine.map((r) => r[5]));
    }
    // The raw chart draws those numbers (|I| on the log axis).
    const chartSweep3 = await page.evaluate(() => (window as any).__plumbline.charts.raw.data[3]);
    expect(chartSweep3[0]).toEqual(st.sweeps[3].v);
    expect(chartSweep3[1]).toEqual(st.sweeps[3].i.map((i) => (Math.abs(i) > 0 ? Math.abs(i) : null)));
    // The displayed barrier height is the daemon's final fit of sweep 3, as printed (4 significant digits).
    const detail = await api(daemon.url, 'GET', `/api/sessions/${st.session}`);
    const fit = (detail.json.events as any[]).filter((e) => e.type === 'fit' && e.final && e.sweep === 3)[0].fit;
    const shown = await page.textContent('tr[data-param="barrierHeight"] td.value .num');
    expect(shown).toBe(`${fit.parameters.barrierHeight.value.toPrecision(4)} ± ${fit.parameters.barrierHeight.stdErr.toExponential(1)}`);
    // The linearized chart draws the daemon's view of the last sweep.
    const view = (await api(daemon.url, 'GET', `/api/sessions/${st.session}/sweeps/3/view`)).json.view;
    const drawn = await page.evaluate(() => (window as any).__plumbline.charts.lin.view);
    expect(drawn.x).toEqual(view.x);
    expect(drawn.line).toEqual(view.line);
    expect(await page.textContent('#lin-title')).toMatch(/Fowler–Nordheim/);
    await page.screenshot({ path: join(ARTIFACTS, 'page-run-completed.png'), fullPage: true });
    expect(errors).toEqual([]);
    await page.close();
  });

  it('a past session opens read-only from the journal', async () => {
    const page = await browser.newPage({ viewport: { width: 1600, height: 1250 } });
    await page.goto(daemon.url);
    await page.waitForFunction(() => document.querySelectorAll('#sessions button').length > 0, undefined, { timeout: 15_000 });
    const id = await page.textContent('#sessions button');
    await page.click('#sessions button');
    await page.waitForFunction(() => (window as any).__plumbline.store.readOnly === true && (window as any).__plumbline.store.sweeps.size > 0);
    const st = await pageState(page);
    expect(st.session).toBe(id);
    const rows = (await api(daemon.url, 'GET', `/api/sessions/${id}/readings`)).json.rows as number[][];
    expect(Object.values(st.sweeps).reduce((a, s) => a + s.v.length, 0)).toBe(rows.length);
    expect(await page.isVisible('#readonly-badge')).toBe(true);
    expect(await page.locator('.caution[data-kind="read-only"]').count()).toBe(1);
    expect(await page.isDisabled('#abort')).toBe(true);
    await page.screenshot({ path: join(ARTIFACTS, 'page-read-only.png'), fullPage: true });
    await page.click('#back-live');
    await page.waitForFunction(() => (window as any).__plumbline.store.readOnly === false);
    await page.close();
  });

  it('the abort control (Esc) turns the output off at once', async () => {
    const page = await browser.newPage({ viewport: { width: 1600, height: 1250 } });
    await page.goto(daemon.url);
    await page.waitForFunction(() => document.querySelector('#conn')?.getAttribute('data-state') === 'live');
    await startFromPage(page, { start: '0', stop: '9', points: '200', repeat: '1000', compliance: '0.001' });
    await page.waitForFunction(() => (window as any).__plumbline.store.readingCount > 300 && (window as any).__plumbline.store.outputOn, undefined, { timeout: 30_000 });
    expect(await page.locator('.caution[data-kind="output on"]').count()).toBe(1);
    await page.keyboard.press('Escape');
    await page.waitForFunction(() => (window as any).__plumbline.store.runEnd !== null, undefined, { timeout: 10_000 });
    const st = await pageState(page);
    expect(st.runEnd?.outcome).toBe('aborted-user');
    const events = (await api(daemon.url, 'GET', `/api/sessions/${st.session}`)).json.events as any[];
    const off = events.filter((e) => e.type === 'output' && !e.on);
    // First the command on its way (sent), then the instrument's own answer to the output query.
    expect(off[0]).toMatchObject({ sent: true, confirmed: false });
    expect(off[0].reason).toMatch(/abort from the page/);
    expect(off.at(-1)).toMatchObject({ queried: true, confirmed: true });
    expect((await api(daemon.url, 'GET', '/api/status')).json.running).toBe(false);
    await page.waitForTimeout(100);
    expect(await page.locator('.caution[data-kind="output on"]').count()).toBe(0);
    await page.screenshot({ path: join(ARTIFACTS, 'page-aborted.png'), fullPage: true });
    await page.close();
  });
});

describe('drift caution on the page', () => {
  let browser: Browser;
  let daemon: DaemonProcess;
  beforeAll(async () => {
    browser = await launch();
    daemon = await startDaemon(['--scenario', 'oxide-fn-trapping', '--fast', '--no-autostart', '--data', join(tempDir(), 'data')]);
  });
  afterAll(async () => {
    await browser?.close();
    await daemon?.stop();
  });

  it('a drifting device shows the drift caution and the run ends on it', async () => {
    const page = await browser.newPage({ viewport: { width: 1600, height: 1250 } });
    await page.goto(daemon.url);
    await page.waitForFunction(() => document.querySelector('#conn')?.getAttribute('data-state') === 'live');
    await startFromPage(page, { start: '0', stop: '9', points: '91', repeat: '12', compliance: '0.001' });
    await page.waitForSelector('.caution[data-kind="drift limit"]', { timeout: 30_000 });
    await page.waitForFunction(() => (window as any).__plumbline.store.runEnd !== null, undefined, { timeout: 10_000 });
    const st = await pageState(page);
    expect(st.runEnd?.outcome).toBe('aborted-drift');
    expect(await page.textContent('.caution[data-kind="drift limit"]')).toMatch(/barrierHeight drifted/);
    // The drift chart holds one point per finished sweep.
    const n = await page.evaluate(() => (window as any).__plumbline.charts.drift.plot.data[0].length);
    expect(n).toBe(Object.keys(st.sweeps).length);
    await page.waitForTimeout(200);
    await page.screenshot({ path: join(ARTIFACTS, 'page-drift.png'), fullPage: true });
    await page.close();
  });
});
