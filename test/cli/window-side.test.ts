/**
 * A manual fit window lies on one side of zero bias: each polarity of a film is its own branch
 * (|V| is the mechanism's bias), so a window from one branch into the other is refused — on the
 * command line naming --from/--to, in the settings (station config, REST API, page) naming
 * window.from/window.to — and a window on one branch is fitted as before. The sweep is a
 * Fowler–Nordheim film (Lenzlinger & Snow 1969) of barrier 3.1 eV from test/helpers/whole-sweep.ts.
 */
import { describe, expect, it } from 'vitest';
import { analyze } from '../../daemon/analysis/analyze.js';
import { AnalysisError } from '../../daemon/analysis/errors.js';
import { analysisSchema, zodMessage } from '../../daemon/pipeline/settings.js';
import { runCli, tempFile } from '../helpers/cli.js';
import { FN_OXIDE_BOTH_POLARITIES, toCsv, wholeSweep } from '../helpers/whole-sweep.js';

const spec = FN_OXIDE_BOTH_POLARITIES;
const args = ['--model', 'fowler-nordheim', '--thickness', '7 nm', '--area', '1e-4 cm^2', '--mass-ratio', '0.42'];

describe('a fit window across zero bias', () => {
  const file = tempFile('fn.csv', toCsv(wholeSweep({ ...spec, seed: 11 })));

  it('fit and rank refuse it as a usage error naming --from/--to, with a window on each branch to give instead', () => {
    for (const cmd of [
      ['fit', file, ...args],
      ['rank', file, '--thickness', '7 nm', '--area', '1e-4 cm^2', '--mass-ratio', '0.42'],
    ]) {
      const r = runCli([...cmd, '--from', '-9', '--to', '5']);
      expect(r.code, `${cmd[0]}: ${r.stdout}`).toBe(2);
      expect(r.stdout).toBe('');
      expect(r.stderr).toMatch(/--from\/--to: the window -9 to 5 V spans zero bias; a window must lie on one side of zero bias \(one branch/);
      expect(r.stderr).toMatch(/e\.g\. --from 4\.5 --to 9 or --from -9 --to -4\.5/);
    }
  });

  it('the suggested windows fit, each on its own branch', () => {
    for (const w of [
      ['4.5', '9'],
      ['-9', '-4.5'],
    ]) {
      const r = runCli(['fit', file, ...args, '--from', w[0], '--to', w[1], '--json']);
      expect(r.code, r.stderr).toBe(0);
      const out = JSON.parse(r.stdout);
      expect(out.window.mode).toBe('manual');
      expect(Math.sign(out.window.from)).toBe(Math.sign(Number(w[0])));
      expect(Math.abs(out.parameters.barrierHeight.value - 3.1)).toBeLessThan(0.05);
    }
  });

  it('the settings (config, REST API, page) and the analysis refuse it by the same rule, naming window.from/window.to', () => {
    const raw = { model: 'fowler-nordheim', window: { from: -9, to: 5 } };
    const r = analysisSchema.safeParse(raw);
    expect(r.success).toBe(false);
    if (!r.success)
      expect(zodMessage(r.error, 'analysis', raw, analysisSchema)).toMatch(
        /^analysis: field 'window': window\.from\/window\.to: the window -9 to 5 V spans zero bias; .*"window": \{ "from": 4\.5, "to": 9 \}/,
      );
    // The flat band is the branches' zero: -0.5 to 5 V lies on one side of V_FB = -0.9 V.
    expect(analysisSchema.safeParse({ model: 'fowler-nordheim', window: { from: -0.5, to: 5 }, inputs: { flatBand: -0.9 } }).success).toBe(true);
    expect(analysisSchema.safeParse({ model: 'fowler-nordheim', window: { from: -2, to: 5 }, inputs: { flatBand: -0.9 } }).success).toBe(false);
    // A mechanism of the raw bias (a straight line through both polarities) takes any window.
    expect(analysisSchema.safeParse({ model: 'linear', window: { from: -9, to: 5 } }).success).toBe(true);
    const sweep = wholeSweep({ ...spec, seed: 11 });
    let err: unknown;
    try {
      analyze({ x: sweep.v, y: sweep.i }, { model: 'fowler-nordheim', window: { from: -9, to: 5 }, inputs: { thickness: 7e-9, area: 1e-8, massRatio: 0.42 } });
    } catch (e) {
      err = e;
    }
    expect(err).toBeInstanceOf(AnalysisError);
    expect((err as AnalysisError).code).toBe('BAD_WINDOW');
  });
});
