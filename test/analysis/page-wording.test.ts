/**
 * The analysis's messages are read in two places: the command line (`fit`, `rank`, `run`) and the
 * page (the live fits, the ranking panel, the cautions). A message that names a command-line option
 * must also say where the same thing is set on the page, or say which command the option belongs
 * to; "rank within one with --from/--to" told a page user to type an option they have nowhere to
 * type. Each scenario below makes the messages checked appear (the test asserts they do).
 */
import { describe, expect, it } from 'vitest';
import { analyze } from '../../daemon/analysis/analyze.js';
import { AnalysisError } from '../../daemon/analysis/errors.js';
import { rankMechanisms } from '../../daemon/analysis/ranking.js';
import { seededNormal } from '../../daemon/analysis/random.js';
import { linearBias, wholeSweep } from '../helpers/whole-sweep.js';

/** Names an option (--x) without the page's counterpart or the command it belongs to. */
function cliOnly(text: string): boolean {
  if (!/(^|[\s(])--[a-z]/.test(text)) return false;
  return !/\bpage\b|plumbline \w+|of fit and rank/.test(text);
}

describe('messages shown on the page and on the command line', () => {
  const seen: string[] = [];
  const check = (messages: readonly string[]) => {
    seen.push(...messages);
    for (const m of messages) expect(cliOnly(m), m).toBe(false);
  };

  it('ranking: the sweep holds several regimes (a 1 kΩ resistor, Ohm’s law, clipped at 1 mA)', () => {
    const normal = seededNormal(11);
    const v = Array.from({ length: 101 }, (_, k) => k * 0.05);
    const i = v.map((x) => Math.min(x / 1000, 1e-3) * (1 + 0.001 * normal()));
    const r = rankMechanisms({ x: v, y: i }, { inputs: { thickness: 5e-9, massRatio: 0.42 } });
    check([...r.warnings, ...r.notes, ...r.ranking.flatMap((e) => e.reasons)]);
    expect(r.warnings.join(' ')).toMatch(/more than one regime; rank within one: give a window \(--from\/--to, or the window on the page\)/);
  });

  it('fits and ranking without the refractive index or the static permittivity; compliance read from pinned readings', () => {
    // Poole–Frenkel film (whole-sweep helper: Frenkel 1938), no refractive index given.
    const s = wholeSweep({
      device: { kind: 'poole-frenkel', prefactor: 1e-2, trapDepth: 1.0, permittivity: 4 },
      thickness: 20e-9,
      area: 1e-8,
      leakage: 1e15,
      bias: linearBias(0, 15, 76),
      relative: 0.02,
      floor: 1e-13,
      compliance: 1e-3,
      seed: 3,
    });
    const inputs = { thickness: 20e-9, area: 1e-8 };
    const pf = analyze({ x: s.v, y: s.i }, { model: 'poole-frenkel', inputs });
    check([...pf.warnings, ...pf.notes]);
    const sclc = analyze({ x: s.v, y: s.i }, { model: 'sclc', inputs });
    check([...sclc.warnings, ...sclc.notes]);
    const r = rankMechanisms({ x: s.v, y: s.i }, { inputs });
    check([...r.warnings, ...r.notes, ...r.ranking.flatMap((e) => e.reasons)]);
    // A resistor clipped exactly at 1 mA, no compliance flags: the pinned readings are taken as compliance.
    const v = Array.from({ length: 41 }, (_, k) => k * 0.1);
    const ohm = analyze({ x: v, y: v.map((x) => Math.min(x / 1000, 1e-3)) }, { model: 'ohmic' });
    check([...ohm.warnings, ...ohm.notes]);
    expect(seen.join('\n')).toMatch(/not checked against n² \(no refractive index given: --refractive-index, or the page's Analysis form\)/);
    expect(seen.join('\n')).toMatch(/mobility needs the permittivity \(--permittivity, or the page's Analysis form\)/);
    expect(seen.join('\n')).toMatch(/taken as compliance/);
  });

  it('a missing input is named with the option and the form', () => {
    let message = '';
    try {
      analyze({ x: [1, 2, 3, 4, 5, 6], y: [1e-9, 2e-9, 4e-9, 8e-9, 1.6e-8, 3.2e-8] }, { model: 'fowler-nordheim' });
    } catch (e) {
      expect(e).toBeInstanceOf(AnalysisError);
      message = (e as Error).message;
    }
    expect(message).toMatch(/needs the film thickness \(--thickness, e\.g\. "8 nm", or the page's Analysis form\)/);
    check([message]);
  });
});
