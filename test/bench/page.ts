/**
 * Page benchmark in headless Chromium: point-to-pixel latency at 2,000 readings/s (daemon emit →
 * drawn, same machine clock), redraw time with 100 sweeps × 2,000 points, page heap after 1e6 points.
 */
import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { chromium } from 'playwright-core';
import { analyze } from '../../daemon/analysis/analyze.js';
import { fowlerNordheim } from '../../daemon/analysis/mechanisms/fowler-nordheim.js';
import { JournalWriter } from '../../daemon/journal/journal.js';
import { summarizeFit } from '../../daemon/pipeline/chain.js';
import { parseConfig } from '../../daemon/run/config.js';
import { Station } from '../../daemon/run/station.js';
import { startServer } from '../../daemon/server/app.js';
import { report } from './timing.js';

export async function benchPage(): Promise<void> {
  const dir = mkdtempSync(join(tmpdir(), 'plumbline-bench-page-'));
  const station = new Station(
    parseConfig(
      {
        instrument: { kind: 'simulator', scenario: 'oxide-fn', realTime: false },
        limits: { maxVoltage: 20, maxCompliance: 0.01, maxPower: 0.1 },
        analysis: { model: 'ohmic', window: 'all' },
        drift: { enabled: false },
      },
      'bench',
    ),
    dir,
  );
  const srv = await startServer(station, { host: '127.0.0.1', port: 0 });
  const browser = await chromium.launch({
    executablePath: '/usr/bin/chromium',
    args: [
      '--disable-gpu',
      '--disable-background-networking',
      '--disable-component-update',
      '--no-first-run',
      '--disable-sync',
      '--enable-precise-memory-info',
    ],
  });
  try {
    const page = await browser.newPage({ viewport: { width: 1600, height: 1200 } });
    await page.goto(srv.url);
    await page.waitForFunction(() => (globalThis as any).document.querySelector('#conn')?.getAttribute('data-state') === 'live');
    // 2,000 readings/s: 20 every 10 ms, sweeps of 2,000 points, for 10 s.
    const p = station.openPassive('bench', 'synthetic source at 2000 readings/s', { pointsPerSweep: 2000 });
    let k = 0;
    const per = 2000;
    await new Promise<void>((resolve) => {
      const t = setInterval(() => {
        for (let n = 0; n < 20; n++, k++) {
          const j = k % per;
          if (j === 0) p.chain.startSweep(k / per + 1, per, '');
          const v = 0.005 * j;
          p.chain.reading(v, v * 1e-4 * (1 + 0.001 * Math.sin(k)), false, false);
          if (j === per - 1) p.chain.endSweep(true);
        }
        if (k >= 20_000) {
          clearInterval(t);
          resolve();
        }
      }, 10);
    });
    await page.waitForTimeout(500);
    const lat = await page.evaluate(() => [...(globalThis as any).__plumbline.latency] as number[]);
    p.close('completed', 'bench');
    lat.sort((a, b) => a - b);
    const q = (f: number) => lat[Math.min(lat.length - 1, Math.floor(f * lat.length))];
    report('page: point-to-pixel latency at 2000 readings/s', q(0.5), `ms p50, p99 ${q(0.99).toFixed(0)} ms (${lat.length} frames)`, 'p99 ≤ 33');
    // Redraw with 100 sweeps × 2,000 points, and the heap after 1e6 points through the store.
    const r = await page.evaluate(async () => {
      const pl = (globalThis as any).__plumbline;
      const sweeps = new Map<number, { v: number[]; i: number[]; flags: number[] }>();
      for (let s = 1; s <= 100; s++) {
        const v: number[] = [];
        const i: number[] = [];
        const flags: number[] = [];
        for (let j = 0; j < 2000; j++) {
          v.push(0.005 * j);
          i.push(1e-9 * Math.exp(0.002 * j * (1 + s / 200)));
          flags.push(0);
        }
        sweeps.set(s, { v, i, flags });
      }
      pl.charts.raw.update(sweeps, true);
      await Promise.resolve();
      // One frame of a live run: a reading more in the last sweep, the chart updated and drawn
      // (uPlot draws in a microtask queued by setData, which runs before this await returns).
      const last = sweeps.get(100) as { v: number[]; i: number[]; flags: number[] };
      const times: number[] = [];
      for (let n = 0; n < 15; n++) {
        last.v.push(10 + 0.005 * n);
        last.i.push(1e-6);
        last.flags.push(0);
        const t0 = performance.now();
        pl.charts.raw.update(sweeps, true);
        await Promise.resolve();
        times.push(performance.now() - t0);
      }
      times.sort((a, b) => a - b);
      const store = new pl.Store();
      store.reset('bench');
      for (let n = 0; n < 1_000_000; n++)
        store.applyEvent({ type: 'reading', seq: n + 1, sweep: Math.floor(n / 2000) + 1, k: n % 2000, t: n, v: 0.005 * (n % 2000), i: 1e-9 * n, flags: 0 });
      (globalThis as any).__benchStore = store;
      (globalThis as any).gc?.();
      return {
        redraw: times[7],
        heap: (performance as any).memory?.usedJSHeapSize as number | undefined,
        kept: [...store.sweeps.values()].reduce((a: number, s: any) => a + s.v.length, 0),
      };
    });
    report('page: redraw, 100 sweeps × 2000 points (log axis)', r.redraw, 'ms median (one reading more, update and draw)', '≤ 16');
    if (r.heap !== undefined)
      report('page: JS heap after 1e6 points through the store', r.heap / 2 ** 20, `MB after GC (${r.kept} points kept: the last 100 sweeps)`);
    await page.close();
    await benchOpenSessions(browser, srv.url, dir);
  } finally {
    await browser.close();
    await srv.close();
    rmSync(dir, { recursive: true, force: true });
  }
}

