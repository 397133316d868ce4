import { mkdirSync, mkdtempSync, readdirSync, readFileSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { recordedAnalysis } from '../../daemon/cli/inputs.js';
import { fowlerNordheim } from '../../daemon/analysis/mechanisms/fowler-nordheim.js';
import { runCli, tempFile } from '../helpers/cli.js';
import { HAVE_STRD, loadStrd, lre } from '../helpers/reference.js';
import { FN_OXIDE_BOTH_POLARITIES, linearBias, toCsv, wholeSweep } from '../helpers/whole-sweep.js';

function norrisCsv(): string {
  const d = loadStrd('Norris');
  return `V,I\n${d.xText.map((x, k) => `${x},${d.yText[k]}`).join('\n')}\n`;
}

describe.skipIf(!HAVE_STRD)('plumbline fit on NIST Norris (StRD certified values)', () => {
  it('--model linear --json prints one object with the certified slope to 12 digits', () => {
    const file = tempFile('norris.csv', norrisCsv());
    const r = runCli(['fit', file, '--model', 'linear', '--json']);
    expect(r.code).toBe(0);
    const out = JSON.parse(r.stdout);
    expect(Object.keys(out)).toEqual(expect.arrayContaining(['model', 'points', 'window', 'line', 'parameters', 'warnings']));
    expect(Object.keys(out.line)).toEqual(expect.arrayContaining(['slope', 'slopeStdErr', 'intercept', 'interceptStdErr', 'r2', 'residualStdDev']));
    expect(lre(out.line.slope, 1.00211681802045)).toBeGreaterThanOrEqual(12);
    expect(lre(out.line.intercept, -0.262323073774029)).toBeGreaterThanOrEqual(12);
    expect(out.points).toEqual({ used: 36, excluded: 0, reasons: {} });
  });
  it('custom model with mathjs expressions gives the same line', () => {
    const file = tempFile('norris.csv', norrisCsv());
    const r = runCli(['fit', file, '--model', 'custom', '--x-expr', 'c1', '--y-expr', 'I', '--json']);
    expect(r.code).toBe(0);
    expect(lre(JSON.parse(r.stdout).line.slope, 1.00211681802045)).toBeGreaterThanOrEqual(12);
  });
  it('rank --json has the documented shape', () => {
    const file = tempFile('norris.csv', norrisCsv());
    const r = runCli(['rank', file, '--json']);
    expect(r.code).toBe(0);
    const out = JSON.parse(r.stdout);
    expect(out.ranking.length).toBeGreaterThan(0);
    expect(Object.keys(out.ranking[0])).toEqual(expect.arrayContaining(['model', 'score', 'plausible', 'parameters', 'reasons']));
  });
});

describe('plumbline fit with physics and units', () => {
  const d = 10e-9;
  const v = Array.from({ length: 31 }, (_, k) => 7 + (4 * k) / 30);
  const csv = `bias_V,current_A\n${v.map((x) => `${x},${fowlerNordheim(x / d, 3.2, 0.42) * 1e-8}`).join('\n')}\n`;
  it('units in quantities: "10 nm" and "1e-4 cm^2" give the same result as bare SI numbers', () => {
    const file = tempFile('fn.csv', csv);
    const a = JSON.parse(
      runCli(['fit', file, '--model', 'fowler-nordheim', '--thickness', '10 nm', '--area', '1e-4 cm^2', '--mass-ratio', '0.42', '--json']).stdout,
    );
    const b = JSON.parse(runCli(['fit', file, '--model', 'fowler-nordheim', '--thickness', '1e-8', '--area', '1e-8', '--mass-ratio', '0.42', '--json']).stdout);
    // Noise-free Fowler–Nordheim data (Forbes constants) give the barrier back exactly.
    expect(a.parameters.barrierHeight.value).toBeCloseTo(3.2, 9);
    expect(a.parameters.barrierHeight.unit).toBe('eV');
    expect(b.parameters.barrierHeight.value).toBeCloseTo(a.parameters.barrierHeight.value, 12);
  });
  it('a readable table without --json', () => {
    const file = tempFile('fn.csv', csv);
    const r = runCli(['fit', file, '--model', 'fowler-nordheim', '--thickness', '10 nm', '--mass-ratio', '0.42']);
    expect(r.code).toBe(0);
    expect(r.stdout).toMatch(/barrierHeight\s+3\.2\d* ± .* eV/);
    // Every number with its unit: the window in the x column's volts.
    expect(r.stdout).toMatch(/window: +7 to 11 V in the x column/);
    // The line's slope and intercept in their SI units: d ln(I/E²)/d(1/E) in V/m (no area given),
    // the intercept a logarithm of A/(V/m)²; weighted residuals in units of each reading's σ.
    expect(r.stdout).toMatch(/line: +slope -[\d.e]+ ± [\d.e-]+ V\/m, intercept -?[\d.]+ ± [\d.e-]+ \(ln of A\/\(V\/m\)²\)/);
    expect(r.stdout).toMatch(/residual SD [\d.e-]+ σ \(weighted residuals\)/);
    const lin = runCli(['fit', file, '--model', 'ohmic']);
    expect(lin.stdout).toMatch(/line: +slope -?[\d.e-]+ ± [\d.e-]+ A\/V, intercept -?[\d.e-]+ ± [\d.e-]+ A/);
  });
  it('an input not given is reported as assumed with the default used; one given is not', () => {
    const file = tempFile('fn.csv', csv);
    const a = JSON.parse(runCli(['fit', file, '--model', 'fowler-nordheim', '--thickness', '10 nm', '--json']).stdout);
    expect(a.inputs.flatBand).toEqual({ value: 0, assumed: true });
    expect(a.inputs.massRatio).toEqual({ value: 0.5, assumed: true });
    expect(a.inputs.thickness.assumed).toBe(false);
    const text = runCli(['fit', file, '--model', 'fowler-nordheim', '--thickness', '10 nm']).stdout;
    expect(text).toMatch(/inputs: .*flat band V_FB 0 V \(assumed\)/);
    const given = JSON.parse(runCli(['fit', file, '--model', 'fowler-nordheim', '--thickness', '10 nm', '--flat-band', '0 V', '--json']).stdout);
    expect(given.inputs.flatBand).toEqual({ value: 0, assumed: false });
  });
  it('a missing input names the setting', () => {
    const file = tempFile('fn.csv', csv);
    const r = runCli(['fit', file, '--model', 'fowler-nordheim']);
    expect(r.code).toBe(2);
    expect(r.stderr).toMatch(/--thickness/);
  });
  it('a quantity of the wrong kind names the option and the expected kind', () => {
    const file = tempFile('fn.csv', csv);
    const r = runCli(['fit', file, '--model', 'fowler-nordheim', '--thickness', '3 kg']);
    expect(r.code).toBe(2);
    expect(r.stderr).toMatch(/--thickness '3 kg': expected a length/);
  });
  it('an unknown model lists the known ones', () => {
    const file = tempFile('fn.csv', csv);
    const r = runCli(['fit', file, '--model', 'magic']);
    expect(r.code).toBe(2);
    expect(r.stderr).toMatch(/unknown model 'magic'.*fowler-nordheim/);
  });
});

describe('malformed CSV: non-zero exit, the message names file, line and column', () => {
  it('a field that is not a number', () => {
    const file = tempFile('bad.csv', 'V,I\n0.1,1e-9\n0.2,abc\n');
    const r = runCli(['fit', file, '--model', 'linear', '--json']);
    expect(r.code).toBe(2);
    expect(r.stdout).toBe('');
    expect(r.stderr).toContain(`${file}, line 3, column 'I': 'abc' is not a number`);
  });
  it('a decimal comma and a units row under the header are named as such, not as the wrong column', () => {
    const semi = tempFile('semi.csv', 'V;I\n0,1000;1,2e-9\n0,2000;3,4e-9\n');
    const a = runCli(['fit', semi, '--model', 'diode']);
    expect(a.code).toBe(2);
    expect(a.stderr).toContain(`${semi}, line 2, column 'V': '0,1000' is written with a decimal comma: numbers are read with a decimal point ('0.1000')`);
    const units = tempFile('units.csv', 'V,I\nV,A\n0.1,1e-9\n0.2,3e-9\n');
    const b = runCli(['fit', units, '--model', 'diode']);
    expect(b.code).toBe(2);
    expect(b.stderr).toContain(
      `${units}, line 2, column 'V': 'V' looks like a units row under the header: put each unit in its column's name instead (e.g. 'I (A)', 'V (V)') and delete line 2`,
    );
  });
  it('a row with too few fields', () => {
    const file = tempFile('short.csv', '# comment line\nV,I\n0.1,1e-9\n0.2\n');
    const r = runCli(['fit', file, '--model', 'linear']);
    expect(r.code).toBe(2);
    expect(r.stderr).toContain('line 4: expected 2 fields (V, I), found 1');
  });
  it('a missing file and an unknown column', () => {
    expect(runCli(['fit', '/nonexistent/x.csv', '--model', 'linear']).stderr).toMatch(/\/nonexistent\/x\.csv: the file does not exist; check the path/);
    const file = tempFile('ok.csv', 'V,I\n1,1\n2,2\n3,3.1\n');
    const r = runCli(['fit', file, '--model', 'linear', '--y', 'current']);
    expect(r.code).toBe(2);
    expect(r.stderr).toMatch(/column 'current': --y: no such column \(columns: V, I\)/);
  });
  it('data with no header row', () => {
    const file = tempFile('nohdr.csv', '0.1,1e-9\n0.2,2e-9\n');
    const r = runCli(['fit', file, '--model', 'linear']);
    expect(r.code).toBe(2);
    expect(r.stderr).toMatch(/line 1.*header row/);
  });
});

describe('text columns that are not used', () => {
  it('a CSV with a text column (an exported points.csv) fits on its numeric columns; a text cell in a used column names its line', () => {
    // Ohmic by construction: I = V / 1 kΩ, worked by hand.
    const rows = [0, 1, 2, 3, 4, 5].map((v) => `run-A,${v},${v / 1000},0`).join('\n');
    const f = tempFile('points.csv', `session,voltage_V,current_A,compliance\n${rows}\n`);
    const ok = runCli(['fit', f, '--x', 'voltage_V', '--y', 'current_A', '--model', 'ohmic', '--json']);
    expect(ok.code, ok.stderr).toBe(0);
    expect(JSON.parse(ok.stdout).parameters.resistance.value).toBeCloseTo(1000, 9);
    // Without --x/--y the columns named voltage_V and current_A are taken (as our export names them).
    const named = runCli(['fit', f, '--model', 'ohmic', '--json']);
    expect(named.code, named.stderr).toBe(0);
    expect(JSON.parse(named.stdout).parameters.resistance.value).toBeCloseTo(1000, 9);
    // A file whose default column holds text says which columns there are to choose from.
    const g = tempFile('runs.csv', `run,volts,amps\n${[0, 1, 2].map((v) => `A,${v},${v / 1000}`).join('\n')}\n`);
    const bad = runCli(['fit', g, '--model', 'ohmic']);
    expect(bad.code).toBe(2);
    expect(bad.stderr).toMatch(/line 2, column 'run': 'A' is not a number: name the columns to use with --x and --y \(columns: run, volts, amps\)/);
    // A bad cell further down a rightly chosen column is named as such, without the column hint.
    const cell = runCli(['fit', tempFile('cell.csv', 'Voltage (V),Current (mA)\n0.5,0.5\n1,1\n2,abc\n'), '--model', 'ohmic']);
    expect(cell.code).toBe(2);
    expect(cell.stderr).toMatch(/line 4, column 'Current \(mA\)': 'abc' is not a number$/m);
    const picked = runCli(['fit', g, '--x', 'run', '--y', 'amps', '--model', 'ohmic']);
    expect(picked.stderr).toMatch(/line 2, column 'run': 'A' is not a number$/m);
  });

  it('units in the headers are read: a current in mA and a bias in mV give the same fit as the file in A and V; swapped columns are refused', () => {
    // Ohmic by construction, 1 kΩ (worked by hand): I = V / 1000.
    const volts = [0.5, 1, 1.5, 2, 2.5, 3];
    const si = tempFile('si.csv', `voltage_V,current_A\n${volts.map((v) => `${v},${v / 1000}`).join('\n')}\n`);
    const ref = JSON.parse(runCli(['fit', si, '--model', 'ohmic', '--json']).stdout).parameters.resistance.value;
    expect(ref).toBeCloseTo(1000, 9);
    for (const [name, text] of [
      ['ma.csv', `Voltage (V),Current (mA)\n${volts.map((v) => `${v},${v}`).join('\n')}\n`],
      ['mv.csv', `I [uA],bias_mV\n${volts.map((v) => `${v * 1000},${v * 1000}`).join('\n')}\n`],
    ] as const) {
      const r = runCli(['fit', tempFile(name, text), '--model', 'ohmic', '--json']);
      expect(r.code, r.stderr).toBe(0);
      const j = JSON.parse(r.stdout);
      expect(j.parameters.resistance.value).toBeCloseTo(1000, 6);
      expect(j.notes.join(' ')).toMatch(/read in (mA|uA|mV) and converted to/);
    }
    const text = runCli(['fit', tempFile('order.csv', `Current (A),Voltage (V)\n${volts.map((v) => `${v / 1000},${v}`).join('\n')}\n`), '--model', 'ohmic']);
    expect(text.code, text.stderr).toBe(0);
    expect(text.stdout).toMatch(/columns used: x = 'Voltage \(V\)', y = 'Current \(A\)'/);
    const swapped = runCli(['fit', tempFile('sw.csv', `a,b\n${volts.map((v) => `${v},${v}`).join('\n')}\n`), '--x', 'b', '--y', 'a', '--model', 'ohmic']);
    expect(swapped.code).toBe(0); // no units given: nothing to check
    const wrong = runCli([
      'fit',
      tempFile('wr.csv', `I (A),V (V)\n${volts.map((v) => `${v / 1000},${v}`).join('\n')}\n`),
      '--x',
      'I (A)',
      '--y',
      'V (V)',
      '--model',
      'ohmic',
    ]);
    expect(wrong.code).toBe(2);
    expect(wrong.stderr).toMatch(/column 'I \(A\)': the bias column is in A: are x and y swapped\?/);
  });
});

describe('whole sweeps from the command line, no window given (test/helpers/whole-sweep.ts)', () => {
  const spec = FN_OXIDE_BOTH_POLARITIES;
  const args = ['--thickness', '7 nm', '--area', '1e-4 cm^2', '--mass-ratio', '0.42'];
  it('fit: the barrier of each branch within 0.05 eV, the floor reported, every exclusion named', () => {
    const file = tempFile('fn-whole.csv', toCsv(wholeSweep({ ...spec, seed: 11 })));
    const r = runCli(['fit', file, '--model', 'fowler-nordheim', ...args, '--json']);
    expect(r.code, r.stderr).toBe(0);
    const out = JSON.parse(r.stdout);
    expect(Math.abs(out.parameters.barrierHeight.value - 3.1)).toBeLessThan(0.05);
    expect(out.parameters.barrierHeight.statStdErr).toBeGreaterThan(0);
    expect(out.plausible).toBe(true);
    expect(out.window.mode).toBe('auto');
    expect(out.noise.floorSource).toBe('readings');
    expect(out.noise.floor / 1e-13).toBeGreaterThan(0.5);
    expect(out.noise.floor / 1e-13).toBeLessThan(2);
    expect(out.branches.length).toBe(2);
    expect(Object.keys(out.points.reasons)).toEqual(expect.arrayContaining(['zero bias', 'at the noise floor', 'other polarity (analysed as its own branch)']));
  });
  it('fit text says NOT PLAUSIBLE on its last line when the analysis marks the fit so (a thickness in metres by mistake), and says which input is off', () => {
    const file = tempFile('fn-whole.csv', toCsv(wholeSweep({ ...spec, seed: 11 })));
    const good = runCli(['fit', file, '--model', 'fowler-nordheim', ...args]);
    expect(good.stdout).not.toMatch(/NOT PLAUSIBLE|outside 0\.1 nm/);
    const r = runCli(['fit', file, '--model', 'fowler-nordheim', '--thickness', '7 m', '--area', '1e-4 cm^2', '--mass-ratio', '0.42']);
    expect(r.code, r.stderr).toBe(0);
    expect(r.stdout.trim().split('\n').at(-1)).toMatch(/^NOT PLAUSIBLE: /);
    expect(r.stdout).toMatch(/warning: +thickness 7 m is outside 0\.1 nm – 1 mm.*SI \(metres\)/);
    expect(r.stdout).toMatch(/warning: .*outside the plausible range/);
    // A thickness of 2 µm is a thick film but a film: no input warning (its barrier may still be off).
    const thick = JSON.parse(runCli(['fit', file, '--model', 'fowler-nordheim', '--thickness', '2 um', '--area', '1e-4 cm^2', '--json']).stdout);
    expect(thick.warnings.join(' ')).not.toMatch(/thickness .* is outside/);
  });
  it('a bare number far beyond any film is refused with the unit it most likely meant (exit 2)', () => {
    const file = tempFile('fn-whole.csv', toCsv(wholeSweep({ ...spec, seed: 11 })));
    const r = runCli(['fit', file, '--model', 'fowler-nordheim', '--thickness', '7', '--area', '1e-4 cm^2']);
    expect(r.code).toBe(2);
    expect(r.stderr).toMatch(/--thickness '7': a bare number is read in metres \(7 m\).*did you mean "7 nm"/);
    const a = runCli(['fit', file, '--model', 'fowler-nordheim', '--thickness', '7 nm', '--area', '100']);
    expect(a.code).toBe(2);
    expect(a.stderr).toMatch(/--area '100': a bare number is read in square metres.*"100 um\^2"/);
    // Bare SI numbers that are sensible stay accepted.
    expect(runCli(['fit', file, '--model', 'fowler-nordheim', '--thickness', '7e-9', '--area', '1e-8']).code).toBe(0);
  });
  it("rank text: the columns stay aligned when a hopeless model's ΔAICc runs to 10⁹ (three figures there)", () => {
    const file = tempFile('fn-whole.csv', toCsv(wholeSweep({ ...spec, seed: 12 })));
    const r = runCli(['rank', file, ...args, '--refractive-index', '1.46']);
    expect(r.code, r.stderr).toBe(0);
    const lines = r.stdout.split('\n');
    const header = lines.find((l) => l.startsWith('#  model')) as string;
    const col = header.indexOf('plausible');
    const rows = lines.filter((l) => /^\d+ +[a-z-]+ +\d\.\d{3} /.test(l));
    expect(rows.length).toBeGreaterThan(4);
    for (const row of rows) expect(row.slice(col, col + 4), row).toMatch(/^(yes|no) /);
    expect(
      rows.some((row) => /\de\+\d/.test(row)),
      'some ΔAICc in exponent form',
    ).toBe(true);
  });
  it('the SCPI codes for over range and not a number (±9.9e37, 9.91e37) in a file are not readings: left out, counted, the fit unchanged', () => {
    const sweep = wholeSweep({ ...spec, seed: 13 });
    const clean = JSON.parse(runCli(['fit', tempFile('fn-clean.csv', toCsv(sweep)), '--model', 'fowler-nordheim', ...args, '--json']).stdout);
    const lines = toCsv(sweep).trim().split('\n');
    const k = lines.length - 5;
    // Two readings of the high-field end replaced by the codes an instrument's own file may carry.
    lines[k] = `${lines[k].split(',')[0]},9.91e37`;
    lines[k + 1] = `${lines[k + 1].split(',')[0]},9.9E+37`;
    const r = runCli(['fit', tempFile('fn-codes.csv', `${lines.join('\n')}\n`), '--model', 'fowler-nordheim', ...args, '--json']);
    expect(r.code, r.stderr).toBe(0);
    const out = JSON.parse(r.stdout);
    expect(out.notes.join(' ')).toMatch(/2 value\(s\) were the SCPI over-range or not-a-number codes/);
    expect(out.points.reasons['not a finite number']).toBe(2);
    expect(out.plausible).toBe(true);
    const b = out.parameters.barrierHeight;
    expect(Math.abs(b.value - clean.parameters.barrierHeight.value)).toBeLessThan(3 * b.stdErr);
  });
  it('the Fowler–Nordheim intercept against a/(m* φ): near 1 with the right thickness; a thickness 10× too large gives k^(4/3) ≈ 21.5 and a warning', () => {
    // J = a/(m_r φ)·E²·exp(−b√m_r φ^1.5/E) (Fowler & Nordheim 1928; Forbes 2006 constants): with E
    // read k times too small, the fitted φ falls by k^(2/3) and the intercept rises by 2 ln k, so the
    // implied prefactor over a/(m_r φ_fit) is k²/k^(2/3) = k^(4/3).
    const file = tempFile('fn-pref.csv', toCsv(wholeSweep({ ...spec, seed: 14 })));
    const good = JSON.parse(runCli(['fit', file, '--model', 'fowler-nordheim', ...args, '--json']).stdout);
    const ratio = (t: string) => Number(/implies a prefactor ([\d.e+-]+) times/.exec(t)?.[1]);
    expect(ratio(good.notes.join(' '))).toBeCloseTo(1, 1);
    expect(good.warnings.join(' ')).not.toMatch(/implies a prefactor/);
    const thick = JSON.parse(
      runCli(['fit', file, '--model', 'fowler-nordheim', '--thickness', '70 nm', '--area', '1e-4 cm^2', '--mass-ratio', '0.42', '--json']).stdout,
    );
    const w = thick.warnings.join(' ');
    expect(ratio(w) / 10 ** (4 / 3)).toBeCloseTo(1, 1);
    expect(w).toMatch(/check the thickness and the area/);
    // 21× is an input to check, not a wrong mechanism: the fit stays plausible.
    expect(thick.plausible).toBe(true);
    // An area 10⁶ times the device's puts the prefactor 10⁶ off, beyond any plausible input error
    // together (10 × thickness ≈ 21×, 100 × area): not plausible, saying so.
    const far = JSON.parse(
      runCli(['fit', file, '--model', 'fowler-nordheim', '--thickness', '7 nm', '--area', '100 cm^2', '--mass-ratio', '0.42', '--json']).stdout,
    );
    expect(ratio(far.warnings.join(' '))).toBeLessThan(1e-4);
    expect(far.warnings.join(' ')).toMatch(/not Fowler–Nordheim tunnelling/);
    expect(far.plausible).toBe(false);
  });
  it('rank: Fowler–Nordheim first, weights summing to 1', () => {
    const file = tempFile('fn-whole.csv', toCsv(wholeSweep({ ...spec, seed: 12 })));
    const r = runCli(['rank', file, ...args, '--refractive-index', '1.46', '--json']);
    expect(r.code, r.stderr).toBe(0);
    const out = JSON.parse(r.stdout);
    expect(out.ranking[0].model).toBe('fowler-nordheim');
    expect(out.ranking.reduce((a: number, e: { score: number }) => a + e.score, 0)).toBeCloseTo(1, 9);
  });
});

describe('files with a sweep column (an exported points.csv): pooling is never silent', () => {
  const rows = (sweep: number, scale: number) => [1, 2, 3, 4, 5, 6, 7, 8].map((v, k) => `S,${sweep},${k},${v},${(v * scale) / 1e6}`).join('\n');
  const csv = `session,sweep,point,voltage_V,current_A\n${rows(1, 1)}\n${rows(2, 2)}\n`;
  const base = ['--x', 'voltage_V', '--y', 'current_A', '--model', 'ohmic', '--json'];
  it('without --sweep or --all-sweeps the fit is refused, naming both', () => {
    const r = runCli(['fit', tempFile('pts.csv', csv), ...base]);
    expect(r.code).toBe(2);
    expect(r.stderr).toMatch(/holds 2 sweeps \(column 'sweep', 1–2\): choose one with --sweep N, or pool them all with --all-sweeps/);
  });
  it('--sweep 2 fits that sweep alone (R = 0.5 MΩ by construction); --all-sweeps pools and says so', () => {
    const one = runCli(['fit', tempFile('pts.csv', csv), ...base, '--sweep', '2']);
    expect(one.code, one.stderr).toBe(0);
    const a = JSON.parse(one.stdout);
    expect(a.parameters.resistance.value).toBeCloseTo(5e5, 3);
    expect(a.notes.join(' ')).toMatch(/sweep 2 of 2/);
    const all = runCli(['fit', tempFile('pts.csv', csv), ...base, '--all-sweeps']);
    expect(all.code, all.stderr).toBe(0);
    expect(JSON.parse(all.stdout).notes.join(' ')).toMatch(/2 sweeps of the file pooled/);
    expect(runCli(['fit', tempFile('pts.csv', csv), ...base, '--sweep', '3']).stderr).toMatch(/no sweep 3/);
  });
});

describe('window flags on the nonlinear diode models', () => {
  const d = wholeSweep({
    device: { kind: 'diode', saturationCurrent: 1e-12, ideality: 1.2, series: 2, shunt: 1e8 },
    bias: linearBias(-0.5, 0.7, 121),
    relative: 0.01,
    floor: 1e-13,
    seed: 3,
  });
  it('--auto is refused with the reason; --from/--to restrict the readings fitted and are counted', () => {
    const file = tempFile('diode.csv', toCsv(d));
    const auto = runCli(['fit', file, '--model', 'single-diode', '--temperature', '300 K', '--auto']);
    expect(auto.code).toBe(2);
    expect(auto.stderr).toMatch(/--auto: the single-diode model is fitted over the whole curve/);
    const win = runCli(['fit', file, '--model', 'single-diode', '--temperature', '300 K', '--from', '0.05', '--to', '0.7', '--json']);
    expect(win.code, win.stderr).toBe(0);
    const out = JSON.parse(win.stdout);
    expect(out.points.reasons['outside the fit window']).toBe(55);
    expect(Math.abs(out.parameters.idealityFactor.value - 1.2)).toBeLessThan(0.05);
  });
});

describe('fitting an exported session: the settings recorded beside it', () => {
  // Not an outside reference (the simulator uses the same forward model): a check that the export's
  // session.json carries the station's model and inputs to an offline fit. The barrier of a
  // Fowler–Nordheim fit scales as m_r^(−1/3) (Lenzlinger & Snow 1969), so leaving out the recorded
  // mass ratio 0.42 (0.5 assumed) would move 3.1 eV to about 2.93 eV.
  it('a fit of points.csv with no model or inputs uses the ones its station used; options still take precedence', () => {
    const dir = mkdtempSync(join(tmpdir(), 'plumbline-export-fit-'));
    expect(runCli(['run', '--scenario', 'oxide-fn', '--sweeps', '2', '--fast', '--data', join(dir, 'd')]).code).toBe(0);
    const session = join(dir, 'd', readdirSync(join(dir, 'd'))[0]);
    expect(runCli(['export', session, '--out', join(dir, 'x')]).code).toBe(0);
    const points = join(dir, 'x', 'points.csv');
    const r = runCli(['fit', points, '--sweep', '2', '--json']);
    expect(r.code, r.stderr).toBe(0);
    const out = JSON.parse(r.stdout);
    expect(out.model).toBe('fowler-nordheim');
    expect(out.inputs.massRatio).toEqual({ value: 0.42, assumed: false });
    expect(out.inputs.thickness.value).toBe(7e-9);
    const b = out.parameters.barrierHeight;
    expect(Math.abs(b.value - 3.1), `${b.value} ± ${b.stdErr}`).toBeLessThan(3 * b.stdErr);
    expect(out.notes.join('\n')).toMatch(/inputs recorded with the session \(.*session\.json\): thickness 7 nm, area 0\.0001 cm², mass ratio 0\.42/);
    // An option wins over the record.
    const o = JSON.parse(runCli(['fit', points, '--sweep', '2', '--mass-ratio', '0.5', '--json']).stdout);
    expect(o.parameters.barrierHeight.value).toBeCloseTo(3.1 * (0.42 / 0.5) ** (1 / 3), 2);
    // Without the session.json beside it, the model must be named.
    const alone = join(dir, 'alone.csv');
    writeFileSync(alone, readFileSync(points));
    const n = runCli(['fit', alone, '--sweep', '2']);
    expect(n.code).toBe(2);
    expect(n.stderr).toMatch(/--model: name the mechanism/);
    // A session.json that is not an export of ours is left alone, with a note.
    const other = join(dir, 'other');
    mkdirSync(other);
    writeFileSync(join(other, 'points.csv'), readFileSync(points));
    writeFileSync(join(other, 'session.json'), '{"format": "someone else"}');
    const f = JSON.parse(runCli(['fit', join(other, 'points.csv'), '--sweep', '2', '--model', 'fowler-nordheim', '--thickness', '7 nm', '--json']).stdout);
    expect(f.notes.join('\n')).toMatch(/session\.json beside the file was not used: not a session export of this program/);
    expect(f.inputs.massRatio.assumed).toBe(true);
  }, 60_000);

  it('the settings in force for a sweep: the first ones, changed by every settings change journaled before its first reading', () => {
    const dir = mkdtempSync(join(tmpdir(), 'plumbline-export-settings-'));
    const meta = {
      format: 'plumbline session export 1',
      sessionEvent: { analysis: { model: 'fowler-nordheim', window: 'auto', inputs: { thickness: 7e-9, massRatio: 0.42 } } },
      settingChanges: [
        { seq: 100, type: 'settings', analysis: { model: 'fowler-nordheim', window: { from: 5, to: 9 }, inputs: { thickness: 8e-9, massRatio: 0.5 } } },
      ],
    };
    writeFileSync(join(dir, 'session.json'), JSON.stringify(meta));
    const file = join(dir, 'points.csv');
    expect(recordedAnalysis(file, 50)?.inputs).toEqual({ thickness: 7e-9, massRatio: 0.42 });
    const later = recordedAnalysis(file, 150);
    expect(later?.inputs).toEqual({ thickness: 8e-9, massRatio: 0.5 });
    expect(later?.window).toEqual({ from: 5, to: 9 });
    // Pooled sweeps across a change: the first settings, and a note saying so.
    const pooled = recordedAnalysis(file, 50, true);
    expect(pooled?.inputs).toEqual({ thickness: 7e-9, massRatio: 0.42 });
    expect(pooled?.notes.join(' ')).toMatch(/changed 1 time\(s\): its first settings are used/);
    // A broken session.json is named, not fatal.
    writeFileSync(join(dir, 'session.json'), '{"format": "plumbline session export 1", ');
    expect(recordedAnalysis(file, 50)?.notes.join(' ')).toMatch(/not readable as JSON/);
  });
});

describe('an ohmic line on the noise floor', () => {
  it('demo on the simulated trap-assisted-tunnelling oxide: the ranking marks ohmic not plausible, saying the current there is indistinguishable from zero', () => {
    // Below about 4.5 V this oxide's readings are the instrument's floor; the ohmic window search
    // settles there with a conductance under twice its uncertainty (a 95 % test, common practice).
    const r = runCli(['demo', '--scenario', 'oxide-tat']);
    expect(r.code, r.stderr).toBe(0);
    const lines = r.stdout.split('\n');
    const row = lines.findIndex((l) => /^\d+ +ohmic /.test(l));
    expect(row, r.stdout).toBeGreaterThan(0);
    expect(lines[row]).toMatch(/^\d+ +ohmic +\S+ +\S+ +no /);
    const reasons: string[] = [];
    for (let k = row + 1; k < lines.length && lines[k].startsWith('     - '); k++) reasons.push(lines[k]);
    expect(reasons.join('\n')).toMatch(/the current from [0-9.]+ to [0-9.]+ V is indistinguishable from zero \(the noise floor: σ = [0-9.e-]+ A\)/);
    // The right mechanism stays on top, plausible.
    expect(lines.find((l) => /^1 +/.test(l))).toMatch(/^1 +trap-assisted-tunneling +\S+ +\S+ +yes /);
  });
});
