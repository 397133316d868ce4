/**
 * The live page end to end, in real headless Chromium (Debian's package, driven by playwright-core)
 * against the real daemon (built CLI, child process) on the built-in simulated instrument.
 * Screenshots go to test-artifacts/ for a person to look at.
 */
import { mkdirSync, readFileSync } from 'node:fs';
import { join } from 'node:path';
import { chromium, type Browser, type Page } from 'playwright-core';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { formatParameter } from '../../protocols/display-units.js';
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

async function openPage(browser: Browser, url: string): Promise<{ page: Page; errors: string[] }> {
  const page = await browser.newPage({ viewport: { width: 1600, height: 1250 } });
  const errors: string[] = [];
  page.on('pageerror', (e) => errors.push(e.message));
  await page.goto(url);
  await page.waitForFunction(() => (window as any).__plumbline && document.querySelector('#conn')?.getAttribute('data-state') === 'live');
  await page.waitForFunction(() => (document.querySelector('#model-select') as HTMLSelectElement).options.length > 0);
  return { page, errors };
}

/** The value and uncertainty printed for a parameter, back as numbers (display units). */
async function shownParameter(page: Page, key: string): Promise<{ text: string; value: number; stdErr: number }> {
  const text = (await page.textContent(`tr[data-param="${key}"] td.value .num`)) ?? '';
  const m = /^\(?(-?[\d.]+) ± ([\d.]+)\)?(?:e(-?\d+))?$/.exec(text);
  if (!m) throw new Error(`cannot read '${text}'`);
  const scale = m[3] ? 10 ** Number(m[3]) : 1;
  return { text, value: Number(m[1]) * scale, stdErr: Number(m[2]) * scale };
}

/**
 * A full-page screenshot for a person to look at. Chromium leaves the page scrolled oddly after a
 * full-page capture (a later click can miss), so the page is scrolled back to the top.
 */
async function snap(page: Page, name: string): Promise<void> {
  await page.screenshot({ path: join(ARTIFACTS, name), fullPage: true });
  await page.evaluate(() => window.scrollTo(0, 0));
}

/** Drags across a fraction of the linearized plot's width. */
async function dragWindow(page: Page, from: number, to: number): Promise<void> {
  const box = await page.locator('#lin-chart .u-over').boundingBox();
  if (!box) throw new Error('no linearized plot');
  await page.mouse.move(box.x + box.width * from, box.y + box.height * 0.5);
  await page.mouse.down();
  await page.mouse.move(box.x + box.width * to, box.y + box.height * 0.5, { steps: 8 });
  await page.mouse.up();
}

/**
 * A browser and a daemon of the built CLI with these arguments (on a fresh data folder), for the
 * tests of one describe block: started before them, closed after.
 */
function browserAndDaemon(args: string[]): { browser: Browser; daemon: DaemonProcess } {
  const both = {} as { browser: Browser; daemon: DaemonProcess };
  beforeAll(async () => {
    both.browser = await launch();
    both.daemon = await startDaemon([...args, '--fast', '--no-autostart', '--data', join(tempDir(), 'data')]);
  });
  afterAll(async () => {
    await both.browser?.close();
    await both.daemon?.stop();
  });
  return both;
}

