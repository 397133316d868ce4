/**
 * A sweep a crash cut short gets its final fit on recovery, from the readings on disk, as the run
 * would have journaled it. The session is made by the real CLI on the simulator (Poole–Frenkel
 * nitride scenario); the crash is the same session's files cut at a moment inside sweep 1 (what a
 * `kill -9` leaves: a prefix of the journal in sequence order, no sweep end, no run end).
 */
import { closeSync, mkdirSync, openSync, readFileSync, writeFileSync, writeSync } from 'node:fs';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { exportSession } from '../../daemon/journal/export.js';
import { JOURNAL_FILE, READINGS_FILE, RECORD_BYTES } from '../../daemon/journal/journal.js';
import { recoverSession, scanJournal } from '../../daemon/journal/reader.js';
import { loadSession } from '../../daemon/journal/sessions.js';
import type { WireEvent } from '../../protocols/wire.js';
import { runCli } from '../helpers/cli.js';
import { tempDir } from '../helpers/daemon.js';

/** A copy of the session as it stood on disk just before `seq` (events and readings below it). */
function cutBefore(dir: string, seq: number): string {
  const out = join(tempDir(), 'crashed');
  mkdirSync(out);
  const lines = readFileSync(join(dir, JOURNAL_FILE), 'utf8')
    .split('\n')
    .filter((l) => l.length > 0 && (JSON.parse(l) as WireEvent).seq < seq);
  writeFileSync(join(out, JOURNAL_FILE), `${lines.join('\n')}\n`);
  const rec = readFileSync(join(dir, READINGS_FILE));
  const f = new Float64Array(rec.buffer, rec.byteOffset, rec.length / 8);
  let n = 0;
  while (n * 7 < f.length && f[n * 7] < seq) n++;
  const fd = openSync(join(out, READINGS_FILE), 'w');
  writeSync(fd, rec.subarray(0, n * RECORD_BYTES));
  closeSync(fd);
  return out;
}

function events(dir: string): WireEvent[] {
  const all: WireEvent[] = [];
  scanJournal(dir, (e) => void (e.type !== 'reading' && all.push(e)), { readings: false });
  return all;
}

describe('recovery fits the sweep a crash cut', () => {
  const data = join(tempDir(), 'data');
  const r = runCli(['run', '--scenario', 'nitride-pf', '--sweeps', '2', '--fast', '--data', data, '--json']);
  const live = JSON.parse(r.stdout).dir as string;
  const liveEvents = events(live);
  const end1 = liveEvents.find((e) => e.type === 'sweep-end' && e.sweep === 1) as Extract<WireEvent, { type: 'sweep-end' }>;
  const fit1 = liveEvents.find((e) => e.type === 'fit' && e.final && e.sweep === 1) as Extract<WireEvent, { type: 'fit' }>;

  it('a sweep whose every reading reached the disk gets the very fit the run journaled', () => {
    expect(r.code, r.stderr).toBe(0);
    expect(fit1.fit).not.toBeNull();
    const crashed = cutBefore(live, end1.seq);
    const rep = recoverSession(crashed);
    expect(rep.closedSweep).toBe(1);
    const after = events(crashed);
    const fit = after.find((e) => e.type === 'fit' && e.final && e.sweep === 1) as Extract<WireEvent, { type: 'fit' }> | undefined;
    expect(fit?.fit?.model).toBe(fit1.fit?.model);
    expect(fit?.fit?.window).toEqual(fit1.fit?.window);
    expect(fit?.fit?.line).toEqual(fit1.fit?.line);
    expect(fit?.fit?.parameters).toEqual(fit1.fit?.parameters);
    expect(fit?.fit?.plausible).toBe(fit1.fit?.plausible);
    // Journaled after the sweep's end, before the run's end, as the run orders them.
    expect(after.map((e) => e.type).slice(-3)).toEqual(['sweep-end', 'fit', 'run-end']);
  });

  it('a sweep cut mid-way is ended incomplete with the reason, fitted from its readings, and export and the session agree', () => {
    const readings1 = loadSession(live).sweeps[0].v.length;
    // The crash about three fifths into sweep 1 (events lie between its readings too).
    const crashed = cutBefore(live, end1.seq - Math.round(0.4 * readings1));
    recoverSession(crashed);
    const s = loadSession(crashed);
    expect(s.sweeps).toHaveLength(1);
    const sw = s.sweeps[0];
    expect(sw.v.length).toBeGreaterThan(readings1 / 2);
    expect(sw.v.length).toBeLessThan(readings1);
    expect(sw.complete).toBe(false);
    const end = events(crashed).find((e) => e.type === 'sweep-end');
    expect(end?.type === 'sweep-end' && end.note).toMatch(/stopped mid-sweep/);
    expect(sw.fit, sw.fitError ?? '').not.toBeNull();
    expect(sw.fit?.model).toBe('poole-frenkel');
    // The Poole–Frenkel slope gives the film's dynamic permittivity (Frenkel 1938; the fit's parameter):
    // the simulator's device was made with 4.0 (config/scenarios/nitride-pf.json); within 3σ of the fit
    // of fewer readings.
    const scenario = JSON.parse(readFileSync(join(import.meta.dirname, '../../config/scenarios/nitride-pf.json'), 'utf8'));
    const p = sw.fit?.parameters.relativePermittivity;
    expect(p).toBeDefined();
    if (p) expect(Math.abs(p.value - scenario.device.params.relativePermittivity)).toBeLessThan(3 * p.stdErr);
    // The export's sweeps.csv names the model for the cut sweep.
    const ex = exportSession(crashed);
    const rows = readFileSync(join(ex.outDir, 'sweeps.csv'), 'utf8').trim().split('\n');
    const head = rows[0].split(',');
    expect(rows[1].split(',')[head.indexOf('model')]).toBe('poole-frenkel');
  });
});
