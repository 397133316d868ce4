/**
 * Viewing a session for the page: the index finds every sweep's readings exactly as the journal
 * reader does, the overview's envelope holds every reading, the settings in force are tracked per
 * sweep, and re-analysis leaves the journal byte for byte as it was. The readings come from the
 * Fowler–Nordheim forward model (Lenzlinger & Snow 1969; constants from Forbes 2006).
 */
import { createHash } from 'node:crypto';
import { readFileSync } from 'node:fs';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { fowlerNordheim } from '../../daemon/analysis/mechanisms/fowler-nordheim.js';
import { JournalWriter } from '../../daemon/journal/journal.js';
import { scanJournal } from '../../daemon/journal/reader.js';
import { reanalyze, REANALYSIS_FILE, sessionOverview, sweepDetail } from '../../daemon/journal/reanalysis.js';
import { tempDir } from '../helpers/daemon.js';

const d = 7e-9;
const fn = { model: 'fowler-nordheim', window: { from: 5, to: 9 }, inputs: { thickness: d, area: 1e-8, massRatio: 0.42 } };

function session(sweeps: number, points: number): string {
  const data = join(tempDir(), 'data');
  const { writer, id } = JournalWriter.create(data, 'view');
  writer.event({
    type: 'session',
    id,
    startedAt: new Date().toISOString(),
    source: { kind: 'simulator', detail: 'test', control: true },
    instrument: 'test',
    plan: { compliance: 1e-3 },
    analysis: fn,
    drift: {},
    limits: {},
  });
  for (let s = 1; s <= sweeps; s++) {
    if (s === 21) writer.event({ type: 'settings', analysis: { ...fn, model: 'trap-assisted-tunneling' }, source: 'api' });
    writer.event({ type: 'sweep-start', sweep: s, planned: points, label: '' });
    for (let k = 0; k < points; k++) {
      const v = (9 * (k + 1)) / points;
      writer.reading(s, k, v, fowlerNordheim(v / d, 3.1 + 0.001 * s, 0.42) * 1e-8 * (k % 2 ? 1.01 : 0.99) + 1e-13, 0);
    }
    writer.event({ type: 'sweep-end', sweep: s, points, complete: s < sweeps });
  }
  writer.close();
  return join(data, id);
}

describe('session index and overview', () => {
  const dir = session(30, 40);

  it('each sweep read by position equals what the journal reader yields', () => {
    const bySweep = new Map<number, number[][]>();
    scanJournal(dir, (e) => {
      if (e.type === 'reading') bySweep.set(e.sweep, [...(bySweep.get(e.sweep) ?? []), [e.seq, e.sweep, e.k, e.t, e.v, e.i, e.flags]]);
    });
    for (const n of [1, 2, 17, 30]) expect(sweepDetail(dir, n)?.readings).toEqual(bySweep.get(n));
    expect(sweepDetail(dir, 31)).toBeUndefined();
  });

  it('the overview lists every sweep, keeps the last ones, and its envelope holds every reading', () => {
    const o = sessionOverview(dir, 5);
    expect(o.sweeps.sweep).toEqual(Array.from({ length: 30 }, (_, k) => k + 1));
    expect(o.sweeps.points.every((p) => p === 40)).toBe(true);
    expect(o.sweeps.complete.at(-1)).toBe(false);
    expect(new Set(o.recent.map((r) => r[1]))).toEqual(new Set([26, 27, 28, 29, 30]));
    let lo = Infinity;
    let hi = 0;
    scanJournal(dir, (e) => {
      if (e.type === 'reading') {
        lo = Math.min(lo, Math.abs(e.i));
        hi = Math.max(hi, Math.abs(e.i));
      }
    });
    expect(Math.max(...o.envelope.hi.filter((x): x is number => x !== null))).toBe(hi);
    expect(Math.min(...o.envelope.lo.filter((x): x is number => x !== null))).toBe(lo);
  });

  it('a sweep is viewed with the settings in force when it ended', () => {
    expect(sweepDetail(dir, 20)?.analysis?.model).toBe('fowler-nordheim');
    expect(sweepDetail(dir, 21)?.analysis?.model).toBe('trap-assisted-tunneling');
    expect(sweepDetail(dir, 21)?.view?.model).toBe('trap-assisted-tunneling');
  });

  it('re-analysis is kept beside the journal and leaves the journal as it was', () => {
    const hash = (f: string) =>
      createHash('sha256')
        .update(readFileSync(join(dir, f)))
        .digest('hex');
    const before = [hash('journal.jsonl'), hash('readings.f64')];
    const r = reanalyze(dir, { ...fn, window: { from: 7, to: 9 } }, [3, 4], [4]);
    expect(r.fits.map((f) => f.sweep)).toEqual([3, 4]);
    // The window asked for: 7 … 9 V of 40 points spaced 0.225 V (7.2 … 9 V: 9 points).
    expect(r.fits[1].fit?.line.n).toBe(9);
    // The barrier the forward model was given for sweep 4 (3.104 eV), back within the ±1 % ripple.
    expect(r.fits[1].fit?.parameters.barrierHeight.value).toBeCloseTo(3.104, 1);
    expect(r.views[0].view.window?.bias[0]).toBeCloseTo(7.2, 9);
    expect([hash('journal.jsonl'), hash('readings.f64')]).toEqual(before);
    const kept = readFileSync(join(dir, REANALYSIS_FILE), 'utf8')
      .trim()
      .split('\n')
      .map((l) => JSON.parse(l));
    expect(kept.at(-1).analysis.window).toEqual({ from: 7, to: 9 });
    expect(kept.at(-1).fits[1].fit.parameters.barrierHeight.value).toBe(r.fits[1].fit?.parameters.barrierHeight.value);
  });
});
