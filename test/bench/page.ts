/**
 * Page benchmark in headless Chromium: point-to-pixel latency at 2,000 readings/s (daemon emit →
 * drawn, same machine clock), redraw time with 100 sweeps × 2,000 points, page heap after 1e6 points.
 */
import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { chromium } from 'playwright-core';
import { parseConfig } from '../../daemon/run/config.js';
import { Station } from '../../daemon/run/station.js';
import { startServer } from '../../daemon/server/app.js';
import { report } from './timing.js';

export async function benchPage(): Promise<void> {
  const dir = mkdtempSync(join(tmpdir(), 'plumbline-bench-page-'));
  const station = new Station(parseConfig({
    instrument: { kind: 'simulator', scenario: 'oxide-fn', realTime: false },
    limits: { maxVoltage: 20, maxCompliance: 0.01, maxPower: 0.1 },
    analysis: { model: 'ohmic', window: 'all' },
    drift: { enabled: false },
  }, 'bench'), dir);
  const srv = await startServer(station, { host: '127.0.0.1', port: 0 });
  const browser = await chromium.launch({ executablePath: '/usr/bin/chromium', args: ['--disable-gpu', '--disable-background-networking', '--disable-component-update', '--no-first-run', '--disable-sync', '--enable-precise-memory-info'] });
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
    const r = await page.evaluate(() => {
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
      const times: number[] = [];
      for (let n = 0; n < 15; n++) {
        const t0 = performance.now();
        pl.charts.raw.update(sweeps, true);
        times.push(performance.now() - t0);
      }
      times.sort((a, b) => a - b);
      const store = new pl.Store();
      store.reset('bench');
      for (let n = 0; n < 1_000_000; n++) store.applyEvent({ type: 'reading', seq: n + 1, sweep: Math.floor(n / 2000) + 1, k: n % 2000, t: n, v: 0.005 * (n % 2000), i: 1e-9 * n, flags: 0 });
      (globalThis as any).__benchStore = store;
      return { redraw: times[7], heap: (performance as any).memory?.usedJSHeapSize as number | undefined, kept: [...store.sweeps.values()].reduce((a: number, s: any) => a + s.v.length, 0) };
    });
    report('page: redraw, 100 sweeps × 2000 points (log axis)', r.redraw, 'ms median', '≤ 16');
    if (r.heap !== undefined) report('page: JS heap after 1e6 points through the store', r.heap / 2 ** 20, `MB (${r.kept} points kept: the last 100 sweeps)`);
  } finally {
    await browser.close();
    await srv.close();
    rmSync(dir, { recursive: true, force: true });
  }
}
