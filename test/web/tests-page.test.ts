/**
 * Breakdown tests and adaptive sweeps on the live page, end to end: the real daemon (built CLI,
 * child process) on the simulated `oxide-wearout` instrument (a 7 nm oxide that wears out and
 * breaks), the real page in headless Chromium. The page must never throw or log an error while it
 * draws such runs — their use-condition checks are one-reading sweeps with no fit.
 */
import { join } from 'node:path';
import type { Browser } from 'playwright-core';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { formatParameter } from '../../protocols/display-units.js';
import { formatNumber } from '../../protocols/number-format.js';
import { launch, openPage, snap } from '../helpers/browser.js';
import { api, startDaemon, tempDir, type DaemonProcess } from '../helpers/daemon.js';

describe('breakdown tests and adaptive sweeps on the page', () => {
  let browser: Browser;
  let daemon: DaemonProcess;
  beforeAll(async () => {
    browser = await launch();
    // Real time, not --fast: a fast simulator lets a ramp's step times pass at once, and the test
    // must see the page while a breakdown test is still running.
    daemon = await startDaemon(['--scenario', 'oxide-wearout', '--no-autostart', '--data', join(tempDir(), 'data')]);
  });
  afterAll(async () => {
    await browser?.close();
    await daemon?.stop();
  });

  it("an adaptive sweep from the Run form: its fields, checked before sending, and each sweep's figures as the daemon journaled them", {
    timeout: 90_000,
  }, async () => {
    const { page, errors } = await openPage(browser, daemon.url);
    await page.selectOption('#plan-form [name="kind"]', 'adaptive');
    // Only the adaptive sweep's fields; no destructive-test caution.
    expect(await page.isVisible('#plan-form [name="maxPoints"]')).toBe(true);
    expect(await page.isVisible('#plan-form [name="targetParameter"]')).toBe(true);
    expect(await page.isVisible('#plan-form [name="points"]')).toBe(false);
    expect(await page.isVisible('#plan-form [name="step"]')).toBe(false);
    expect(await page.isVisible('#destructive-caution')).toBe(false);
    // A required field left empty is named, and nothing starts.
    await page.fill('#plan-form [name="maxPoints"]', '');
    await page.click('#run-start');
    expect(await page.textContent('#control-msg')).toBe('most points per sweep: enter a value');
    // Said just under the Run form, beside its Start button (not at the foot of the panel).
    expect(await page.evaluate(() => document.getElementById('control-msg')?.previousElementSibling?.id)).toBe('plan-form');
    expect((await api(daemon.url, 'GET', '/api/status')).json.running).toBe(false);
    // The target is chosen from the parameters the Analysis form's model gives, as the daemon
    // lists them (the same list it checks a plan against); another model, other choices.
    const target = '#plan-form select[name="targetParameter"]';
    const choices = () => page.$$eval(`${target} option`, (os) => os.map((o) => (o as HTMLOptionElement).value));
    const daemonList = async (model: string) =>
      ((await api(daemon.url, 'GET', '/api/status')).json.models as { id: string; parameters: string[] }[]).find((m) => m.id === model)?.parameters;
    const fn = await daemonList('fowler-nordheim');
    expect(fn).toContain('barrierHeight');
    expect(await choices()).toEqual(fn);
    expect(await page.inputValue(target)).toBe('barrierHeight');
    // Shown in the trade's words, with the key a plan file takes.
    expect(await page.$eval(`${target} option[value="barrierHeight"]`, (o) => o.textContent)).toBe('barrier height φ_B (barrierHeight)');
    await page.selectOption('#model-select', 'poole-frenkel');
    await page.click('#analysis-apply');
    await page.waitForFunction(
      (t) => [...document.querySelectorAll(`${t} option`)].some((o) => (o as HTMLOptionElement).value === 'relativePermittivity'),
      target,
    );
    expect(await choices()).toEqual(await daemonList('poole-frenkel'));
    expect(await choices()).not.toContain('barrierHeight');
    // A model with no parameter (a plain line) leaves nothing to aim at: said, and nothing starts.
    await page.selectOption('#model-select', 'linear');
    await page.click('#analysis-apply');
    await page.waitForFunction((t) => (document.querySelector(t) as HTMLSelectElement).value === '', target);
    await page.click('#run-start');
    expect(await page.textContent('#control-msg')).toMatch(/^target parameter: the linear fit gives no parameter to aim at/);
    expect((await api(daemon.url, 'GET', '/api/status')).json.running).toBe(false);
    await page.selectOption('#model-select', 'fowler-nordheim');
    await page.click('#analysis-apply');
    await page.waitForFunction((t) => (document.querySelector(t) as HTMLSelectElement).value === 'barrierHeight', target);
    for (const [k, v] of Object.entries({
      start: '0',
      stop: '10',
      maxPoints: '200',
      repeat: '3',
      compliance: '0.001',
      targetStdErr: '0.005',
    }))
      await page.fill(`#plan-form [name="${k}"]`, v);
    await page.selectOption(target, 'barrierHeight');
    await page.click('#run-start');
    await page.waitForFunction(() => (window as any).__plumbline.store.runEnd !== null && (window as any).__plumbline.store.adaptive.length === 3, undefined, {
      timeout: 60_000,
    });
    await page.waitForTimeout(300);
    const session = await page.evaluate(() => (window as any).__plumbline.store.session);
    const events = (await api(daemon.url, 'GET', `/api/sessions/${session}`)).json.events as any[];
    // The plan the daemon ran is the form's, in SI.
    expect(events[0].plan).toMatchObject({
      kind: 'adaptive',
      start: 0,
      stop: 10,
      maxPoints: 200,
      repeat: 3,
      compliance: 1e-3,
      target: { parameter: 'barrierHeight', stdErr: 0.005 },
    });
    const figures = events.filter((e) => e.type === 'adaptive-sweep');
    expect(figures).toHaveLength(3);
    for (const f of figures) {
      const cells = await page.$$eval(`#adaptive tr[data-sweep="${f.sweep}"] td`, (tds) => tds.map((td) => td.textContent));
      expect(cells[1]).toBe(String(f.readings));
      expect(cells[4]).toBe(f.parameter ? formatParameter(f.parameter, f.parameter.name).text : '—');
      expect(cells[5]).toBe(f.stopReason.replace(/-/g, ' '));
    }
    expect(await page.textContent('#adaptive table th:nth-child(5)')).toBe('barrier height φ_B (eV)');
    // The current plot joins an adaptive sweep's readings in bias order, not in the order taken
    // (its fill goes back and forth between levels); an up-down sweep keeps its order. Checked on
    // the page's own chart with readings taken 0, 8, 2, 9, 3 V.
    const drawn = await page.evaluate(() => {
      const raw = (window as any).__plumbline.charts.raw;
      const sweep = { v: [0, 8, 2, 9, 3], i: [1e-13, 1e-5, 1e-11, 1e-4, 1e-10], flags: [0, 0, 0, 0, 0] };
      const x = (byBias: boolean) => {
        raw.update(new Map([[1, sweep]]), true, null, byBias);
        return Array.from(raw.data[1][0]) as number[];
      };
      return { adaptive: x(true), other: x(false) };
    });
    expect(drawn.adaptive).toEqual([0, 2, 3, 8, 9]);
    expect(drawn.other).toEqual([0, 8, 2, 9, 3]);
    expect(await page.locator('#cautions .caution[data-kind="destructive test"]').count()).toBe(0);
    await snap(page, 'page-adaptive-sweep.png');
    // Opened later from the journal, the session shows the same figures.
    const live = await page.textContent('#adaptive');
    await page.evaluate((id) => (window as any).__plumbline.openSession(id), session);
    await page.waitForFunction(() => (window as any).__plumbline.store.readOnly === true);
    await page.waitForTimeout(150);
    expect(await page.textContent('#adaptive')).toBe(live);
    expect(errors).toEqual([]);
    await page.close();
  });

  it('a voltage ramp to breakdown from the Run form: station defaults, checks, the caution before and during the test, and its result in MV/cm and C/cm²', {
    timeout: 90_000,
  }, async () => {
    const status = (await api(daemon.url, 'GET', '/api/status')).json;
    const { page, errors } = await openPage(browser, daemon.url);
    await page.selectOption('#plan-form [name="kind"]', 'voltage-ramp');
    // The caution shows as soon as the test is chosen, before anything starts.
    expect(await page.isVisible('#destructive-caution')).toBe(true);
    expect(await page.textContent('#destructive-caution')).toMatch(/destroyed.*follow your lab's safety rules/s);
    expect(await page.textContent('#run-start')).toMatch(/breakdown test/);
    // Fields the station has defaults for are filled from them; the others wait for the user.
    const d = status.planDefaults['voltage-ramp'];
    expect(Number(await page.inputValue('#plan-form [name="rampStart"]'))).toBe(d.start);
    expect(Number(await page.inputValue('#plan-form [name="currentJump"]'))).toBe(d.criteria.currentJump);
    expect(Number(await page.inputValue('#plan-form [name="slopeFactor"]'))).toBe(d.criteria.slopeFactor);
    expect(Number(await page.inputValue('#plan-form [name="useCurrentLimit"]'))).toBe(d.useCurrentLimit);
    expect(await page.inputValue('#plan-form [name="rampStop"]')).toBe('');
    expect(await page.isVisible('#plan-form [name="points"]')).toBe(false);
    // Beyond the station's limit: named, nothing sent.
    for (const [k, v] of Object.entries({
      rampStop: '25',
      step: '0.1',
      stepTime: '0.02',
      testCompliance: '0.01',
      useVoltage: '1',
      device: 'PL11-B2',
      wafer: 'PL-11',
      site: 'B2',
      x: '2',
      y: '-1',
    }))
      await page.fill(`#plan-form [name="${k}"]`, v);
    await page.click('#run-start');
    expect(await page.textContent('#control-msg')).toBe(`ramp at most to (V): 25 V is beyond the station limit of ±${status.limits.maxVoltage} V`);
    await page.fill('#plan-form [name="rampStop"]', '15');
    // Not acknowledged: nothing starts.
    await page.click('#run-start');
    expect(await page.textContent('#control-msg')).toMatch(/destroys the device.*tick its box/);
    expect((await api(daemon.url, 'GET', '/api/status')).json.running).toBe(false);
    await page.check('#plan-form [name="acknowledge"]');
    await page.click('#run-start');
    // While the test runs, the daemon's destructive-test caution is on top of the page.
    await page.waitForSelector('#cautions .caution[data-kind="destructive test"]', { timeout: 15_000 });
    expect(await page.evaluate(() => (window as any).__plumbline.store.running)).toBe(true);
    expect(await page.getAttribute('#cautions .caution:first-child', 'data-kind')).toBe('destructive test');
    const during = await page.textContent('#cautions .caution[data-kind="destructive test"]');
    // The drift chart holds this session's sweeps only (the adaptive run before had three).
    const drift = await page.evaluate(() => {
      const p = (window as any).__plumbline;
      return { drawn: p.charts.drift.drawnSweeps as number[], mine: p.store.drift.map((d: any) => d.sweep) as number[], plot: p.charts.drift.plot !== null };
    });
    expect(drift.drawn.filter((n) => !drift.mine.includes(n))).toEqual([]);
    if (drift.mine.length === 0) expect(drift.plot).toBe(false);
    await snap(page, 'page-voltage-ramp-running.png');
    await page.waitForFunction(() => (window as any).__plumbline.store.runEnd !== null && (window as any).__plumbline.store.testResult !== null, undefined, {
      timeout: 60_000,
    });
    await page.waitForTimeout(300);
    const session = await page.evaluate(() => (window as any).__plumbline.store.session);
    const events = (await api(daemon.url, 'GET', `/api/sessions/${session}`)).json.events as any[];
    expect(events[0].plan).toMatchObject({ kind: 'voltage-ramp', start: 0, stop: 15, step: 0.1, stepTime: 0.02, compliance: 0.01, useVoltage: 1 });
    expect(events[0].device).toMatchObject({ device: 'PL11-B2', wafer: 'PL-11', site: 'B2', x: 2, y: -1 });
    const caution = events.find((e) => e.type === 'caution' && e.kind === 'destructive-test');
    expect(during).toContain(caution.message);
    // The run is over: the caution of a test in progress is gone; the result is shown, and the
    // message under the Start button says how the run ended, not that it started.
    expect(await page.locator('#cautions .caution[data-kind="destructive test"]').count()).toBe(0);
    expect(await page.textContent('#control-msg')).toMatch(/^Run ended: completed — /);
    expect(await page.isChecked('#plan-form [name="acknowledge"]')).toBe(false);
    const tr = events.find((e) => e.type === 'test-result');
    expect(tr.outcome).toBe('breakdown');
    expect(await page.isVisible('#test-panel')).toBe(true);
    expect(await page.textContent('#test-panel .outcome')).toBe(`BREAKDOWN · criterion: ${tr.result.criterion}`);
    const shown = async (key: string) => ({
      num: await page.textContent(`#test-panel tr[data-figure="${key}"] .num`),
      unit: await page.textContent(`#test-panel tr[data-figure="${key}"] .unit`),
    });
    expect(await shown('breakdownVoltage')).toEqual({ num: formatNumber(tr.result.breakdownVoltage, 4), unit: ' V' });
    // E_bd in MV/cm (1 MV/cm = 1e8 V/m) and Q_bd in C/cm² (1 C/cm² = 1e4 C/m²), with the charge's uncertainty.
    const field = await shown('breakdownField');
    expect(field.unit).toBe(' MV/cm');
    expect(field.num).toBe(formatNumber(tr.result.breakdownField / 1e8, 4));
    const charge = await shown('chargeToBreakdown');
    expect(charge.unit).toBe(' C/cm²');
    expect(charge.num).toBe(formatParameter({ value: tr.result.chargeToBreakdown, stdErr: tr.numbers.chargeUncertainty, unit: 'C/m^2' }).text);
    expect((await shown('timeToBreakdown')).unit).toBe(' s');
    expect(await page.textContent('#test-panel')).toContain('device PL11-B2 · wafer PL-11 · site B2 · (x 2, y -1)');
    // While the run went on, the picker said what each phase of the test was.
    await page.evaluate(() => (window as any).__plumbline.pickSweep(1));
    await page.waitForTimeout(100);
    expect(await page.textContent('#sweep-count')).toMatch(/sweep 1: use-condition check before the test/);
    await page.evaluate(() => (window as any).__plumbline.pickSweep(null));
    await page.waitForTimeout(100);
    // With the result in, the page shows the ramp's curve, not the one-reading check after it.
    const ramp = events.find((e) => e.type === 'sweep-start' && /^voltage ramp/.test(e.label)).sweep;
    expect(await page.evaluate(() => (window as any).__plumbline.store.currentSweep())).toBe(ramp);
    expect(await page.textContent('#sweep-count')).toMatch(new RegExp(`the test's curve; .*sweep ${ramp}: voltage ramp`));
    await snap(page, 'page-voltage-ramp-result.png');
    // Opened later from the journal, the session shows the same result.
    const before = await page.textContent('#test-panel');
    await page.evaluate((id) => (window as any).__plumbline.openSession(id), session);
    await page.waitForFunction(() => (window as any).__plumbline.store.readOnly === true);
    await page.waitForTimeout(150);
    expect(await page.textContent('#test-panel')).toBe(before);
    expect(await page.locator('#cautions .caution[data-kind="destructive test"]').count()).toBe(0);
    expect(errors).toEqual([]);
    await page.close();
  });

  it('sweeps with no fit (one-reading use-condition checks; a destroyed device with no point on the plot) draw without a page or console error', {
    timeout: 90_000,
  }, async () => {
    const { page, errors } = await openPage(browser, daemon.url);
    const r = await api(daemon.url, 'POST', '/api/run', {
      acknowledgeDestructive: true,
      plan: { kind: 'voltage-ramp', start: 0, stop: 15, step: 0.25, stepTime: 0.02, compliance: 1e-2, useVoltage: 1 },
      device: { device: 'NF1' },
    });
    expect(r.status).toBe(201);
    await page.waitForFunction((id) => (window as any).__plumbline.store.session === id && (window as any).__plumbline.store.runEnd !== null, r.json.session, {
      timeout: 60_000,
    });
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
    await page.waitForFunction(
      (id) => (window as any).__plumbline.store.session === id && (window as any).__plumbline.store.runEnd !== null,
      after.json.session,
      { timeout: 30_000 },
    );
    await page.waitForTimeout(300);
    // Following the latest sweep: the reason is said, and no plot of an earlier session stands
    // under this sweep's title.
    const fit2 = (await api(daemon.url, 'GET', `/api/sessions/${after.json.session}`)).json.events.find(
      (e: any) => e.type === 'fit' && e.final && e.sweep === 2,
    );
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
