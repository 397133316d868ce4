/**
 * `plumbline weibull` and `plumbline lot` run as a user runs them (the built command), on CSV files,
 * results files and session folders.
 */
import { existsSync, mkdtempSync, readFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { analyzeWeibull, areaScaledScale } from '../../daemon/analysis/weibull.js';
import { seededUniform } from '../../daemon/analysis/random.js';
import { runCli, tempFile } from '../helpers/cli.js';
import { PROJECT_ROOT } from '../helpers/reference.js';
import { writeSession } from '../helpers/lot.js';

const EXAMPLE = join(PROJECT_ROOT, 'config', 'examples', 'w07-voltage-ramp.csv');

function draws(n: number, shape: number, scale: number, seed: number): number[] {
  const u = seededUniform(seed);
  return Array.from({ length: n }, () => scale * (-Math.log(u())) ** (1 / shape));
}

describe('plumbline weibull', () => {
  it("a CSV with one value per device and a survivor column: the --json object has the fixed shape and the analysis's numbers", () => {
    const x = draws(25, 9, 1.1e9, 5);
    const cens = x.map((v) => v > 1.2e9);
    const file = tempFile('ebd.csv', `device,E_bd,survived\n${x.map((v, k) => `d${k},${Math.min(v, 1.2e9)},${cens[k] ? 1 : 0}`).join('\n')}\n`);
    const r = runCli(['weibull', file, '--quantity', 'E_bd', '--unit', 'V/m', '--json']);
    expect(r.stderr).toBe('');
    expect(r.code).toBe(0);
    const j = JSON.parse(r.stdout);
    for (const k of ['n', 'failures', 'censored', 'shape', 'scale', 'method', 'points', 'warnings']) expect(j).toHaveProperty(k);
    expect(Object.keys(j.shape).sort()).toEqual(['high', 'low', 'value']);
    expect(Object.keys(j.scale).sort()).toEqual(['high', 'low', 'unit', 'value']);
    expect(Object.keys(j.points[0]).sort()).toEqual(['F', 'x']);
    expect(j.censored).toBe(cens.filter(Boolean).length);
    expect(j.n).toBe(25);
    const direct = analyzeWeibull({ values: x.map((v) => Math.min(v, 1.2e9)), censored: cens }, { unit: 'V/m' });
    expect(j.shape.value).toBe(direct.shape.value);
    expect(j.scale).toEqual({ ...direct.scale, unit: 'V/m' });
    expect(j.points).toHaveLength(direct.failures);
  });

  it("the invented example lot: text in the trade's units, the early-failure warning, area scaling through β", () => {
    const r = runCli(['weibull', EXAMPLE, '--to-area', '1 cm^2']);
    expect(r.code).toBe(0);
    expect(r.stdout).toMatch(/29 device\(s\), 28 broke down, 1 survived/);
    expect(r.stdout).toMatch(/scale η = 11\.\d+ MV\/cm/);
    expect(r.stdout).toMatch(/1 initial failure/);
    expect(r.stdout).toMatch(/WARNING: the Weibull plot bends at 5\.07 MV\/cm/);
    const j = JSON.parse(runCli(['weibull', EXAMPLE, '--to-area', '1 cm^2', '--json']).stdout);
    // Area scaling: η(1 cm²) = η(1e-4 cm²)·(1e-4)^(1/β) (weakest-link area scaling).
    expect(j.areaScaling.scale.value).toBeCloseTo(areaScaledScale(j.scale.value, j.shape.value, 1e-8, 1e-4), -1);
    expect(j.areaScaling.scale.low).toBeLessThan(j.areaScaling.scale.value);
    const fisher = JSON.parse(runCli(['weibull', EXAMPLE, '--bounds', 'fisher', '--confidence', '95%', '--json']).stdout);
    expect(fisher.bounds).toEqual({ method: 'fisher', confidence: 0.95 });
    expect(fisher.shape.value).toBe(j.shape.value);
  });

  it('session folders and data folders: the per-device results beside the journals', () => {
    const data = mkdtempSync(join(tmpdir(), 'plumbline-wb-'));
    const x = draws(12, 10, 1.2e9, 8);
    x.forEach((v, k) =>
      writeSession(data, {
        label: `dev${k}`,
        device: { device: `D${k}`, wafer: 'W1', area: 1e-8 },
        results: [{ device: `D${k}`, test: 'voltage-ramp', outcome: 'breakdown', breakdownField: v, chargeToBreakdown: v * 1e-9, area: 1e-8 }],
      }),
    );
    const a = JSON.parse(runCli(['weibull', data, '--json']).stdout);
    const direct = analyzeWeibull({ values: x }, { unit: 'V/m' });
    expect(a.n).toBe(12);
    expect(a.shape.value).toBeCloseTo(direct.shape.value, 12);
    expect(a.scale.unit).toBe('V/m');
    const q = JSON.parse(runCli(['weibull', data, '--quantity', 'charge', '--json']).stdout);
    expect(q.scale.unit).toBe('C/m^2');
    expect(q.shape.value).toBeCloseTo(direct.shape.value, 10);
  });

  it('results of several kinds of test are not pooled unasked: --test chooses one, --test all pools them', () => {
    // A ramp's breakdown field and a constant-voltage stress's field are not draws of one
    // distribution (JEDEC JESD35-A keeps the tests apart): pooling them silently mixes two lots.
    const data = mkdtempSync(join(tmpdir(), 'plumbline-wbk-'));
    const ramp = draws(10, 12, 1.2e9, 21);
    const cvs = draws(6, 30, 0.9e9, 22);
    ramp.forEach((v, k) =>
      writeSession(data, { label: `r${k}`, results: [{ device: `R${k}`, test: 'voltage-ramp', outcome: 'breakdown', breakdownField: v }] }),
    );
    cvs.forEach((v, k) =>
      writeSession(data, { label: `c${k}`, results: [{ device: `C${k}`, test: 'constant-voltage', outcome: 'breakdown', breakdownField: v }] }),
    );
    let r = runCli(['weibull', data]);
    expect(r.code).toBe(2);
    expect(r.stdout).toBe('');
    expect(r.stderr).toMatch(/2 kinds of test: .*voltage-ramp \(10\).*constant-voltage \(6\).*--test KIND.*--test all/);
    const one = JSON.parse(runCli(['weibull', data, '--test', 'voltage-ramp', '--json']).stdout);
    expect(one.n).toBe(10);
    expect(one.shape.value).toBeCloseTo(analyzeWeibull({ values: ramp }).shape.value, 10);
    const all = JSON.parse(runCli(['weibull', data, '--test', 'all', '--json']).stdout);
    expect(all.n).toBe(16);
    expect(all.notes.join(' ')).toMatch(/2 kinds of test pooled/);
    r = runCli(['weibull', data, '--test', 'ramp']);
    expect(r.code).toBe(2);
    expect(r.stderr).toMatch(/--test 'ramp': the results hold .*\(kinds of test: voltage-ramp, current-ramp, constant-voltage, constant-current, or all\)/);
    r = runCli(['weibull', data, '--test', 'current-ramp']);
    expect(r.code).toBe(2);
    expect(r.stderr).toMatch(/--test 'current-ramp': the results hold voltage-ramp \(10\), constant-voltage \(6\)$/m);
    // The lot report refuses the pooled fit but still reports the devices; --test gives the fit.
    const out = join(data, 'lot.html');
    r = runCli(['lot', data, '--out', out]);
    expect(r.code).toBe(0);
    expect(r.stdout).toMatch(/no Weibull fit: the results hold 2 kinds of test/);
    expect(readFileSync(out, 'utf8')).toMatch(/No Weibull fit: the results hold 2 kinds of test/);
    r = runCli(['lot', data, '--out', out, '--test', 'constant-voltage', '--quantity', 'field']);
    expect(r.stdout).toMatch(/Weibull breakdown field: β = [\d.]+, η = [\d.]+ MV\/cm \(6 breakdowns, 0 survived\)/);
    r = runCli(['lot', data, '--out', out, '--test', 'cvs']);
    expect(r.code).toBe(2);
    expect(r.stderr).toMatch(
      /--test 'cvs': expected one of voltage-ramp, current-ramp, constant-voltage, constant-current \(optionally \/positive or \/negative\), or all/,
    );
  });

  it('constant-voltage stress: the failure time by default, and a warning when stress levels are pooled or the held field is asked for', () => {
    // A held stress sets the field; what varies from device to device is the time (or charge) to
    // breakdown, and it falls steeply as the stress rises (common practice: one Weibull per level).
    const data = mkdtempSync(join(tmpdir(), 'plumbline-wbc-'));
    const at8 = draws(8, 1.5, 300, 31);
    at8.forEach((t, k) =>
      writeSession(data, {
        label: `s8-${k}`,
        results: [
          {
            device: `A${k}`,
            test: 'constant-voltage',
            outcome: 'breakdown',
            breakdownVoltage: 8,
            breakdownField: (8 / 7e-9) * (1 + 1e-4 * k),
            timeToBreakdown: t,
          },
        ],
      }),
    );
    let j = JSON.parse(runCli(['weibull', data, '--json']).stdout);
    expect(j.n).toBe(8);
    expect(j.scale.unit).toBe('s');
    expect(j.shape.value).toBeCloseTo(analyzeWeibull({ values: at8 }).shape.value, 10);
    expect(j.warnings.join(' ')).not.toMatch(/stress levels pooled/);
    let r = runCli(['weibull', data]);
    expect(r.stdout).toMatch(/Weibull analysis of time to breakdown: 8 device\(s\)/);
    // The held field (equal but for the readback's scatter): not the default, warned about when asked for.
    j = JSON.parse(runCli(['weibull', data, '--quantity', 'field', '--json']).stdout);
    expect(j.warnings.join(' ')).toMatch(/constant-voltage stress results: their breakdown field is the stress the test held/);
    // A second stress level in the same folder: pooled only with a warning naming both levels.
    writeSession(data, {
      label: 's75',
      results: [{ device: 'B0', test: 'constant-voltage', outcome: 'breakdown', breakdownVoltage: 7.5, breakdownField: 7.5 / 7e-9, timeToBreakdown: 5000 }],
    });
    r = runCli(['weibull', data]);
    expect(r.code).toBe(0);
    expect(r.stdout).toMatch(/WARNING: 2 stress levels pooled \(7\.5 V, 8 V\): the time to breakdown falls steeply/);
    const out = join(data, 'lot.html');
    r = runCli(['lot', data, '--out', out]);
    expect(r.code).toBe(0);
    expect(r.stdout).toMatch(/Weibull time to breakdown: β = [\d.]+/);
  });

  it('bad input says what and where, exit 2', () => {
    const noCol = tempFile('v.csv', 'a,b\n1,2\n3,4\n');
    let r = runCli(['weibull', noCol]);
    expect(r.code).toBe(2);
    expect(r.stderr).toMatch(/v\.csv: --quantity: name the column/);
    r = runCli(['weibull', noCol, '--quantity', 'c']);
    expect(r.stderr).toMatch(/column 'c': --quantity: no such column \(columns: a, b\)/);
    const neg = tempFile('n.csv', 'E\n1e9\n-3\n');
    r = runCli(['weibull', neg, '--quantity', 'E']);
    expect(r.code).toBe(2);
    expect(r.stderr).toMatch(/n\.csv, line 3, column 'E': -3 is not a positive value/);
    // A bare area is m²: "--to-area 1" would scale to a square metre.
    r = runCli(['weibull', neg, '--quantity', 'E', '--to-area', '1']);
    expect(r.code).toBe(2);
    expect(r.stderr).toMatch(/--to-area '1': a bare number is read in square metres.*"1 cm\^2"/);
    // Values in the trade's unit are converted (1 MV/cm = 1e8 V/m): the same fit as in SI.
    const si = JSON.parse(runCli(['weibull', tempFile('si.csv', 'E\n1.1e9\n1.2e9\n1.35e9\n'), '--quantity', 'E', '--unit', 'V/m', '--json']).stdout);
    const mv = JSON.parse(runCli(['weibull', tempFile('mv.csv', 'E\n11\n12\n13.5\n'), '--quantity', 'E', '--unit', 'MV/cm', '--json']).stdout);
    expect(mv.scale.unit).toBe('V/m');
    expect(mv.scale.value / si.scale.value).toBeCloseTo(1, 9);
    expect(mv.shape.value / si.shape.value).toBeCloseTo(1, 9);
    r = runCli(['weibull', tempFile('u.csv', 'E\n1.1e9\n1.2e9\n1.3e9\n'), '--quantity', 'E', '--unit', 'kg']);
    expect(r.code).toBe(2);
    expect(r.stderr).toMatch(/--unit 'kg': not a unit of a breakdown value/);
    r = runCli(['weibull', EXAMPLE, '--confidence', '1.2']);
    expect(r.stderr).toMatch(/--confidence '1.2'/);
    r = runCli(['weibull', '/no/such/dir']);
    expect(r.stderr).toMatch(/\/no\/such\/dir: the file or folder does not exist; check the path/);
    const one = tempFile('o.csv', 'E,survived\n1e9,0\n2e9,1\n');
    r = runCli(['weibull', one, '--quantity', 'E']);
    expect(r.code).toBe(1);
    expect(r.stderr).toMatch(/at least two devices that broke down; got 1 of 2/);
    r = runCli(['weibull', EXAMPLE, '--to-area', '1 cm']);
    expect(r.stderr).toMatch(/--to-area '1 cm': expected an area/);
  });
});

describe('plumbline lot', () => {
  it('writes the report and reads the summaries from the cache the second time', () => {
    const data = mkdtempSync(join(tmpdir(), 'plumbline-lotcli-'));
    const x = draws(9, 10, 1.2e9, 3);
    x.forEach((v, k) =>
      writeSession(data, {
        label: `s${k}`,
        device: { device: `D${k}`, wafer: 'W1', site: `S${k}`, x: k % 3, y: Math.floor(k / 3), area: 1e-8 },
        fits: [{ params: { barrierHeight: [3.1 + 0.01 * k, 0.01, 'eV'] } }],
        results: [{ device: `D${k}`, test: 'voltage-ramp', outcome: 'breakdown', breakdownField: v }],
      }),
    );
    const out = join(data, 'lot.html');
    let r = runCli(['lot', data, '--out', out]);
    expect(r.code).toBe(0);
    expect(r.stdout).toMatch(/lot report of 9 device\(s\) from 9 session\(s\) written to .*lot\.html \(0 summaries from the cache/);
    expect(existsSync(out)).toBe(true);
    r = runCli(['lot', data, '--out', out, '--map', 'barrierHeight']);
    expect(r.stdout).toMatch(/\(9 summaries from the cache/);
    const html = readFileSync(out, 'utf8');
    expect(html).toContain('Wafer map: barrierHeight');
    const j = JSON.parse(runCli(['lot', data, '--out', out, '--json']).stdout);
    expect(j.rows).toHaveLength(9);
    expect(j.weibull.n).toBe(9);
    // A wafer-map parameter the lot does not have is an error naming the option and what there is;
    // the report already written stays as it was.
    const before = readFileSync(out, 'utf8');
    r = runCli(['lot', data, '--out', out, '--map', 'barrier']);
    expect(r.code).toBe(2);
    expect(r.stderr).toMatch(/--map 'barrier': no such parameter in this lot \(have: barrierHeight, breakdown field;/);
    expect(readFileSync(out, 'utf8')).toBe(before);
    r = runCli(['lot', data, '--out', out, '--quantity', 'fields']);
    expect(r.code).toBe(2);
    expect(r.stderr).toMatch(/--quantity 'fields': expected field \| voltage \| charge \| time/);
    r = runCli(['lot', join(data, 'nothing-here'), '--out', out]);
    expect(r.code).toBe(2);
    expect(r.stderr).toMatch(/nothing-here: the folder does not exist; check the path/);
  });
});
