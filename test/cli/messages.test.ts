/**
 * Messages a newcomer meets: a temperature typed as "25 C" (which reads as 25 coulomb) says how to
 * write degrees Celsius; a broken plan file says where; a missing folder is called missing.
 */
import { describe, expect, it } from 'vitest';
import { spawnSync } from 'node:child_process';
import { existsSync, readdirSync } from 'node:fs';
import { dirname, join } from 'node:path';
import { CLI, runCli, tempFile } from '../helpers/cli.js';

describe('messages', () => {
  const file = tempFile(
    'iv.csv',
    `V,I\n${Array.from({ length: 12 }, (_x, k) => `${0.05 * (k + 1)},${1e-12 * Math.exp((0.05 * (k + 1)) / 0.03)}`).join('\n')}\n`,
  );
  for (const typed of ['25 C', '25 °C']) {
    it(`--temperature "${typed}" points to degC`, () => {
      const r = runCli(['fit', file, '--model', 'diode', '--temperature', typed]);
      expect(r.code).toBe(2);
      expect(r.stderr).toMatch(/--temperature .*for degrees Celsius write "25 degC"/);
    });
  }

  it('a CSV given where a session folder is expected is called a file, with what to use instead (exit 2, no stack trace)', () => {
    for (const cmd of ['export', 'report']) {
      const r = runCli([cmd, file]);
      expect(r.code, cmd).toBe(2);
      expect(r.stderr).toMatch(/iv\.csv is a file, not a session folder .*plumbline fit or rank/);
      expect(r.stderr).not.toMatch(/ENOTDIR|at \w+ \(/);
    }
  });

  it('a path that does not exist is named and said not to exist, in one wording, by every command that reads one (exit 2); export makes nothing', () => {
    const dir = dirname(file);
    const cases: [string[], string][] = [
      [['fit', join(dir, 'no.csv'), '--model', 'ohmic'], `${join(dir, 'no.csv')}: the file does not exist; check the path`],
      [['rank', join(dir, 'no.csv')], `${join(dir, 'no.csv')}: the file does not exist; check the path`],
      [['weibull', join(dir, 'no.csv')], `${join(dir, 'no.csv')}: the file or folder does not exist; check the path`],
      [['run', '--scenario', 'oxide-fn', '--fast', '--plan', join(dir, 'no.json')], `plan ${join(dir, 'no.json')}: the file does not exist; check the path`],
    ];
    for (const cmd of ['export', 'report', 'recover', 'lot'])
      cases.push([[cmd, join(dir, 'nope')], `${join(dir, 'nope')}: the folder does not exist; check the path`]);
    for (const cmd of ['refit', 'tseries'])
      cases.push([[cmd, join(dir, 'nope'), '--model', 'ohmic'], `${join(dir, 'nope')}: the folder does not exist; check the path`]);
    for (const [args, message] of cases) {
      const r = runCli(args);
      expect(r.code, args.join(' ')).toBe(2);
      expect(r.stderr, args.join(' ')).toContain(message);
      expect(r.stderr).not.toMatch(/ENOENT|at \w+ \(/);
    }
    expect(existsSync(join(dir, 'nope'))).toBe(false);
    // A relative path is shown as it was looked for.
    const rel = spawnSync(process.execPath, [CLI, 'fit', 'no.csv', '--model', 'ohmic'], { cwd: dir, encoding: 'utf8' });
    expect(rel.stderr).toContain(`no.csv: the file does not exist (looked for ${join(dir, 'no.csv')}); check the path`);
  });

  it('a misspelt scenario or plan kind is told the one meant (exit 2)', () => {
    const r = runCli(['run', '--scenario', 'oxide-fnn', '--fast']);
    expect(r.code).toBe(2);
    expect(r.stderr).toMatch(/no scenario 'oxide-fnn' \(did you mean 'oxide-fn'\?\); known: /);
    const f = tempFile('plan.json', JSON.stringify({ kind: 'adaptve', start: 0, stop: 9, maxPoints: 200, compliance: 1e-3 }));
    const p = runCli(['run', '--scenario', 'oxide-fn', '--fast', '--plan', f]);
    expect(p.code).toBe(2);
    expect(p.stderr).toMatch(/field 'kind': 'adaptve' is not a plan kind \(did you mean 'adaptive'\?\)/);
  });

  it('a misspelt model is told the one meant, by every command that takes --model (exit 2), naming the option or field', () => {
    const dir = dirname(file);
    const data = join(dir, 'data');
    const run = runCli(['run', '--scenario', 'oxide-fn', '--fast', '--sweeps', '1', '--data', data]);
    expect(run.code, run.stderr).toBe(0);
    const session = join(data, readdirSync(data)[0]);
    const cases: [string[], RegExp][] = [
      [['fit', file, '--model', 'ohmc'], /--model: unknown model 'ohmc' \(did you mean 'ohmic'\?\); choose one of: .*fowler-nordheim/],
      // fit also takes the diode models, and suggests among them.
      [['fit', file, '--model', 'single-diod'], /--model: unknown model 'single-diod' \(did you mean 'single-diode'\?\)/],
      [
        ['run', '--scenario', 'oxide-fn', '--fast', '--model', 'fowler-nordhiem', '--data', data],
        /field 'model': unknown model 'fowler-nordhiem' \(did you mean 'fowler-nordheim'\?\)/,
      ],
      [['watch', file, '--model', 'powerlaw', '--data', data], /field 'model': unknown model 'powerlaw' \(did you mean 'power-law'\?\)/],
      [['refit', session, '--model', 'pool-frenkel'], /unknown model 'pool-frenkel' \(did you mean 'poole-frenkel'\?\).*\[model\]/],
      [['tseries', session, '--model', 'schotky'], /unknown model 'schotky' \(did you mean 'schottky'\?\).*\[model\]/],
    ];
    for (const [args, re] of cases) {
      const r = runCli(args);
      expect(r.code, args.join(' ')).toBe(2);
      expect(r.stderr, args.join(' ')).toMatch(re);
    }
    // Nothing close: no suggestion, the list still given.
    const far = runCli(['fit', file, '--model', 'magic']);
    expect(far.stderr).toMatch(/unknown model 'magic'; choose one of: /);
    // Only the first run made a session.
    expect(readdirSync(data)).toHaveLength(1);
  });

  it('plan mistakes in words a person acts on: a missing field, a quantity written as text, a misspelt key (with the one meant), a number out of its range', () => {
    const cases: [unknown, RegExp][] = [
      [{ start: 0, stop: 5, points: 11 }, /plan\.json: field 'compliance': missing \(a number, in SI units\)/],
      [{ start: 0, stop: 5, points: 11, compliance: '1 mA' }, /field 'compliance': '1 mA' is text; .*write the number, e\.g\. 0\.001 for 1 mA/],
      [{ start: 0, stop: 5, pionts: 11, compliance: 1e-3 }, /unknown field 'pionts' \(did you mean 'points'\?\)/],
      [{ start: 0, stop: 9, ponts: 91, compliance: 1e-3 }, /unknown field 'ponts' \(did you mean 'points'\?\)/],
      [
        { kind: 'voltage-ramp', stop: 5, step: 0.1, stepTime: 0.1, compliance: 1e-3, criteria: { slopeFactr: 3 } },
        /field 'criteria': unknown field 'slopeFactr' \(did you mean 'slopeFactor'\?\)/,
      ],
      [
        { kind: 'adaptive', start: 0, stop: 9, maxPoints: 200, compliance: 1e-3, target: { parameter: 'barrierHeight', stdErr: -1 } },
        /field 'target\.stdErr': -1 is too small: it must be more than 0/,
      ],
      [{ start: 0, stop: 5, points: 1, compliance: 1e-3 }, /field 'points': 1 is too small: it must be at least 2/],
      // A target's error in its parameter's unit, not a current's; a misspelt target named with the file.
      [
        { kind: 'adaptive', start: 0, stop: 9, maxPoints: 200, compliance: 1e-3, target: { parameter: 'barrierHeight', stdErr: '0.5 meV' } },
        /plan\.json: field 'target\.stdErr': '0\.5 meV' is text; .*in the parameter's SI unit, e\.g\. 0\.0005 for 0\.5 meV/,
      ],
      [
        { kind: 'adaptive', start: 0, stop: 9, maxPoints: 200, compliance: 1e-3, target: { parameter: 'barrierHieght', stdErr: 5e-4 } },
        /plan\.json: field 'target\.parameter': 'barrierHieght' is not a parameter of the fowler-nordheim fit \(it gives barrierHeight/,
      ],
    ];
    for (const [plan, re] of cases) {
      const f = tempFile('plan.json', JSON.stringify(plan));
      const r = runCli(['run', '--scenario', 'oxide-fn', '--fast', '--plan', f]);
      expect(r.code, JSON.stringify(plan)).toBe(2);
      expect(r.stderr).toMatch(re);
    }
    // Beyond the station's limits: the guard's refusal names the plan file and the station setting.
    const high = tempFile('plan.json', JSON.stringify({ start: 0, stop: 50, points: 11, compliance: 1e-3 }));
    const g = runCli(['run', '--scenario', 'oxide-fn', '--fast', '--plan', high]);
    expect(g.code).toBe(7);
    expect(g.stderr).toMatch(
      /refused by the safety guard: .*plan\.json: plan stop = 50 V exceeds the station limit maxVoltage = 20 V \(station setting 'maxVoltage'\)/,
    );
  });

  it('a plan file that is not valid JSON names its line and column; a folder that does not exist is said to be missing', () => {
    const plan = tempFile('bad-plan.json', '{ "kind": "linear",\n  "start": 0, stop: 1 }\n');
    const r = runCli(['run', '--scenario', 'oxide-fn', '--fast', '--plan', plan]);
    expect(r.code).toBe(2);
    expect(r.stderr).toMatch(/bad-plan\.json, line 2, column 15: not valid JSON/);
    const rep = runCli(['report', '/no/such/session']);
    expect(rep.code).toBe(2);
    expect(rep.stderr).toMatch(/\/no\/such\/session: the folder does not exist; check the path/);
  });
});
