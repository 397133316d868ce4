/**
 * refit and tseries on a session of Poole–Frenkel sweeps at several temperatures (the forward model
 * of Frenkel 1938 as written by Chiu 2014, eq. 8): refit fits each sweep at the temperature its
 * note gives and says so; tseries says plainly when the Arrhenius energy is negative. The true
 * dynamic permittivity is 4.0 (a refractive index of 2, ε_r = n²).
 */
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { pooleFrenkel } from '../../daemon/analysis/mechanisms/poole-frenkel.js';
import { seededNormal } from '../../daemon/analysis/random.js';
import { JournalWriter } from '../../daemon/journal/journal.js';
import { refitSession } from '../../daemon/journal/refit.js';
import { temperatureSeries } from '../../daemon/journal/tseries.js';
import { runCli } from '../helpers/cli.js';
import { tempDir } from '../helpers/daemon.js';

/** Sweeps measured at `temps`, with notes that claim `noted` (the same, unless a test lies). */
function session(temps: number[], noted = temps): string {
  const data = join(tempDir(), 'data');
  const { writer, id } = JournalWriter.create(data, 'pf-temperatures');
  const inputs = { thickness: 2e-8, area: 1e-8, refractiveIndex: 2, temperature: 300 };
  writer.event({
    type: 'session',
    id,
    startedAt: new Date().toISOString(),
    source: { kind: 'test', detail: 'forward model', control: false },
    instrument: '-',
    plan: null,
    analysis: { model: 'poole-frenkel', window: { from: 4, to: 12 }, inputs },
    drift: {},
    limits: {},
  });
  const normal = seededNormal(5);
  temps.forEach((T, s) => {
    writer.event({ type: 'sweep-start', sweep: s + 1, planned: 41, label: '' });
    for (let k = 0; k <= 40; k++) {
      const v = 0.3 * k;
      const j = k === 0 ? 0 : pooleFrenkel(v / 2e-8, 1e-2, 1.0, 4.0, T);
      writer.reading(s + 1, k, v, j * 1e-8 * (1 + 0.003 * normal()), 0);
    }
    writer.event({ type: 'sweep-end', sweep: s + 1, points: 41, complete: true });
    writer.event({ type: 'annotation', text: `T = ${noted[s]} K`, tags: [], sweep: s + 1, source: 'watch' });
  });
  writer.event({ type: 'run-end', outcome: 'completed', reason: 'test', sweeps: temps.length });
  writer.close();
  return join(data, id);
}

describe('refit', () => {
  it('fits each sweep at the temperature of its note, and says so', () => {
    const dir = session([300, 350, 400]);
    const r = refitSession(dir, {}, join(tempDir(), 'refit.json'));
    expect(r.sweeps.map((s) => s.temperature)).toEqual([300, 350, 400].map((value) => ({ value, source: 'note' })));
    for (const s of r.sweeps) {
      const eps = s.fit?.parameters.relativePermittivity;
      // At the session's 300 K the slope of the 400 K sweep would read ε_r = 4·(400/300)² ≈ 7.1.
      expect(Math.abs((eps?.value ?? 0) - 4), `sweep ${s.sweep}: ${eps?.value} ± ${eps?.stdErr}`).toBeLessThan(Math.max(3 * (eps?.stdErr ?? 0), 0.05));
    }
    expect(r.inputs.thickness).toEqual({ value: 2e-8, source: 'session' });
    // A temperature given on the command line wins over the notes.
    const given = refitSession(dir, { inputs: { temperature: 320 } }, join(tempDir(), 'refit2.json'));
    expect(given.sweeps.every((s) => s.temperature.value === 320 && s.temperature.source === 'given')).toBe(true);
  });

  it("the command prints the inputs it used and each fit's warnings", () => {
    const dir = session([300, 350, 400]);
    const r = runCli(['refit', dir, '--model', 'schottky', '--out', join(tempDir(), 'r.json')]);
    expect(r.code, r.stderr).toBe(0);
    expect(r.stdout).toMatch(/inputs: .*thickness 20 nm \(the session's\)/);
    expect(r.stdout).toMatch(/temperature 300–400 K from the sweeps' notes for 3 sweeps/);
    expect(r.stdout).toMatch(/T = 400 K from its note/);
    // Poole–Frenkel data read as Schottky emission give ε_r four times too small: the fit says so.
    expect(r.stdout).toMatch(/^warning \(sweeps? [\d, …]+\): /m);
  });
});

describe('tseries', () => {
  it('a negative activation energy is reported as not plausible, in words', () => {
    // The notes have the temperatures in reverse: the current seems to fall as T rises.
    const dir = session([300, 350, 400], [400, 350, 300]);
    const r = temperatureSeries(dir, {});
    expect(r.result.activationEnergy.value).toBeLessThan(0);
    expect(r.plausible).toBe(false);
    expect(r.warnings[0]).toMatch(/is negative: the intercept grows as the temperature falls/);
    const cli = runCli(['tseries', dir]);
    expect(cli.stdout).toMatch(/\(NOT plausible\)/);
    expect(cli.stdout).toMatch(/^warning: the activation energy -/m);
  });

  it('the true order gives the trap depth with no warning', () => {
    const r = temperatureSeries(session([300, 350, 400]), {});
    expect(r.plausible).toBe(true);
    expect(r.warnings).toEqual([]);
    expect(Math.abs(r.result.activationEnergy.value - 1.0)).toBeLessThan(3 * r.result.activationEnergy.stdErr + 1e-3);
  });
});