/**
 * A finished session of `sweeps` sweeps × `points` readings written through the journal writer, as
 * a run would leave it: sweep start and end, a final fit and a drift point per sweep (an oxide
 * sweep through the Fowler–Nordheim forward model; the fit summary of the first sweep reused with
 * the barrier moved a little, so writing 20,000 sweeps does not take 20,000 fits).
 */
function writeSession(dataDir: string, sweeps: number, points: number): string {
  const { writer, id } = JournalWriter.create(dataDir, `bench-${sweeps}`);
  const d = 7e-9;
  const v = Array.from({ length: points }, (_, k) => (9 * (k + 1)) / points);
  const i0 = v.map((x) => fowlerNordheim(x / d, 3.1, 0.42) * 1e-8 + 1e-13);
  const analysis = { model: 'fowler-nordheim', window: { from: 5, to: 9 }, inputs: { thickness: d, area: 1e-8, massRatio: 0.42 } };
  const fit = summarizeFit(analyze({ x: v, y: i0 }, { ...analysis, regimes: false }));
  writer.event({
    type: 'session',
    id,
    startedAt: new Date().toISOString(),
    source: { kind: 'simulator', detail: 'benchmark', control: true },
    instrument: 'bench',
    plan: { kind: 'linear', start: 0, stop: 9, points, repeat: sweeps, compliance: 1e-3 },
    analysis,
    drift: {},
    limits: {},
  });
  for (let s = 1; s <= sweeps; s++) {
    writer.event({ type: 'sweep-start', sweep: s, planned: points, label: '' });
    const f = 1 + 1e-4 * Math.sin(s);
    for (let k = 0; k < points; k++) writer.reading(s, k, v[k], i0[k] * f, 0);
    writer.event({ type: 'sweep-end', sweep: s, points, complete: true });
    const phi = fit.parameters.barrierHeight;
    writer.event({
      type: 'fit',
      sweep: s,
      final: true,
      fit: { ...fit, parameters: { barrierHeight: { ...phi, value: phi.value * (1 + 1e-5 * Math.sin(s)) } } },
    });
    writer.event({
      type: 'drift',
      sweep: s,
      parameter: 'barrierHeight',
      value: phi.value,
      method: 'ewma',
      phase: s <= 3 ? 'baseline' : 'monitor',
      statistic: phi.value,
      center: phi.value,
      lower: phi.value - 0.01,
      upper: phi.value + 0.01,
      sigma: 0.003,
      state: s <= 3 ? 'baseline' : 'in-control',
    });
  }
  writer.event({ type: 'run-end', outcome: 'completed', reason: 'benchmark', sweeps });
  writer.close();
  return id;
}

/**
 * Opening a past session on the page: time from the click to the first frame drawn (the daemon's
 * overview, its transfer and the page's work), cold (the daemon reads the session for the first
 * time) and again, and the page's JS heap afterwards (after a garbage collection).
 */
async function benchOpenSessions(browser: import('playwright-core').Browser, url: string, dir: string): Promise<void> {
  for (const sweeps of [2_000, 20_000]) {
    const id = writeSession(dir, sweeps, 100);
    const page = await browser.newPage({ viewport: { width: 1600, height: 1200 } });
    await page.goto(url);
    await page.waitForFunction(() => (globalThis as any).document.querySelector('#conn')?.getAttribute('data-state') === 'live');
    const open = () =>
      page.evaluate(async (sid) => {
        const g = globalThis as any;
        const t0 = performance.now();
        await g.__plumbline.openSession(sid);
        // The render runs on the next animation frame; the one after it has painted.
        await new Promise((r) => g.requestAnimationFrame(() => g.requestAnimationFrame(r)));
        const ms = performance.now() - t0;
        g.gc?.();
        return {
          ms,
          heap: (performance as any).memory?.usedJSHeapSize as number | undefined,
          sweeps: g.__plumbline.store.allSweeps.length,
          kept: g.__plumbline.store.sweeps.size,
        };
      }, id);
    const cold = await open();
    const warm = await open();
    report(
      `page: open a past session of ${sweeps} sweeps × 100 points`,
      cold.ms,
      `ms cold, ${warm.ms.toFixed(0)} ms again (${cold.sweeps} sweeps listed, ${cold.kept} drawn + envelope)`,
      '≤ 2000',
    );
    if (warm.heap !== undefined) report(`page: JS heap with that session open (${sweeps} sweeps)`, warm.heap / 2 ** 20, 'MB after GC', 'bounded');
    await page.close();
  }
}
