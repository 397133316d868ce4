/**
 * A drift watch that is on but has nothing to follow says so once, naming the setting to change:
 * a model whose fit gives no parameter (the straight line through the raw columns), or a
 * `drift.parameter` the fit does not give. Sweeps of a simulated 1 kΩ resistor (Ohm's law, I = V/R,
 * with 1 % noise) go straight through the live chain, as a station feeds it.
 */
import { mkdtempSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { seededNormal } from '../../daemon/analysis/random.js';
import { JournalWriter } from '../../daemon/journal/journal.js';
import { LiveChain } from '../../daemon/pipeline/chain.js';
import { analysisSchema, breakdownSchema, driftSchema } from '../../daemon/pipeline/settings.js';
import type { WireEvent } from '../../protocols/wire.js';

type Caution = Extract<WireEvent, { type: 'caution' }>;

function run(
  model: string,
  drift: Record<string, unknown>,
  sweeps = 7,
  during?: (chain: LiveChain, sweep: number) => void,
): { cautions: Caution[]; drift: Extract<WireEvent, { type: 'drift' }>[] } {
  const { writer } = JournalWriter.create(mkdtempSync(join(tmpdir(), 'plumbline-drift-')), 'resistor');
  const chain = new LiveChain({
    journal: writer,
    analysis: analysisSchema.parse({ model, window: 'all' }),
    drift: driftSchema.parse(drift),
    breakdown: breakdownSchema.parse({ enabled: false }),
    complianceLimit: 0.1,
    hazardVoltage: 30,
  });
  const out = { cautions: [] as Caution[], drift: [] as Extract<WireEvent, { type: 'drift' }>[] };
  chain.events$.subscribe((e) => {
    if (e.type === 'caution') out.cautions.push(e);
    if (e.type === 'drift') out.drift.push(e);
  });
  const noise = seededNormal(3);
  for (let s = 1; s <= sweeps; s++) {
    during?.(chain, s);
    chain.startSweep(s, 21, `sweep ${s}`);
    for (let k = 0; k <= 20; k++) {
      const v = 0.1 + k * 0.1;
      chain.reading(v, (v / 1000) * (1 + 0.01 * noise()), false, false);
    }
    chain.endSweep(true);
  }
  chain.end('completed', 'done');
  return out;
}

const notWatched = (c: Caution[]) => c.filter((x) => x.kind === 'drift-not-watched');

describe('a drift watch with nothing to follow', () => {
  it('a model whose fit gives no parameter: one caution, after the first sweep, naming the analysis model and drift.enabled', () => {
    const r = run('linear', {});
    const c = notWatched(r.cautions);
    expect(c).toHaveLength(1);
    expect(c[0].sweep).toBe(1);
    expect(c[0].message).toMatch(/drift watch is on \(action 'abort'\)/);
    expect(c[0].message).toMatch(/linear fit gives no parameter/);
    expect(c[0].message).toMatch(/analysis model/);
    expect(c[0].message).toMatch(/--model/);
    expect(c[0].message).toMatch(/drift\.enabled/);
    expect(r.drift).toEqual([]);
  });

  it('a drift.parameter the fit does not give: one caution naming drift.parameter and the parameters there are', () => {
    const r = run('ohmic', { parameter: 'barrierHeight' });
    const c = notWatched(r.cautions);
    expect(c).toHaveLength(1);
    expect(c[0].message).toMatch(/follows 'barrierHeight' \(drift\.parameter in the station config/);
    expect(c[0].message).toMatch(/ohmic fit of sweep 1 gives 'resistance'/);
    expect(c[0].message).toMatch(/Set drift\.parameter to one of these/);
    expect(c[0].message).toMatch(/analysis model/);
    // The chart still records each sweep (no value), as before.
    expect(r.drift.every((d) => d.state === 'no-value')).toBe(true);
  });

  it('a parameter the fit gives, or the watch off: no such caution', () => {
    const given = run('ohmic', {});
    expect(notWatched(given.cautions)).toEqual([]);
    expect(given.drift.map((d) => d.parameter)).toEqual(Array(7).fill('resistance'));
    expect(notWatched(run('ohmic', { parameter: 'resistance' }).cautions)).toEqual([]);
    expect(notWatched(run('linear', { enabled: false }).cautions)).toEqual([]);
  });

  it('said again after a change of model that still gives nothing to follow, not after one that does', () => {
    const back = run('linear', {}, 6, (chain, s) => {
      if (s === 3) chain.setAnalysis(analysisSchema.parse({ model: 'ohmic', window: 'all' }), 'test');
      if (s === 5) chain.setAnalysis(analysisSchema.parse({ model: 'linear', window: 'all' }), 'test');
    });
    expect(notWatched(back.cautions).map((c) => c.sweep)).toEqual([1, 5]);
  });
});
