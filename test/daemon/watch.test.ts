/**
 * `plumbline watch` on a CSV another program is writing: the real CLI follows a real file that this
 * test appends to at 5,000 rows/s (sawtooth sweeps of an invented exponential device), truncates and
 * restarts, with one malformed row in the middle. The journal must hold every good row, in order,
 * with the malformed one reported by line number; sweeps come from direction reversals.
 */
import { spawn } from 'node:child_process';
import { appendFileSync, readdirSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { scanJournal } from '../../daemon/journal/reader.js';
import type { WireEvent } from '../../protocols/wire.js';
import { CLI } from '../helpers/cli.js';
import { tempDir } from '../helpers/daemon.js';

const sleep = (ms: number) => new Promise((r) => setTimeout(r, ms));

describe('watch mode', () => {
  it('keeps up with 5,000 rows/s, reports a malformed row by line, and recovers from truncation', async () => {
    const dir = tempDir();
    const file = join(dir, 'acq.csv');
    const data = join(dir, 'data');
    writeFileSync(file, 'V (V),I (A)\n');
    const p = spawn(process.execPath, [CLI, 'watch', file, '--data', data, '--no-page', '--model', 'exponential'], { stdio: ['ignore', 'pipe', 'pipe'] });
    let out = '';
    p.stdout.on('data', (d) => (out += String(d)));
    p.stderr.on('data', (d) => (out += String(d)));
    while (!out.includes('watching')) await sleep(20);
    const written: { v: number; i: number }[] = [];
    const row = (k: number) => {
      const v = 0.01 * (k % 200); // 200-point sawtooth sweeps, 0 … 1.99 V
      const i = 1e-9 * Math.exp(3 * v);
      written.push({ v, i });
      return `${v},${i}\n`;
    };
    // 5,000 rows/s for 2 s: 50 rows every 10 ms.
    let k = 0;
    const t0 = Date.now();
    while (k < 10_000) {
      let chunk = '';
      for (let n = 0; n < 50; n++) chunk += row(k++);
      if (k === 5000) chunk += 'oops,not-a-number\n';
      appendFileSync(file, chunk);
      const due = t0 + (k / 5000) * 1000;
      const wait = due - Date.now();
      if (wait > 0) await sleep(wait);
    }
    // The acquisition program restarts its file (truncation), then writes one more sweep. Rows the
    // watcher has not read when the file is cut are gone for any reader: wait until it has them
    // all (on a loaded machine it may trail the writer by more than the pause).
    const currentSession = () => {
      const d = readdirSync(data);
      return d.length ? join(data, d[0]) : undefined;
    };
    for (let k = 0; k < 200; k++) {
      const s = currentSession();
      let n = 0;
      if (s) scanJournal(s, (e) => void (e.type === 'reading' && n++));
      if (n >= 10_000) break;
      await sleep(50);
    }
    await sleep(300);
    let again = 'V (V),I (A)\n';
    for (let n = 0; n < 200; n++) again += row(n);
    writeFileSync(file, again);
    await sleep(800);
    p.kill('SIGINT');
    await new Promise((r) => p.once('exit', r));
    expect(out).toMatch(/stopped: interrupted/);
    expect(out).toMatch(/acq\.csv line 5002: column 'V \(V\)': 'oops' is not a number/);
    const session = join(data, readdirSync(data)[0]);
    const events: WireEvent[] = [];
    scanJournal(session, (e) => events.push(e));
    const readings = events.filter((e) => e.type === 'reading');
    expect(readings.map((r) => ({ v: r.v, i: r.i }))).toEqual(written);
    // 50 sweeps before the truncation, one after it.
    expect(events.filter((e) => e.type === 'sweep-start')).toHaveLength(51);
    expect(events.some((e) => e.type === 'caution' && /truncated/.test(e.message))).toBe(true);
    expect(events.filter((e) => e.type === 'rejected')).toHaveLength(1);
    // The live fits ran on the watched data (ln I against V: rate 3 /V).
    const fit = events.filter((e) => e.type === 'fit' && e.final).at(-1);
    expect(fit?.type === 'fit' && fit.fit?.parameters.rate.value).toBeCloseTo(3, 6);
    const start = events[0];
    expect(start.type === 'session' && start.source.control).toBe(false);
  }, 30_000);
});
