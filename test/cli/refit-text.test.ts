/**
 * `plumbline refit` prints each sweep's fit the way `run` does (formatSweepFit), so a fit the
 * analysis marks implausible says NOT PLAUSIBLE on its line, and the text ends as `fit`'s does.
 * The session: a quick simulated run of the silicon-nitride Poole–Frenkel scenario. Read as
 * Schottky emission, Poole–Frenkel data give a dynamic permittivity four times too small (the
 * lowering of the barrier is twice the Schottky one: Chiu, Adv. Mater. Sci. Eng. 2014, 578168),
 * here below 1, which the analysis marks implausible.
 */
import { readdirSync, readFileSync } from 'node:fs';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { runCli } from '../helpers/cli.js';
import { tempDir } from '../helpers/daemon.js';

describe('refit text', () => {
  it('marks each implausible sweep NOT PLAUSIBLE, as run and fit do; a plausible refit carries no mark', () => {
    const data = join(tempDir(), 'data');
    const run = runCli(['run', '--scenario', 'nitride-pf', '--fast', '--sweeps', '2', '--data', data]);
    expect(run.code, run.stderr).toBe(0);
    const session = join(data, readdirSync(data)[0]);

    const out = join(tempDir(), 'schottky.json');
    const r = runCli(['refit', session, '--model', 'schottky', '--thickness', '20 nm', '--out', out]);
    expect(r.code, r.stderr).toBe(0);
    const json = JSON.parse(readFileSync(out, 'utf8'));
    expect(json.sweeps.map((s: { fit: { plausible: boolean } }) => s.fit.plausible)).toEqual([false, false]);
    const lines = r.stdout.trim().split('\n');
    const sweepLines = lines.filter((l) => /^ {2}sweep +\d+: /.test(l));
    expect(sweepLines).toHaveLength(2);
    for (const l of sweepLines) expect(l).toMatch(/^ {2}sweep +\d: schottky fit on \d+ points, relativePermittivity = .* — NOT PLAUSIBLE$/);
    // The reason is among the warnings, and the last line says it as fit's last line does.
    expect(r.stdout).toMatch(/^warning \(sweep 1\): dynamic permittivity = 0\.\d+ is outside the plausible range/m);
    expect(lines.at(-1)).toBe('NOT PLAUSIBLE (sweeps 1, 2): the parameters above do not describe this device as fitted (see the warnings)');

    const own = runCli(['refit', session, '--out', join(tempDir(), 'own.json')]);
    expect(own.code, own.stderr).toBe(0);
    expect(own.stdout).toMatch(/^ {2}sweep +1: poole-frenkel fit on \d+ points, relativePermittivity = /m);
    expect(own.stdout).not.toMatch(/NOT PLAUSIBLE/);
  });

  it("says which temperature it used for how many sweeps: the value, and whether assumed, given, the session's or from a note", () => {
    // The oxide scenario's session records no temperature; Poole–Frenkel needs one.
    const data = join(tempDir(), 'data');
    const run = runCli(['run', '--scenario', 'oxide-fn', '--fast', '--sweeps', '2', '--data', data]);
    expect(run.code, run.stderr).toBe(0);
    const session = join(data, readdirSync(data)[0]);
    const inputsLine = (args: string[]) => {
      const r = runCli(['refit', session, '--model', 'poole-frenkel', '--out', join(tempDir(), 'r.json'), ...args]);
      expect(r.code, r.stderr).toBe(0);
      return r.stdout.split('\n').find((l) => l.startsWith('inputs: ')) ?? '';
    };
    expect(inputsLine([])).toMatch(/; temperature 300 K assumed for 2 sweeps$/);
    expect(inputsLine(['--temperature', '350 K'])).toMatch(/; temperature 350 K given for 2 sweeps$/);
    // A note on sweep 1 ("T = 325 K", as watch --temperature-column writes them) sets that sweep's.
    expect(runCli(['annotate', session, '--sweep', '1', '--text', 'T = 325 K']).code).toBe(0);
    expect(inputsLine([])).toMatch(/; temperature 325 K from the sweeps' notes for 1 sweep, 300 K assumed for 1 sweep$/);
  });
});
