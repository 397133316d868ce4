/**
 * `plumbline watch`: a sweep cut short — by the file being truncated under it, or by SIGTERM — is
 * journaled as incomplete (`complete: false`) with the reason, and every caution journaled is also
 * printed on the terminal. A sweep the source itself ends (standard input closed) is complete.
 * Readings: a 1 GΩ resistor's line, I = V/R (Ohm's law).
 */
import { spawn } from 'node:child_process';
import { appendFileSync, readdirSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { scanJournal } from '../../daemon/journal/reader.js';
import type { WireEvent } from '../../protocols/wire.js';
import { CLI, runCli } from '../helpers/cli.js';
import { tempDir } from '../helpers/daemon.js';

const sleep = (ms: number) => new Promise((r) => setTimeout(r, ms));
const rows = (from: number, to: number) => Array.from({ length: to - from }, (_x, k) => `${0.2 * (from + k)},${(0.2 * (from + k)) / 1e9}\n`).join('');

function journal(data: string): WireEvent[] {
  const events: WireEvent[] = [];
  const d = readdirSync(data);
  if (d.length > 0) scanJournal(join(data, d[0]), (e) => events.push(e));
  return events;
}

async function until(what: () => boolean, label: string): Promise<void> {
  for (let k = 0; k < 400; k++) {
    if (what()) return;
    await sleep(50);
  }
  throw new Error(`timed out waiting for ${label}`);
}

describe('watch: sweeps cut short', () => {
  it('a truncated file and SIGTERM each leave their sweep incomplete, with the reason; the caution is printed', async () => {
    const dir = tempDir();
    const file = join(dir, 'acq.csv');
    const data = join(dir, 'data');
    writeFileSync(file, 'V (V),I (A)\n');
    const p = spawn(process.execPath, [CLI, 'watch', file, '--data', data, '--no-page', '--model', 'ohmic'], { stdio: ['ignore', 'pipe', 'pipe'] });
    let out = '';
    p.stdout.on('data', (d) => (out += String(d)));
    p.stderr.on('data', (d) => (out += String(d)));
    try {
      await until(() => out.includes('watching'), 'watch to start');
      // Half a sweep up (0 to 4.8 V), then the acquisition program restarts its file.
      appendFileSync(file, rows(0, 25));
      const readings = () => journal(data).filter((e) => e.type === 'reading').length;
      await until(() => readings() === 25, 'the first 25 readings');
      writeFileSync(file, `V (V),I (A)\n${rows(0, 10)}`);
      await until(() => readings() === 35, 'the 10 readings after the truncation');
    } finally {
      p.kill('SIGTERM');
      await new Promise((r) => p.once('exit', r));
    }
    expect(out).toMatch(/CAUTION \[passive-source\] .*acq\.csv was truncated/);
    const ends = journal(data).filter((e) => e.type === 'sweep-end');
    expect(ends.map((e) => e.type === 'sweep-end' && [e.points, e.complete])).toEqual([
      [25, false],
      [10, false],
    ]);
    expect(ends[0].type === 'sweep-end' && ends[0].note).toMatch(/^cut short: .*acq\.csv was truncated/);
    expect(ends[1].type === 'sweep-end' && ends[1].note).toMatch(/^cut short: terminated \(SIGTERM\)/);
  }, 40_000);

  it('a sweep the source ends (standard input closed) is complete', () => {
    const data = join(tempDir(), 'data');
    const r = runCli(['watch', '-', '--no-page', '--model', 'ohmic', '--data', data], `V,I\n${rows(0, 20)}`);
    expect(r.code, r.stderr).toBe(0);
    // The session's first caution, journaled as it opens, is on the terminal too.
    expect(r.stdout + r.stderr).toMatch(/CAUTION \[passive-source\] Readings come from standard input\. plumbline does not control this instrument/);
    const ends = journal(data).filter((e) => e.type === 'sweep-end');
    expect(ends.map((e) => e.type === 'sweep-end' && [e.points, e.complete])).toEqual([[20, true]]);
  });
});
