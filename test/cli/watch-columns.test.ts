/**
 * `plumbline watch` reads a header by the same rules as `plumbline fit` (protocols/csv-columns.ts):
 * units in the column names are converted to V and A, the bias and current columns are found by
 * name, and a column named on the command line that the header lacks stops it (exit 2) naming the
 * option, the header's columns and a close name. The readings are a 1 GΩ resistor's line, I = V/R
 * (Ohm's law), written in mV and nA (SI prefixes m = 1e-3, n = 1e-9: SI Brochure, 9th ed., 2019,
 * Table 7).
 */
import { existsSync, readdirSync } from 'node:fs';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { scanJournal } from '../../daemon/journal/reader.js';
import type { WireEvent } from '../../protocols/wire.js';
import { runCli, tempFile } from '../helpers/cli.js';
import { tempDir } from '../helpers/daemon.js';

const R = 1e9; // Ω

/** 0 to 10 V in 0.2 V steps, in mV and nA. */
function millivolts(): string {
  let csv = 'voltage (mV),current (nA)\n';
  for (let k = 0; k <= 50; k++) {
    const v = 0.2 * k;
    csv += `${(v * 1e3).toFixed(1)},${((v / R) * 1e9).toExponential(6)}\n`;
  }
  return csv;
}

/** A time column first, then the bias (V) and the current (A, no unit in its name). */
function threeColumns(): string {
  let csv = 'time_s,bias_V,I\n';
  for (let k = 0; k <= 50; k++) csv += `${(0.1 * k).toFixed(1)},${(0.2 * k).toFixed(3)},${((0.2 * k) / R + 1e-12).toExponential(4)}\n`;
  return csv;
}

function journal(data: string): WireEvent[] {
  const events: WireEvent[] = [];
  scanJournal(join(data, readdirSync(data)[0]), (e) => events.push(e));
  return events;
}

describe('watch reads units in the header as fit does', () => {
  it('a header in mV and nA: readings journaled in V and A, the fit gives 1 GΩ, as fit does', () => {
    const data = join(tempDir(), 'data');
    const r = runCli(['watch', '-', '--no-page', '--model', 'ohmic', '--data', data], millivolts());
    expect(r.code, r.stderr).toBe(0);
    const out = r.stdout + r.stderr;
    expect(out).toContain("columns: voltage 'voltage (mV)' (in mV, converted to V), current 'current (nA)' (in nA, converted to A)");
    // 10 V is below the 30 V hazard threshold (the value read as volts, 10000, was above it).
    expect(out).not.toMatch(/hazard/i);
    const events = journal(data);
    expect(events.some((e) => e.type === 'caution' && e.kind === 'hazard-voltage')).toBe(false);
    const readings = events.filter((e) => e.type === 'reading');
    expect(readings).toHaveLength(51);
    expect(Math.max(...readings.map((e) => (e.type === 'reading' ? e.v : 0)))).toBeCloseTo(10, 12);
    const fit = events.filter((e) => e.type === 'fit' && e.final).at(-1);
    const watched = fit?.type === 'fit' ? fit.fit?.parameters.resistance?.value : undefined;
    expect(Math.abs((watched as number) / R - 1)).toBeLessThan(1e-6);
    // fit on the same file, by the same header rules.
    const f = runCli(['fit', tempFile('mv.csv', millivolts()), '--model', 'ohmic', '--json']);
    expect(f.code, f.stderr).toBe(0);
    expect(Math.abs(JSON.parse(f.stdout).parameters.resistance.value / (watched as number) - 1)).toBeLessThan(1e-9);
  });
});

describe('watch chooses its columns as fit does and refuses ones the header lacks', () => {
  it('with no column named, the bias and current columns by name, not the first two', () => {
    const data = join(tempDir(), 'data');
    const r = runCli(['watch', '-', '--no-page', '--model', 'ohmic', '--data', data], threeColumns());
    expect(r.code, r.stderr).toBe(0);
    expect(r.stdout + r.stderr).toContain("columns: voltage 'bias_V' (V), current 'I' (no unit in its name: read as A)");
    const rows = threeColumns().trim().split('\n').slice(1);
    const readings = journal(data).filter((e) => e.type === 'reading');
    expect(readings.map((e) => (e.type === 'reading' ? [e.v, e.i] : []))).toEqual(rows.map((l) => [Number(l.split(',')[1]), Number(l.split(',')[2])]));
    // fit picks the same two.
    const f = runCli(['fit', tempFile('three.csv', threeColumns()), '--model', 'ohmic', '--json']);
    expect(JSON.parse(f.stdout).notes).toContain("columns used: x = 'bias_V', y = 'I'");
  });

  it('a named column the file lacks: exit 2 before any session, naming the option, the columns and a close name', () => {
    const file = tempFile('three.csv', threeColumns());
    const data = join(tempDir(), 'data');
    const a = runCli(['watch', file, '--no-page', '--voltage', 'Volts', '--current', 'I', '--data', data]);
    expect(a.code).toBe(2);
    expect(a.stderr).toContain(`${file}, column 'Volts': --voltage: no such column (columns: time_s, bias_V, I)`);
    expect(existsSync(data) ? readdirSync(data) : []).toEqual([]);
    const b = runCli(['watch', file, '--no-page', '--voltage', 'bias', '--data', data]);
    expect(b.code).toBe(2);
    expect(b.stderr).toContain("--voltage: no such column (columns: time_s, bias_V, I) (did you mean 'bias_V'?)");
  });

  it('on standard input (the header arrives later): exit 2, nothing journaled as a reading', () => {
    const data = join(tempDir(), 'data');
    const r = runCli(['watch', '-', '--no-page', '--current', 'amps', '--data', data], threeColumns());
    expect(r.code).toBe(2);
    expect(r.stderr).toContain("standard input, column 'amps': --current: no such column (columns: time_s, bias_V, I)");
    const events = journal(data);
    expect(events.filter((e) => e.type === 'reading')).toHaveLength(0);
    const end = events.find((e) => e.type === 'run-end');
    expect(end?.type === 'run-end' && end.reason).toMatch(/--current: no such column/);
  });
});
