/**
 * `plumbline watch` splits a temperature series into its sweeps, one reading to one sweep. The
 * readings are Poole–Frenkel currents at 300, 325, 350 and 375 K from the project's forward model
 * (Frenkel 1938, as written by Chiu, Adv. Mater. Sci. Eng. 2014, 578168, eq. 8; trap depth 1.0 eV),
 * so the temperature series must give back 1.0 eV. Two common ways of taking such a series: every
 * sweep up from 0 V, or sweeps up and down in turn (the turning bias read again at the next set
 * point). The chuck wanders ±0.2 K about its set point.
 */
import { readdirSync } from 'node:fs';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { pooleFrenkel } from '../../daemon/analysis/mechanisms/poole-frenkel.js';
import { seededNormal } from '../../daemon/analysis/random.js';
import { scanJournal } from '../../daemon/journal/reader.js';
import type { WireEvent } from '../../protocols/wire.js';
import { runCli } from '../helpers/cli.js';
import { tempDir } from '../helpers/daemon.js';

const TEMPS = [300, 325, 350, 375];
const THICKNESS = 2e-8; // m
const AREA = 1e-8; // m², 1e-4 cm²

/** 51 readings a sweep, 0 to 10 V in 0.2 V steps; `alternate` runs every other sweep down. */
function series(alternate: boolean): string {
  const normal = seededNormal(11);
  let csv = 'V (V),I (A),T (K)\n';
  TEMPS.forEach((T, s) => {
    for (let j = 0; j <= 50; j++) {
      const k = alternate && s % 2 === 1 ? 50 - j : j;
      const v = 0.2 * k;
      const i = k === 0 ? 0 : pooleFrenkel(v / THICKNESS, 1e-2, 1.0, 4.0, T) * AREA * (1 + 0.002 * normal());
      csv += `${v},${i},${T + 0.2 * normal()}\n`;
    }
  });
  return csv;
}

function watch(csv: string): string {
  const data = join(tempDir(), 'data');
  const r = runCli(
    ['watch', '-', '--no-page', '--model', 'poole-frenkel', '--thickness', '20 nm', '--area', '1e-4 cm^2', '--temperature-column', 'T (K)', '--data', data],
    csv,
  );
  expect(r.code, r.stderr).toBe(0);
  return join(data, readdirSync(data)[0]);
}

describe('watch: sweeps of a temperature series', () => {
  for (const alternate of [false, true]) {
    it(`each reading in its own sweep (${alternate ? 'up and down in turn' : 'every sweep up from 0 V'})`, () => {
      const session = watch(series(alternate));
      const events: WireEvent[] = [];
      scanJournal(session, (e) => events.push(e));
      const perSweep = new Map<number, { n: number; tSum: number }>();
      // The sweep a reading was journaled in, with the temperature its row carried.
      const rows = series(alternate).trim().split('\n').slice(1);
      for (const [k, e] of events.filter((x) => x.type === 'reading').entries()) {
        if (e.type !== 'reading') continue;
        const T = Number(rows[k].split(',')[2]);
        const s = perSweep.get(e.sweep) ?? { n: 0, tSum: 0 };
        s.n++;
        s.tSum += T;
        perSweep.set(e.sweep, s);
      }
      expect([...perSweep.keys()]).toEqual([1, 2, 3, 4]);
      expect([...perSweep.values()].map((s) => s.n)).toEqual([51, 51, 51, 51]);
      for (const [sweep, s] of perSweep) expect(Math.abs(s.tSum / s.n - TEMPS[sweep - 1]), `sweep ${sweep}`).toBeLessThan(0.2);
      // The sweep-end counts and the temperature notes tseries reads agree with the journal.
      expect(events.filter((e) => e.type === 'sweep-end').map((e) => e.type === 'sweep-end' && e.points)).toEqual([51, 51, 51, 51]);
      const notes = events.filter((e) => e.type === 'annotation' && e.tags.includes('temperature'));
      expect(notes.map((e) => e.type === 'annotation' && Math.round(Number(/T = ([\d.]+) K/.exec(e.text)?.[1])))).toEqual(TEMPS);
      // Each sweep's live fit uses its own temperature: ε_r is the film's 4.0 at every set point
      // (at the setting's 300 K throughout it had climbed to 6.3 by 375 K).
      const eps = events
        .filter((e) => e.type === 'fit' && e.final)
        .map((e) => (e.type === 'fit' ? (e.fit?.parameters.relativePermittivity?.value ?? Number.NaN) : Number.NaN));
      expect(eps).toHaveLength(4);
      for (const e of eps) expect(Math.abs(e / 4 - 1), `ε_r ${eps.join(', ')}`).toBeLessThan(0.02);
      const ts = runCli(['tseries', session, '--json']);
      expect(ts.code, ts.stderr).toBe(0);
      const ea = JSON.parse(ts.stdout).result.activationEnergy;
      // The trap depth the readings were made with, 1.0 eV, within three standard errors.
      expect(Math.abs(ea.value - 1.0), `${ea.value} ± ${ea.stdErr} eV`).toBeLessThan(3 * ea.stdErr + 1e-4);
    });
  }
});

describe('watch: --temperature-step', () => {
  it('is refused unless a positive number of kelvin, with a temperature column', () => {
    const data = join(tempDir(), 'data');
    const bad = runCli(['watch', '-', '--no-page', '--temperature-column', 'T (K)', '--temperature-step', '0', '--data', data], 'V,I,T\n');
    expect(bad.code).toBe(2);
    expect(bad.stderr).toMatch(/--temperature-step '0': expected a positive number of kelvin/);
    const alone = runCli(['watch', '-', '--no-page', '--temperature-step', '5', '--data', data], 'V,I\n');
    expect(alone.code).toBe(2);
    expect(alone.stderr).toMatch(/--temperature-step needs --temperature-column/);
  });
});