describe('live page in headless Chromium', () => {
  let browser: Browser;
  let daemon: DaemonProcess;
  let data: string;
  let firstSession = '';

  beforeAll(async () => {
    browser = await launch();
    data = join(tempDir(), 'data');
    daemon = await startDaemon(['--scenario', 'oxide-fn', '--fast', '--no-autostart', '--data', data]);
  });
  afterAll(async () => {
    await browser?.close();
    await daemon?.stop();
  });

  it("shows a run end to end: the charts hold the streamed points, the parameters are the daemon's, in the trade's units", async () => {
    const { page, errors } = await openPage(browser, daemon.url);
    // Idle: nothing to stop or abort.
    expect(await page.isDisabled('#abort')).toBe(true);
    expect(await page.isDisabled('#run-stop')).toBe(true);
    await startFromPage(page, { start: '0', stop: '9', points: '46', repeat: '3', compliance: '0.001' });
    await page.waitForFunction(() => (window as any).__plumbline.store.runEnd !== null, undefined, { timeout: 30_000 });
    await page.waitForTimeout(300); // the last view and ranking
    const st = await pageState(page);
    firstSession = st.session as string;
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
    // The displayed barrier height is the daemon's final fit of sweep 3, within the printed rounding.
    const detail = await api(daemon.url, 'GET', `/api/sessions/${st.session}`);
    const fit = (detail.json.events as any[]).filter((e) => e.type === 'fit' && e.final && e.sweep === 3)[0].fit;
    const shown = await shownParameter(page, 'barrierHeight');
    expect(shown.text).toBe(formatParameter(fit.parameters.barrierHeight).text);
    expect(Math.abs(shown.value - fit.parameters.barrierHeight.value)).toBeLessThanOrEqual(fit.parameters.barrierHeight.stdErr);
    expect(await page.textContent('tr[data-param="barrierHeight"] td.value .unit')).toBe(' eV');
    // The linearized chart draws the daemon's view of the last sweep, in cm/MV on the x axis
    // (1/E: 1 m/V = 1e8 cm/MV, since 1 MV/cm = 1e8 V/m).
    const view = (await api(daemon.url, 'GET', `/api/sessions/${st.session}/sweeps/3/view`)).json.view;
    const drawn = await page.evaluate(() => {
      const l = (window as any).__plumbline.charts.lin;
      return { view: l.view, shown: l.shown, xLabel: l.plot.axes[0].label, yLabel: l.plot.axes[1].label };
    });
    expect(drawn.view.x).toEqual(view.x);
    expect(drawn.view.line).toEqual(view.line);
    drawn.shown.x.forEach((x: number, k: number) => expect(x / (view.x[k] * 1e8)).toBeCloseTo(1, 12));
    expect(drawn.xLabel).toBe('1/E (cm/MV)');
    expect(drawn.yLabel).toBe('J/E² ((A/cm²)/(MV/cm)²)');
    expect(await page.textContent('#lin-title')).toMatch(/Fowler–Nordheim/);
    // Every mechanism ranked is listed, and their weights sum to 1.
    const ranking = await page.evaluate(() => [...document.querySelectorAll('ol.ranking > li')].map((li) => (li as HTMLElement).dataset.model));
    const ranked = (detail.json.events as any[]).filter((e) => e.type === 'ranking').at(-1).ranking;
    expect(ranking).toEqual(ranked.map((e: any) => e.model));
    expect(ranked.reduce((a: number, e: any) => a + e.score, 0)).toBeCloseTo(1, 6);
    await snap(page, 'page-run-completed.png');
    // An earlier sweep picked shows its own ranking, not the latest one.
    const rankedSweeps = (detail.json.events as any[]).filter((e) => e.type === 'ranking').map((e) => e.sweep as number);
    expect(rankedSweeps.length).toBeGreaterThan(1);
    await page.evaluate((n) => (window as any).__plumbline.pickSweep(n), rankedSweeps[0]);
    await page.waitForTimeout(300);
    expect(await page.textContent('#ranking')).toMatch(new RegExp(`^Sweep ${rankedSweeps[0]}:`));
    await page.evaluate(() => (window as any).__plumbline.pickSweep(null));
    expect(errors).toEqual([]);
    await page.close();
  });

  it('after the run, a dragged window re-fits the sweep on screen; the journal keeps its fits', async () => {
    const { page, errors } = await openPage(browser, daemon.url);
    await page.waitForFunction(() => (window as any).__plumbline.store.views.size > 0 && (window as any).__plumbline.charts.lin.plot);
    const journalFits = () =>
      readFileSync(join(data, firstSession, 'journal.jsonl'), 'utf8')
        .split('\n')
        .filter((l) => l.includes('"type":"fit"')).length;
    const fitsBefore = journalFits();
    const before = await shownParameter(page, 'barrierHeight');
    const windowBefore = await page.evaluate(() => (window as any).__plumbline.charts.lin.view.window.bias);
    await dragWindow(page, 0.1, 0.45);
    await page.waitForFunction(() => (window as any).__plumbline.store.reanalysis !== null, undefined, { timeout: 10_000 });
    await page.waitForTimeout(200);
    const re = await page.evaluate(() => {
      const s = (window as any).__plumbline.store;
      return { analysis: s.reanalysis.analysis, fit: s.reanalysis.fits.get(3).fit, view: (window as any).__plumbline.charts.lin.view };
    });
    // The new window is what was dragged (high fields: the left of the 1/E axis), not the old one.
    expect(typeof re.analysis.window).toBe('object');
    expect(re.analysis.window.from).toBeGreaterThan(windowBefore[0] + 0.5);
    expect(re.view.window.bias[0]).toBeGreaterThanOrEqual(re.analysis.window.from - 1e-9);
    // The parameters shown are the re-analysis', and they differ from the recorded ones.
    const after = await shownParameter(page, 'barrierHeight');
    expect(after.text).toBe(formatParameter(re.fit.parameters.barrierHeight).text);
    expect(after.text).not.toBe(before.text);
    expect(re.fit.line.n).toBeLessThan(40);
    expect(await page.textContent('#params-source')).toMatch(/Re-analysis .* journal's fits are unchanged/);
    // Kept beside the journal; the journal itself gained no fit.
    const kept = readFileSync(join(data, firstSession, 'reanalysis.jsonl'), 'utf8')
      .trim()
      .split('\n')
      .map((l) => JSON.parse(l));
    expect(kept.at(-1).fits.find((f: any) => f.sweep === 3).fit.parameters.barrierHeight.value).toBe(re.fit.parameters.barrierHeight.value);
    expect(journalFits()).toBe(fitsBefore);
    await snap(page, 'page-drag-after-run.png');

    // Another model from the Analysis form re-analyses the same sweeps with it.
    await page.selectOption('#model-select', 'poole-frenkel');
    await page.fill('#analysis-form [name="refractiveIndex"]', '1.46');
    await page.fill('#analysis-form [name="from"]', '');
    await page.fill('#analysis-form [name="to"]', '');
    await page.click('#analysis-apply');
    await page.waitForFunction(() => (window as any).__plumbline.store.reanalysis?.analysis.model === 'poole-frenkel', undefined, { timeout: 10_000 });
    await page.waitForTimeout(200);
    expect(await page.textContent('#lin-title')).toMatch(/Poole–Frenkel/);
    expect(await page.locator('tr[data-param="relativePermittivity"]').count()).toBe(1);
    // ε_r is dimensionless: no unit is printed.
    expect(await page.locator('tr[data-param="relativePermittivity"] td.value .unit').count()).toBe(0);
    expect(await page.evaluate(() => (window as any).__plumbline.charts.lin.plot.axes[0].label)).toBe('√E ((MV/cm)^½)');
    // Poole–Frenkel read on a Fowler–Nordheim oxide is not plausible: the page names the check
    // that decided it, as the daemon recorded it.
    const pf = await page.evaluate(() => {
      const s = (window as any).__plumbline.store;
      return s.reanalysis.fits.get(s.currentSweep())?.fit;
    });
    expect(pf.plausible).toBe(false);
    expect(pf.failed.length).toBeGreaterThan(0);
    expect(await page.textContent('#fit-warnings li.implausible')).toBe(`Not plausible for this mechanism: ${pf.failed[0]}.`);
    await snap(page, 'page-model-change-after-run.png');

    // A plain line through the readings has no physical parameter: its slope and intercept are
    // shown, in the units of the readings it was fitted to (current against bias: A/V and A).
    await page.selectOption('#model-select', 'linear');
    await page.click('#analysis-apply');
    await page.waitForFunction(() => (window as any).__plumbline.store.reanalysis?.analysis.model === 'linear', undefined, { timeout: 10_000 });
    await page.waitForTimeout(200);
    const line = await page.evaluate(() => (window as any).__plumbline.store.reanalysis.fits.get(3).fit);
    expect(line.parameters).toEqual({});
    expect(await page.textContent('tr[data-param="slope"] td.value .unit')).toBe(' A/V');
    expect(await page.textContent('tr[data-param="intercept"] td.value .unit')).toBe(' A');
    expect((await shownParameter(page, 'slope')).text).toBe(formatParameter({ value: line.line.slope, stdErr: line.line.slopeStdErr, unit: 'A/V' }).text);
    const axes = await page.evaluate(() => (window as any).__plumbline.charts.lin.plot.axes.slice(0, 2).map((a: { label: string }) => a.label));
    expect(axes).toEqual(['V (V)', 'I (A)']);
    expect(errors).toEqual([]);
    await page.close();
  });

  it('a past session opens read-only from its overview, and the picker loads any sweep', async () => {
    const { page, errors } = await openPage(browser, daemon.url);
    await page.waitForFunction(() => document.querySelectorAll('#sessions button').length > 0, undefined, { timeout: 15_000 });
    await page.click(`#sessions button:text("${firstSession}")`);
    await page.waitForFunction(() => (window as any).__plumbline.store.readOnly === true && (window as any).__plumbline.store.sweeps.size > 0);
    const st = await pageState(page);
    expect(st.session).toBe(firstSession);
    const rows = (await api(daemon.url, 'GET', `/api/sessions/${firstSession}/readings`)).json.rows as number[][];
    expect(Object.values(st.sweeps).reduce((a, s) => a + s.v.length, 0)).toBe(rows.length);
    expect(await page.isVisible('#readonly-badge')).toBe(true);
    expect(await page.locator('.caution[data-kind="read-only"]').count()).toBe(1);
    expect(await page.isDisabled('#abort')).toBe(true);
    // The envelope spans every sweep's currents at each bias.
    const env = await page.evaluate(() => (window as any).__plumbline.store.envelope);
    const top = Math.max(...rows.map((r) => Math.abs(r[5])));
    expect(Math.max(...env.hi.filter((x: number | null) => x !== null))).toBe(top);
    // Sweep 1 on demand: its readings and its recorded view.
    await page.fill('#sweep-pick', '1');
    await page.press('#sweep-pick', 'Enter');
    await page.waitForFunction(() => (window as any).__plumbline.charts.lin.view && (window as any).__plumbline.store.shownSweep === 1);
    await page.waitForTimeout(150);
    const view1 = (await api(daemon.url, 'GET', `/api/sessions/${firstSession}/sweeps/1/view`)).json.view;
    expect(await page.evaluate(() => (window as any).__plumbline.charts.lin.view.y)).toEqual(view1.y);
    expect(await page.textContent('#lin-title')).toMatch(/sweep 1/);
    await snap(page, 'page-read-only.png');
    await page.click('#back-live');
    await page.waitForFunction(() => (window as any).__plumbline.store.readOnly === false);
    expect(errors).toEqual([]);
    await page.close();
  });

  it('Esc typed in a text field never aborts; Esc outside one turns the output off at once', async () => {
    // On the scenario's own model: an earlier test may have left the station on another, whose fits
    // of this film drift and can end the run before the keys are pressed (seen once: Poole–Frenkel ε_r).
    expect(
      (await api(daemon.url, 'PUT', '/api/analysis', { model: 'fowler-nordheim', window: 'auto', inputs: { thickness: 7e-9, area: 1e-8, massRatio: 0.42 } }))
        .status,
    ).toBe(200);
    const { page } = await openPage(browser, daemon.url);
    await startFromPage(page, { start: '0', stop: '9', points: '200', repeat: '1000', compliance: '0.001' });
    await page.waitForFunction(() => (window as any).__plumbline.store.readingCount > 300 && (window as any).__plumbline.store.outputOn, undefined, {
      timeout: 30_000,
    });
    expect(await page.locator('.caution[data-kind="output on"]').count()).toBe(1);
    expect(await page.isDisabled('#abort')).toBe(false);
    // A note being typed: Esc leaves the field and says how to abort; the run goes on.
    await page.click('#note-form [name="text"]');
    await page.keyboard.type('probe re-landed');
    await page.keyboard.press('Escape');
    const count = await page.evaluate(() => (window as any).__plumbline.store.readingCount);
    await page.waitForFunction((n) => (window as any).__plumbline.store.readingCount > n + 100, count, { timeout: 10_000 });
    expect(await page.evaluate(() => (window as any).__plumbline.store.runEnd)).toBeNull();
    expect((await api(daemon.url, 'GET', '/api/status')).json.running).toBe(true);
    expect(await page.textContent('#control-msg')).toMatch(/does not abort/);
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
    await page.waitForTimeout(150);
    expect(await page.locator('.caution[data-kind="output on"]').count()).toBe(0);
    // Said in so many words: the output is off, and the instrument confirmed it.
    await page.waitForSelector('.caution[data-kind="output off"]', { timeout: 5_000 });
    expect(await page.textContent('.caution[data-kind="output off"]')).toMatch(/output is off, confirmed by the instrument: .*OUTP\?/);
    expect(await page.isDisabled('#abort')).toBe(true);
    // The interrupted sweep is not called live any more.
    expect(await page.textContent('#params')).not.toMatch(/\(live\)/);
    await snap(page, 'page-aborted.png');
    await page.close();
  });

  it('a model change during the run starts a new baseline, drawn as a break', async () => {
    // The run starts on Fowler–Nordheim (an earlier test left the station on another model).
    const fn = await api(daemon.url, 'PUT', '/api/analysis', {
      model: 'fowler-nordheim',
      window: { from: 5, to: 9 },
      inputs: { thickness: 7e-9, area: 1e-8, massRatio: 0.42 },
    });
    expect(fn.status).toBe(200);
    const { page, errors } = await openPage(browser, daemon.url);
    // Long sweeps and many of them, so the change lands in the middle of the run (a fast simulator
    // goes through a sweep in milliseconds; the run is aborted at the end of the test).
    const before = await page.evaluate(() => (window as any).__plumbline.store.session);
    await startFromPage(page, { start: '0', stop: '9', points: '100', repeat: '2000', compliance: '0.001' });
    // Two sweeps of the new run on the first baseline (the page holds the previous session until the new one starts).
    await page.waitForFunction(
      (old) => {
        const s = (window as any).__plumbline.store;
        return s.session !== old && s.drift.filter((d: any) => d.parameter === 'barrierHeight').length >= 2;
      },
      before,
      { timeout: 120_000 },
    );
    await page.selectOption('#model-select', 'poole-frenkel');
    await page.fill('#analysis-form [name="from"]', '');
    await page.fill('#analysis-form [name="to"]', '');
    await page.click('#analysis-apply');
    await page.waitForFunction(() => (window as any).__plumbline.store.drift.some((d: any) => d.parameter === 'relativePermittivity'), undefined, {
      timeout: 120_000,
    });
    await page.waitForTimeout(200);
    const drawn = await page.evaluate(() => {
      const s = (window as any).__plumbline.store;
      const d = (window as any).__plumbline.charts.drift;
      return { breaks: d.breaks, sweeps: d.drawnSweeps, drift: s.drift.map((x: any) => ({ sweep: x.sweep, parameter: x.parameter })), y: d.plot.axes[1].label };
    });
    const first = drawn.drift
      .filter((d: any) => d.parameter === 'relativePermittivity')
      .map((d: any) => d.sweep)
      .sort((a: number, b: number) => a - b)[0];
    expect(drawn.breaks.at(-1)).toMatchObject({ sweep: first, reason: 'now relative permittivity ε_r' });
    // Only the new baseline's parameter is plotted (a permittivity is never charted against a barrier).
    expect(drawn.sweeps.every((s: number) => s >= first)).toBe(true);
    expect(drawn.y).toBe('relative permittivity ε_r');
    expect(await page.textContent('#drift-state')).toMatch(/baseline restarted at sweep/);
    await snap(page, 'page-drift-new-baseline.png');
    // The run may end between the check and the click (the button then disables itself): only a
    // click that fails while the run still goes on is an error.
    if (!(await page.isDisabled('#abort'))) {
      await page.click('#abort', { timeout: 5000 }).catch(async (e) => {
        if (!(await page.isDisabled('#abort'))) throw e;
      });
    }
    await page.waitForFunction(() => (window as any).__plumbline.store.runEnd !== null, undefined, { timeout: 10_000 });
    expect(errors).toEqual([]);
    await page.close();
  }, 180_000);
});

describe('drift on the page', () => {
  const ctx = browserAndDaemon(['--scenario', 'oxide-fn-trapping']);

  it('a drifting device shows the drift caution and the run ends on it', async () => {
    const { page } = await openPage(ctx.browser, ctx.daemon.url);
    await startFromPage(page, { start: '0', stop: '9', points: '91', repeat: '12', compliance: '0.001' });
    await page.waitForSelector('.caution[data-kind="drift limit"]', { timeout: 30_000 });
    await page.waitForFunction(() => (window as any).__plumbline.store.runEnd !== null, undefined, { timeout: 10_000 });
    const st = await pageState(page);
    expect(st.runEnd?.outcome).toBe('aborted-drift');
    expect(await page.textContent('.caution[data-kind="drift limit"]')).toMatch(/barrierHeight drifted/);
    // The baseline itself climbed (charge trapped every sweep): its own caution stays beside the drift warnings.
    expect(await page.textContent('.caution[data-kind="baseline trend"]')).toMatch(
      /barrierHeight trends through the baseline sweeps 1–5: \+0\.0\d+ eV per sweep/,
    );
    // The drift chart holds one point per finished sweep, labelled with the parameter and its unit.
    const chart = await page.evaluate(() => {
      const d = (window as any).__plumbline.charts.drift;
      return { n: d.plot.data[0].length, y: d.plot.axes[1].label };
    });
    expect(chart.n).toBe(Object.keys(st.sweeps).length);
    expect(chart.y).toBe('barrier height φ_B (eV)');
    await page.waitForTimeout(200);
    await snap(page, 'page-drift.png');
    await page.close();
  });
});

describe('a breakdown on the page, after the run has ended', () => {
  // A weak 7 nm oxide that breaks down near 8.75 V and stays shorted.
  const ctx = browserAndDaemon(['--scenario', 'oxide-breakdown']);
  let sweepSession = '';

  /** The text of the breakdown caution on the page, once the run on screen has ended. */
  async function breakdownCaution(page: Page): Promise<string> {
    await page.waitForFunction(() => (window as any).__plumbline.store.runEnd !== null, undefined, { timeout: 30_000 });
    await page.waitForTimeout(200);
    expect(await page.locator('.caution[data-kind="breakdown"]').count()).toBe(1);
    return (await page.textContent('.caution[data-kind="breakdown"]')) ?? '';
  }

  it('a sweep through breakdown: with the output confirmed off, the caution no longer says it is being turned off', async () => {
    const { page, errors } = await openPage(ctx.browser, ctx.daemon.url);
    await startFromPage(page, { start: '0', stop: '12', points: '121', repeat: '1', compliance: '0.001' });
    const text = await breakdownCaution(page);
    sweepSession = (await pageState(page)).session as string;
    const events = (await api(ctx.daemon.url, 'GET', `/api/sessions/${sweepSession}`)).json.events as any[];
    const end = events.filter((e) => e.type === 'output').at(-1);
    expect(end).toMatchObject({ on: false, queried: true, confirmed: true });
    // The journal keeps the words of the moment; the page, after the end, reads them in the past.
    expect(events.find((e) => e.type === 'caution' && e.kind === 'breakdown-confirmed').message).toMatch(/The output is being turned off\./);
    expect(text).not.toMatch(/is being turned off/);
    expect(text).toMatch(/The output was turned off; confirmed by the instrument\./);
    // The rest of the caution is the daemon's, the lab's rules included.
    expect(text).toMatch(/Treat the device as broken; follow your lab's rules before touching the fixture\./);
    await snap(page, 'page-breakdown-ended.png');
    expect(errors).toEqual([]);
    await page.close();
  });

  it('the sweep opened read-only from the Sessions list shows how the output ended, from the journal', async () => {
    const { page, errors } = await openPage(ctx.browser, ctx.daemon.url);
    await page.click(`#sessions button:text-is("${sweepSession}")`);
    await page.waitForFunction(() => (window as any).__plumbline.store.readOnly === true);
    await page.waitForTimeout(200);
    const events = (await api(ctx.daemon.url, 'GET', `/api/sessions/${sweepSession}`)).json.events as any[];
    const end = events.filter((e) => e.type === 'output').at(-1);
    expect(end).toMatchObject({ on: false, queried: true, confirmed: true });
    // As the live view showed it at the end: ℹ OUTPUT OFF, with the instrument's answer.
    expect(await page.locator('.caution[data-kind="output off"]').count()).toBe(1);
    expect(await page.textContent('.caution[data-kind="output off"]')).toBe(
      `ℹ output offThe run ended with the output off, confirmed by the instrument: ${end.reason}.`,
    );
    expect(await page.textContent('.caution[data-kind="breakdown"]')).toMatch(/The output was turned off; confirmed by the instrument\./);
    expect(await page.locator('.caution[data-kind="compliance"]').count()).toBe(1);
    await snap(page, 'page-breakdown-read-only.png');
    expect(errors).toEqual([]);
    await page.close();
  });

  it('a destructive test with a check after it: once ended, its caution no longer says the output goes on once more', async () => {
    const { page, errors } = await openPage(ctx.browser, ctx.daemon.url);
    const r = await api(ctx.daemon.url, 'POST', '/api/run', {
      acknowledgeDestructive: true,
      plan: { kind: 'voltage-ramp', start: 0, stop: 12, step: 0.1, stepTime: 0.05, compliance: 0.001, useVoltage: 1 },
      // A device of its own (the sweep before left the one on the chuck shorted).
      device: { device: 'PL09-A5' },
    });
    expect(r.status).toBe(201);
    await page.waitForFunction((id) => (window as any).__plumbline.store.session === id, r.json.session, { timeout: 10_000 });
    const text = await breakdownCaution(page);
    const events = (await api(ctx.daemon.url, 'GET', `/api/sessions/${r.json.session}`)).json.events as any[];
    expect(events.find((e) => e.type === 'caution' && e.kind === 'breakdown-confirmed').message).toMatch(/The output goes on once more/);
    expect(events.filter((e) => e.type === 'output').at(-1)).toMatchObject({ on: false, queried: true, confirmed: true });
    expect(text).not.toMatch(/goes on once more|keep away from the fixture until the run has ended/);
    expect(text).toMatch(
      /The check after the test at the use voltage 1 V came next; the run has ended since\. The output was turned off; confirmed by the instrument\./,
    );
    expect(text).toMatch(/Follow your lab's rules before touching the fixture\./);
    expect(errors).toEqual([]);
    await page.close();
  });

  it('a constant-voltage stress: held intervals drawn against stress time from the journal; the drift panel says no sweep was fitted', async () => {
    const { page, errors } = await openPage(ctx.browser, ctx.daemon.url);
    const r = await api(ctx.daemon.url, 'POST', '/api/run', {
      acknowledgeDestructive: true,
      plan: { kind: 'constant-voltage', stress: 5, duration: 120, sampleEvery: 1, compliance: 0.001, sense: { start: 0, stop: 2, points: 5, every: 60 } },
      device: { device: 'PL09-A6' },
    });
    expect(r.status).toBe(201);
    await page.waitForFunction((id) => (window as any).__plumbline.store.session === id, r.json.session, { timeout: 10_000 });
    await page.waitForFunction(() => (window as any).__plumbline.store.runEnd !== null, undefined, { timeout: 30_000 });
    await page.waitForTimeout(200);
    // The Fowler–Nordheim model has a parameter; the stress intervals are simply not sweeps.
    expect(await page.textContent('#drift-state')).toMatch(/^nothing to chart: no sweep of this run gave a parameter/);
    // A held interval, picked, is drawn as current against stress time in the linearized panel's
    // place: the journal's readings, each at the stress time journaled when its interval opened
    // plus the time since the interval's first reading.
    const events = (await api(ctx.daemon.url, 'GET', `/api/sessions/${r.json.session}`)).json.events as any[];
    const held = events.filter((e) => e.type === 'sweep-start' && e.held);
    const sense = events.filter((e) => e.type === 'sweep-start' && !e.held);
    expect(held.length).toBeGreaterThanOrEqual(2);
    expect(sense.length).toBeGreaterThanOrEqual(1);
    expect(held[0].held).toEqual({ bias: 5, stressTime: 0 });
    // The second interval opens after 60 s of stress (one sense sweep in between, not counted).
    expect(Math.abs(held[1].held.stressTime - 60)).toBeLessThan(2);
    await page.evaluate((n) => (window as any).__plumbline.pickSweep(n), held[1].sweep);
    await page.waitForTimeout(300);
    expect(await page.isVisible('#held-chart')).toBe(true);
    expect(await page.isVisible('#lin-chart')).toBe(false);
    expect(await page.textContent('#lin-title')).toBe(`Stress at 5 V: current against stress time, sweep ${held[1].sweep}`);
    expect(await page.textContent('#held-note')).toMatch(/every reading at 5 V, so there is no current–voltage curve to fit\. The \d+ held intervals/);
    const readings = (await api(ctx.daemon.url, 'GET', `/api/sessions/${r.json.session}/readings?sweep=${held[1].sweep}`)).json.rows as number[][];
    const drawn = await page.evaluate((k) => {
      const u = (window as any).__plumbline.charts.held.plot;
      const d = u.data[k + 1];
      return { x: Array.from(d[0]) as number[], y: Array.from(d[1]) as (number | null)[], xLabel: u.axes[0].label };
    }, held.indexOf(held[1]));
    expect(drawn.xLabel).toBe('stress time (s)');
    expect(drawn.x.length).toBe(readings.length);
    readings.forEach((rd, k) => {
      expect(drawn.x[k]).toBeCloseTo(held[1].held.stressTime + (rd[3] - readings[0][3]) / 1000, 6);
      // A reading at compliance is marked, not joined (the bias was not held there).
      if (rd[6] & 1) expect(drawn.y[k]).toBeNull();
      else expect(drawn.y[k]).toBe(Math.abs(rd[5]));
    });
    // A sense sweep, picked, is a curve against the bias again.
    await page.evaluate((n) => (window as any).__plumbline.pickSweep(n), sense[0].sweep);
    await page.waitForTimeout(300);
    expect(await page.isVisible('#held-chart')).toBe(false);
    expect(await page.textContent('#lin-title')).toMatch(/^Linearized: /);
    expect(errors).toEqual([]);
    await page.close();
  });
});

describe('a drift watch with nothing to follow, on the page', () => {
  // The simulated solar cell's default analysis is a straight line, whose fit gives no parameter.
  const ctx = browserAndDaemon(['--scenario', 'solar-cell']);

  it('the caution says so and the drift panel names the settings instead of waiting for a baseline', async () => {
    const { page, errors } = await openPage(ctx.browser, ctx.daemon.url);
    await startFromPage(page, { start: '-0.1', stop: '0.72', points: '83', repeat: '7', compliance: '0.5' });
    await page.waitForFunction(() => (window as any).__plumbline.store.runEnd !== null, undefined, { timeout: 30_000 });
    await page.waitForTimeout(200);
    expect(await page.locator('.caution[data-kind="drift not watched"]').count()).toBe(1);
    expect(await page.textContent('.caution[data-kind="drift not watched"]')).toMatch(/no drift is watched.*analysis model/);
    const state = (await page.textContent('#drift-state')) ?? '';
    expect(state).toMatch(/^not watched: .*analysis model/);
    expect(state).not.toMatch(/charted once the baseline sweeps are in/);
    expect(errors).toEqual([]);
    await page.close();
  }, 60_000);
});

describe('a station other than the default', () => {
  const ctx = browserAndDaemon(['--scenario', 'solar-cell']);

  it("the forms hold the station's own plan, limits and analysis", async () => {
    const { page, errors } = await openPage(ctx.browser, ctx.daemon.url);
    const status = (await api(ctx.daemon.url, 'GET', '/api/status')).json;
    const value = (sel: string) => page.inputValue(sel);
    expect(Number(await value('#plan-form [name="start"]'))).toBe(status.plan.start);
    expect(Number(await value('#plan-form [name="stop"]'))).toBe(status.plan.stop);
    expect(Number(await value('#plan-form [name="points"]'))).toBe(status.plan.points);
    expect(Number(await value('#plan-form [name="compliance"]'))).toBe(status.plan.compliance);
    expect(status.plan).toMatchObject({ start: -0.1, stop: 0.72, points: 83, compliance: 0.5 });
    expect(await page.textContent('#limits-hint')).toContain(`compliance ≤ ${status.limits.maxCompliance} A`);
    expect(await page.inputValue('#model-select')).toBe(status.analysis.model);
    expect(Number(await value('#analysis-form [name="temperature"]'))).toBeCloseTo(status.analysis.inputs.temperature, 6);
    // An empty compliance says which field and what it needs, not schema text.
    await page.fill('#plan-form [name="compliance"]', '');
    await page.click('#run-start');
    expect(await page.textContent('#control-msg')).toMatch(/^compliance \(A\): enter the current limit .*at most 1 A/);
    expect((await api(ctx.daemon.url, 'GET', '/api/status')).json.running).toBe(false);
    await snap(page, 'page-solar-station-forms.png');
    expect(errors).toEqual([]);
    await page.close();
  });

  it('an illuminated cell shows its figures of merit and single-diode fit with uncertainties', async () => {
    const { page, errors } = await openPage(ctx.browser, ctx.daemon.url);
    await startFromPage(page, { repeat: '2', compliance: '0.5' });
    await page.waitForFunction(() => (window as any).__plumbline.store.runEnd !== null, undefined, { timeout: 60_000 });
    await page.waitForSelector('#solar-panel:not([hidden])');
    await page.waitForTimeout(200);
    const st = await pageState(page);
    const events = (await api(ctx.daemon.url, 'GET', `/api/sessions/${st.session}`)).json.events as any[];
    const solar = events.filter((e) => e.type === 'fit' && e.final && e.sweep === 2)[0].solar;
    // What the page prints is the daemon's figure, rounded as the CLI and the report round it.
    for (const key of ['isc', 'jsc', 'voc', 'pmax', 'fillFactor', 'efficiency']) {
      const text = await page.textContent(`#solar tr[data-param="${key}"] td.value .num`);
      expect(text, key).toBe(formatParameter(solar.figures[key], key).text);
    }
    expect(await page.textContent('#solar tr[data-param="jsc"] td.value .unit')).toBe(' mA/cm²');
    expect(await page.textContent('#solar tr[data-param="efficiency"] td.value .unit')).toBe(' %');
    expect(await page.locator('#solar tr[data-param="fillFactor"] td.value .unit').count()).toBe(0);
    for (const key of ['photocurrent', 'saturationCurrent', 'idealityFactor', 'seriesResistance', 'shuntResistance']) {
      expect(await page.locator(`#solar tr[data-param="${key}"]`).count(), key).toBe(1);
    }
    // The simulated cell's own single-diode parameters (config/scenarios/solar-cell.json) are
    // recovered within 4σ (the simulator adds its instrument's noise).
    const truth = { photocurrent: 0.14, idealityFactor: 1.3, seriesResistance: 0.05, shuntResistance: 200 };
    for (const [k, v] of Object.entries(truth)) {
      const p = solar.model.parameters[k];
      expect(Math.abs(p.value - v), `${k} ${p.value} ± ${p.stdErr}`).toBeLessThan(4 * p.stdErr + 1e-9);
    }
    // FF = P_max / (I_sc · V_oc) and η = P_max / (G · A), G = 1000 W/m², A = 4 cm².
    expect(solar.figures.fillFactor.value).toBeCloseTo(solar.figures.pmax.value / (solar.figures.isc.value * solar.figures.voc.value), 12);
    expect(solar.figures.efficiency.value).toBeCloseTo(solar.figures.pmax.value / (1000 * 4e-4), 12);
    // The chart draws the daemon's model curve and the maximum-power point.
    const drawn = await page.evaluate(() => (window as any).__plumbline.charts.solar.plot.data[2]);
    expect(drawn[0]).toEqual(solar.curve.v);
    expect(drawn[1]).toEqual(solar.curve.i);
    await snap(page, 'page-solar-cell.png');
    expect(errors).toEqual([]);
    await page.close();
  });
});
