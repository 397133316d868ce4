/**
 * `plumbline fit --model single-diode|double-diode|cheung` and `plumbline solar` as a user runs them
 * (the built command), on the R.T.C. France cell of Easwarakhanthan et al., Int. J. Solar Energy 4,
 * 1–12 (1986) — recorded here as an SMU records it (current into the device positive) — and on the
 * synthetic Cheung–Cheung diode (n = 1.10, φ_B = 0.70 eV, R_s = 10 Ω; Cheung & Cheung 1986). Expected values: see
 * test/analysis/diode.test.ts (published fits, from memory; hand interpolation of the data).
 */
import { mkdtempSync, readdirSync, readFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { thermalVoltage } from '../../daemon/analysis/constants.js';
import { diodeCurrentNewton } from '../../daemon/analysis/diode-models.js';
import { seededNormal } from '../../daemon/analysis/random.js';
import { runCli, tempFile } from '../helpers/cli.js';
import { PROJECT_ROOT } from '../helpers/reference.js';

const V = [
  -0.2057, -0.1291, -0.0588, 0.0057, 0.0646, 0.1185, 0.1678, 0.2132, 0.2545, 0.2924, 0.3269, 0.3585, 0.3873, 0.4137, 0.4373, 0.459, 0.4784, 0.496, 0.5119,
  0.5265, 0.5398, 0.5521, 0.5633, 0.5736, 0.5833, 0.59,
];
const I = [
  0.764, 0.762, 0.7605, 0.7605, 0.76, 0.759, 0.757, 0.757, 0.7555, 0.754, 0.7505, 0.7465, 0.7385, 0.728, 0.7065, 0.6755, 0.632, 0.573, 0.499, 0.413, 0.3165,
  0.212, 0.1035, -0.01, -0.123, -0.21,
];
// As an SMU records an illuminated cell: current into the device positive (load convention).
const smuCsv = tempFile('rtc.csv', `V,I\n${V.map((v, k) => `${v},${-I[k]}`).join('\n')}\n`);
const genCsv = tempFile('rtc-gen.csv', `V,I\n${V.map((v, k) => `${v},${I[k]}`).join('\n')}\n`);

describe('plumbline fit with the diode models', () => {
  it('single-diode on an illuminated SMU-convention file: parameter keys, units, rmse', () => {
    const r = runCli(['fit', smuCsv, '--model', 'single-diode', '--illuminated', '--temperature', '33 degC', '--json']);
    expect(r.code, r.stderr).toBe(0);
    const j = JSON.parse(r.stdout);
    expect(Object.keys(j.parameters)).toEqual(['photocurrent', 'saturationCurrent', 'idealityFactor', 'seriesResistance', 'shuntResistance']);
    expect(j.parameters.seriesResistance.unit).toBe('Ω');
    expect(j.rmse).toBeCloseTo(7.7301e-4, 8);
    expect(j.temperature.value).toBeCloseTo(306.15, 10);
    expect(j.plausible).toBe(true);
  });

  it('a dark sweep clipped at 10 mA with no compliance column: the pinned readings left out and said so, plausible in the JSON; wired backwards, NOT PLAUSIBLE', () => {
    // A Shockley diode with series and shunt resistance (Shockley 1949; Sze & Ng 2007), n = 1.3,
    // I₀ = 1 pA, R_s = 20 Ω, R_sh = 100 MΩ, solved by the project's forward model with 0.2 % noise
    // and clipped at 10 mA as the instrument clips it: an invented device, truth known.
    const c = { photocurrent: 0, diodes: [{ i0: 1e-12, n: 1.3 }], seriesResistance: 20, shuntResistance: 1e8, vt: thermalVoltage(300) };
    const normal = seededNormal(11);
    const rows: string[] = [];
    for (let k = 0; k <= 150; k++) {
      const v = Math.round((-2 + 0.02 * k) * 1e4) / 1e4;
      const i = -diodeCurrentNewton(v, c);
      rows.push(`${v},${Math.min(1e-2, i * (1 + 2e-3 * normal()) + 3e-14 * normal())}`);
    }
    const file = tempFile('clipped.csv', `V,I\n${rows.join('\n')}\n`);
    const r = runCli(['fit', file, '--model', 'single-diode', '--temperature', '300 K', '--json']);
    expect(r.code, r.stderr).toBe(0);
    const j = JSON.parse(r.stdout);
    expect(j.points.reasons['at compliance']).toBe(2);
    expect(j.notes.join('\n')).toMatch(/pinned at 0\.01000 A/);
    expect(j.plausible).toBe(true);
    const rs = j.parameters.seriesResistance;
    expect(Math.abs(rs.value - 20), `${rs.value} ± ${rs.stdErr}`).toBeLessThan(3 * rs.stdErr);
    const back = tempFile(
      'backwards.csv',
      `V,I\n${rows
        .map((l) =>
          l
            .split(',')
            .map((x) => -Number(x))
            .join(','),
        )
        .join('\n')}\n`,
    );
    const t = runCli(['fit', back, '--model', 'single-diode', '--temperature', '300 K']);
    expect(t.code, t.stderr).toBe(0);
    expect(t.stdout).toMatch(/larger current flows at negative bias/);
    expect(t.stdout.trim().split('\n').at(-1)).toMatch(/^NOT PLAUSIBLE/);
  });

  it('the same cell read with --convention generator from a generator-convention file gives the same fit', () => {
    const a = JSON.parse(runCli(['fit', smuCsv, '--model', 'single-diode', '--illuminated', '--temperature', '306.15 K', '--json']).stdout);
    const b = JSON.parse(
      runCli(['fit', genCsv, '--model', 'single-diode', '--illuminated', '--temperature', '306.15 K', '--convention', 'generator', '--json']).stdout,
    );
    expect(b.rmse).toBeCloseTo(a.rmse, 12);
    expect(b.parameters.idealityFactor.value).toBeCloseTo(a.parameters.idealityFactor.value, 8);
  });

  it('double-diode with --objective implicit reproduces the published implicit-residual RMSE', () => {
    const r = runCli(['fit', smuCsv, '--model', 'double-diode', '--illuminated', '--temperature', '33 degC', '--objective', 'implicit', '--json']);
    expect(r.code, r.stderr).toBe(0);
    const j = JSON.parse(r.stdout);
    expect(Object.keys(j.parameters)).toEqual([
      'photocurrent',
      'saturationCurrent1',
      'idealityFactor1',
      'saturationCurrent2',
      'idealityFactor2',
      'seriesResistance',
      'shuntResistance',
    ]);
    expect(j.rmseImplicit).toBeCloseTo(9.8248e-4, 7);
  });

  it('cheung: series resistance, ideality factor and barrier height', () => {
    const T = 300;
    const vt = thermalVoltage(T);
    const i0 = 1e-7 * 112e4 * T * T * Math.exp(-0.7 / vt);
    const rows: string[] = [];
    for (let k = 0; k <= 60; k++) {
      const cur = 1e-4 * 10 ** (k / 30);
      rows.push(`${cur * 10 + 1.1 * vt * Math.log(cur / i0 + 1)},${cur}`);
    }
    const f = tempFile('schottky.csv', `V,I\n${rows.join('\n')}\n`);
    const r = runCli(['fit', f, '--model', 'cheung', '--temperature', '300 K', '--area', '1e-3 cm^2', '--richardson', '112 A/(cm^2 K^2)', '--json']);
    expect(r.code, r.stderr).toBe(0);
    const j = JSON.parse(r.stdout);
    expect(j.parameters.seriesResistance.value).toBeCloseTo(10, 1);
    expect(j.parameters.idealityFactor.value).toBeCloseTo(1.1, 2);
    expect(j.parameters.barrierHeight.value).toBeCloseTo(0.7, 3);
    expect(j.parameters.barrierHeight.unit).toBe('eV');
  });
});

describe('plumbline solar', () => {
  it('figures of merit with --area and the default 1000 W/m²', () => {
    const r = runCli(['solar', smuCsv, '--area', '25.52 cm^2', '--json']);
    expect(r.code, r.stderr).toBe(0);
    const j = JSON.parse(r.stdout);
    for (const k of ['isc', 'jsc', 'voc', 'pmax', 'vmp', 'imp', 'fillFactor', 'efficiency']) {
      expect(typeof j[k]).toBe('number');
      // Every figure carries a standard uncertainty, small against the value for this smooth curve.
      expect(j.stdErr[k]).toBeGreaterThan(0);
      expect(j.stdErr[k]).toBeLessThan(0.01 * Math.abs(j[k]));
    }
    // The measured points around V = 0 read 0.7605 A; the zero crossing lies between 0.5633 V
    // (0.1035 A) and 0.5736 V (−0.0100 A), 0.5724 V by a straight line between them.
    expect(j.isc).toBeCloseTo(0.7605, 3);
    expect(Math.abs(j.voc - (0.5633 + (0.0103 * 0.1035) / 0.1135))).toBeLessThan(5e-4);
    expect(j.jsc).toBeCloseTo(j.isc / 25.52e-4, 9);
    expect(j.units.jsc).toBe('A/m^2');
    expect(j.efficiency).toBeCloseTo(j.pmax / (1000 * 25.52e-4), 12);
    expect(j.fillFactor).toBeCloseTo(j.pmax / (j.isc * j.voc), 12);
    expect(j.irradiance).toBe(1000);
    // The text shows the trade's units: J_sc in mA/cm², η in %.
    const text = runCli(['solar', smuCsv, '--area', '25.52 cm^2']).stdout;
    expect(text).toMatch(/jsc\s+29\.\d+ ± 0\.\d+ mA\/cm²/);
    expect(text).toMatch(/efficiency\s+12\.\d+ ± 0\.\d+ %/);
  });

  it('a generator-convention file read as the SMU convention: the error says what to check', () => {
    const r = runCli(['solar', genCsv]);
    expect(r.code).toBe(1);
    expect(r.stderr).toMatch(/convention/);
  });

  it('a bad irradiance names the option', () => {
    const r = runCli(['solar', smuCsv, '--irradiance', '3 V']);
    expect(r.code).toBe(2);
    expect(r.stderr).toMatch(/--irradiance/);
  });
});

describe('the whole path: simulator → journal → export → fit', () => {
  // Not an outside reference (the simulator uses the same forward model): a check that nothing on
  // the way — driver, journal, export, CSV reading, conventions — loses or bends the data.
  it("the solar-cell scenario's invented cell comes back from an exported session within 3σ", () => {
    const dir = mkdtempSync(join(tmpdir(), 'plumbline-solar-'));
    const run = runCli(['run', '--scenario', 'solar-cell', '--sweeps', '1', '--fast', '--data', join(dir, 'd')]);
    expect(run.code).toBe(0);
    // The run's own text gives the figures of merit in the trade's units, and no dangling comma.
    expect(run.stdout).toMatch(/solar cell: isc [\d.]+ ± [\d.]+ A, jsc [\d.]+ ± [\d.]+ mA\/cm², voc [\d.]+ ± [\d.]+ V, .*fillFactor [\d.]+ ± [\d.]+/);
    expect(run.stdout).not.toMatch(/points, \n/);
    // The lit cell's current flows against the bias: that is its photocurrent, what it is measured
    // for (analysis option solar), so the run does not warn of it on every sweep.
    expect(run.stdout).not.toMatch(/too large to be noise/);
    const session = join(dir, 'd', readdirSync(join(dir, 'd'))[0]);
    expect(runCli(['export', session, '--out', join(dir, 'x')]).code).toBe(0);
    const r = runCli([
      'fit',
      join(dir, 'x', 'points.csv'),
      '--x',
      'voltage_V',
      '--y',
      'current_A',
      '--model',
      'single-diode',
      '--illuminated',
      '--temperature',
      '298.15 K',
      '--json',
    ]);
    expect(r.code, r.stderr).toBe(0);
    const p = JSON.parse(r.stdout).parameters;
    const truth = JSON.parse(readFileSync(join(PROJECT_ROOT, 'config', 'scenarios', 'solar-cell.json'), 'utf8')).device.params;
    for (const k of ['photocurrent', 'saturationCurrent', 'idealityFactor', 'seriesResistance', 'shuntResistance']) {
      expect(Math.abs(p[k].value - truth[k]), `${k} ${p[k].value} ± ${p[k].stdErr} vs ${truth[k]}`).toBeLessThan(3 * p[k].stdErr);
    }
    const s = JSON.parse(runCli(['solar', join(dir, 'x', 'points.csv'), '--x', 'voltage_V', '--y', 'current_A', '--json']).stdout);
    expect(s.isc).toBeCloseTo(truth.photocurrent, 2);
  });
});
