/**
 * Reading a lot of hundreds of sessions: summaries built from the journals (cold) against the
 * summaries cached beside them (warm). Each session has 20 sweeps of 200 readings with a fit each.
 */
import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { FolderLot } from '../../daemon/journal/lot.js';
import { JournalWriter } from '../../daemon/journal/journal.js';
import { report } from './timing.js';

function writeLot(dataDir: string, sessions: number): void {
  for (let s = 0; s < sessions; s++) {
    const { writer, id } = JournalWriter.create(dataDir, `dev${s}`);
    writer.event({
      type: 'session',
      id,
      startedAt: new Date().toISOString(),
      source: { kind: 'bench', detail: '', control: true },
      instrument: 'bench',
      plan: null,
      analysis: { model: 'fowler-nordheim', window: 'auto', inputs: {} },
      drift: null,
      limits: null,
      device: { device: `D${s}`, wafer: 'W1', x: s % 20, y: Math.floor(s / 20) },
    } as never);
    for (let sw = 1; sw <= 20; sw++) {
      writer.event({ type: 'sweep-start', sweep: sw, planned: 200, label: '' });
      for (let k = 0; k < 200; k++) writer.reading(sw, k, k * 0.05, 1e-12 * Math.exp(k * 0.1), 0);
      writer.event({ type: 'sweep-end', sweep: sw, points: 200, complete: true });
      writer.event({
        type: 'fit',
        sweep: sw,
        final: true,
        fit: {
          model: 'fowler-nordheim',
          title: 'FN',
          window: { from: 5, to: 9, mode: 'auto' },
          line: { slope: -1, slopeStdErr: 0.01, intercept: 1, interceptStdErr: 0.1, r2: 0.999, residualStdDev: 0.01, n: 40 },
          axes: { x: { label: '', unit: '', kind: 'linear' }, y: { label: '', unit: '', kind: 'log' } },
          parameters: { barrierHeight: { value: 3.1 + s * 1e-4, stdErr: 0.01, unit: 'eV' } },
          plausible: true,
          warnings: [],
          points: { used: 40, excluded: 0, reasons: {} },
          regimes: [],
        },
      });
    }
    writer.event({ type: 'run-end', outcome: 'completed', reason: 'bench', sweeps: 20 });
    writer.close();
  }
}

export async function benchLot(): Promise<void> {
  const dir = mkdtempSync(join(tmpdir(), 'plumbline-bench-lot-'));
  try {
    const n = 300;
    writeLot(dir, n);
    const time = async (cache: boolean) => {
      const lot = new FolderLot([dir], { cache });
      const t0 = performance.now();
      const d = await lot.devices();
      if (d.length !== n) throw new Error('lot bench: wrong count');
      return performance.now() - t0;
    };
    const uncached = await time(false);
    await time(true); // builds the caches
    const warm: number[] = [];
    for (let k = 0; k < 5; k++) warm.push(await time(true));
    warm.sort((a, b) => a - b);
    report(`lot of ${n} sessions, summaries from the journals`, uncached, 'ms');
    report(`lot of ${n} sessions, summaries from the cache`, warm[2], 'ms', '< 1/5 of the journals');
  } finally {
    rmSync(dir, { recursive: true, force: true });
  }
}
