/**
 * Report charts with ranges that defeat naive tick generators: a parameter whose ±2σ band is
 * narrower than the spacing of doubles near its value (a fit with a vanishing standard error, or
 * three identical values). The tick generator counts ticks by index, so it ends.
 */
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { JournalWriter } from '../../daemon/journal/journal.js';
import { niceTicks } from '../../protocols/number-format.js';
import { runCli } from '../helpers/cli.js';
import { tempDir } from '../helpers/daemon.js';

describe('tick values', () => {
  it('round steps on ordinary ranges', () => {
    expect(niceTicks(0, 10)).toEqual([0, 2, 4, 6, 8, 10]);
    expect(niceTicks(-1, 1)).toEqual([-1, -0.5, 0, 0.5, 1]);
  });

  it('a range narrower than the float spacing near its value gives its two ends at once', () => {
    const v = 3.2;
    const ulp = 2 ** -51 * 2; // spacing of doubles in [2, 4)
    expect(niceTicks(v - ulp, v + ulp)).toEqual([v - ulp, v + ulp]);
    expect(niceTicks(1e6, 1e6 + 1e-10)).toHaveLength(2);
  });
});

describe('report of a session with a vanishing uncertainty', () => {
  it('finishes and draws the trend (it used to loop without end)', () => {
    const data = join(tempDir(), 'data');
    const { writer, id } = JournalWriter.create(data, 'narrow');
    writer.event({
      type: 'session',
      id,
      startedAt: new Date().toISOString(),
      source: { kind: 'simulator', detail: 'test', control: true },
      instrument: 'test',
      plan: null,
      analysis: { model: 'ohmic', window: 'all', inputs: {} },
      drift: { enabled: false },
      limits: {},
    });
    for (let s = 1; s <= 3; s++) {
      writer.event({ type: 'sweep-start', sweep: s, planned: 3, label: `sweep ${s}` });
      for (let k = 0; k < 3; k++) writer.reading(s, k, k + 1, (k + 1) * 1e-6, 0);
      writer.event({
        type: 'fit',
        sweep: s,
        final: true,
        fit: {
          model: 'ohmic',
          title: 'Ohmic',
          window: { from: 1, to: 3, mode: 'all' },
          line: { slope: 1e-6, slopeStdErr: 1e-24, intercept: 0, interceptStdErr: 1e-24, r2: 1, residualStdDev: 0, n: 3 },
          axes: { x: { label: 'V', unit: 'V', kind: 'linear' }, y: { label: 'I', unit: 'A', kind: 'linear' } },
          parameters: { resistance: { value: 1e6, stdErr: 5e-11, unit: 'ohm' } },
          plausible: true,
          warnings: [],
          points: { used: 3, excluded: 0, reasons: {} },
          regimes: [],
        },
      });
      writer.event({ type: 'sweep-end', sweep: s, points: 3, complete: true });
    }
    writer.event({ type: 'run-end', outcome: 'completed', reason: 'test', sweeps: 3 });
    writer.close();
    const r = runCli(['report', join(data, id)]);
    expect(r.code, r.stderr).toBe(0);
    expect(r.stdout).toMatch(/report of 3 sweep\(s\)/);
  });
});
