import { appendFileSync, mkdtempSync, renameSync, truncateSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { PassThrough } from 'node:stream';
import { describe, expect, it } from 'vitest';
import { CsvRowMapper } from '../../protocols/csv-rows.js';
import { fileLines, streamLines } from '../../protocols/line-source.js';

const until = async (cond: () => boolean, ms = 3000) => {
  const t0 = Date.now();
  while (!cond()) {
    if (Date.now() - t0 > ms) throw new Error('timed out waiting');
    await new Promise((r) => setTimeout(r, 10));
  }
};

describe('following a CSV another program is writing', () => {
  it('sees appended rows, a partial row only once complete, then survives truncation and rotation', async () => {
    const dir = mkdtempSync(join(tmpdir(), 'plumbline-tail-'));
    const file = join(dir, 'run.csv');
    writeFileSync(file, 'V,I\n0.1,1e-9\n');
    const src = await fileLines(file, 10);
    const lines: string[] = [];
    const notices: string[] = [];
    src.on('line', (l) => lines.push(l));
    src.on('notice', (n) => notices.push(n));
    try {
      await until(() => lines.length === 2);
      appendFileSync(file, '0.2,2e-9\n0.3,3e');
      await until(() => lines.length === 3);
      await new Promise((r) => setTimeout(r, 50));
      expect(lines).toEqual(['V,I', '0.1,1e-9', '0.2,2e-9']);
      appendFileSync(file, '-9\n');
      await until(() => lines.length === 4);
      expect(lines[3]).toBe('0.3,3e-9');
      truncateSync(file, 0);
      await until(() => notices.some((n) => n.includes('truncated')));
      appendFileSync(file, 'V,I\n0.4,4e-9\n');
      await until(() => lines.includes('0.4,4e-9'));
      renameSync(file, join(dir, 'run.csv.1'));
      writeFileSync(file, 'V,I\n0.5,5e-9\n');
      await until(() => lines.includes('0.5,5e-9'));
      expect(notices.some((n) => n.includes('replaced by a new file'))).toBe(true);
    } finally {
      await src.stop();
    }
  });
});

describe('stdin-like stream sources and column mapping', () => {
  it('maps columns by name, skips repeated headers, rejects a bad row with its reason', async () => {
    const input = new PassThrough();
    const src = streamLines(input);
    const mapper = new CsvRowMapper({ voltage: 'bias', current: 'Id', compliance: 'comp' });
    const results: ReturnType<CsvRowMapper['map']>[] = [];
    src.on('line', (l) => results.push(mapper.map(l)));
    input.write('time,Id,bias,comp\n0,1e-9,0.1,0\n1,2e-9,0.2');
    input.write(',1\n2,oops,0.3,0\ntime,Id,bias,comp\n3,4e-9,0.4,0\n');
    input.end();
    await new Promise((r) => src.on('end', r));
    expect(results.map((r) => r.kind)).toEqual(['header', 'reading', 'reading', 'rejected', 'header', 'reading']);
    const second = results[2];
    expect(second.kind === 'reading' && second.reading.v === 0.2 && second.compliance).toBe(true);
    const bad = results[3];
    expect(bad.kind === 'rejected' && bad.reason).toBe("column 'Id': 'oops' is not a number");
  });
  it('an unknown mapped column is an error naming the column and the header', () => {
    const m = new CsvRowMapper({ current: 'amps' }, 'run.csv');
    expect(() => m.map('V,I')).toThrowError("run.csv, column 'amps': --current: no such column (columns: V, I)");
    expect(() => new CsvRowMapper({ current: 'Id' }, 'run.csv').map('V,I_d')).toThrowError("(did you mean 'I_d'?)");
  });
  it('reads units in the header as fit does: mV and nA to V and A', () => {
    // SI prefixes m = 1e-3, n = 1e-9 (SI Brochure, 9th ed., 2019, Table 7).
    const m = new CsvRowMapper();
    expect(m.map('voltage (mV),current (nA)').kind).toBe('header');
    const r = m.map('2500,4');
    expect(r.kind === 'reading' && [r.reading.v, r.reading.i]).toEqual([2.5, 4e-9]);
  });
});
