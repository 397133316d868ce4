/**
 * The journal on a real file system: round trip at full precision, a torn last line, an unfinished
 * sweep, damaged lines in the middle, annotations after the run, and the export files read back
 * with a plain CSV split (what a spreadsheet sees).
 */
import { appendFileSync, mkdtempSync, readFileSync, statSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { csvUnitTag, exportSession, lineUnits, POINTS_HEADER } from '../../daemon/journal/export.js';
import { JOURNAL_FILE, JournalWriter, READINGS_FILE } from '../../daemon/journal/journal.js';
import { recoverSession, scanJournal } from '../../daemon/journal/reader.js';
import { annotateFolder } from '../../daemon/run/station.js';
import { FLAG, type WireEvent } from '../../protocols/wire.js';
import { writeSession as writeLotSession } from '../helpers/lot.js';

function tmp(): string {
  return mkdtempSync(join(tmpdir(), 'plumbline-journal-'));
}

function writeSession(data: string, sweeps: number, points: number, close = true, planned = points, startedAt = new Date()) {
  const { writer, id } = JournalWriter.create(data, 'unit');
  writer.event({
    type: 'session',
    id,
    startedAt: startedAt.toISOString(),
    source: { kind: 'test', detail: '', control: false },
    instrument: 'x',
    plan: {},
    analysis: {},
    drift: {},
    limits: {},
  });
  const sent: { v: number; i: number }[] = [];
  for (let s = 1; s <= sweeps; s++) {
    writer.event({ type: 'sweep-start', sweep: s, planned, label: '' });
    for (let k = 0; k < points; k++) {
      // Values with all 17 significant digits, to see that none is lost.
      const v = 0.1 * k + 1 / 3;
      const i = Math.PI * 1e-12 * Math.exp(k / 7) * (k % 5 === 0 ? -1 : 1);
      sent.push({ v, i });
      writer.reading(s, k, v, i, k === points - 1 ? FLAG.compliance : 0);
    }
    if (s < sweeps || close) writer.event({ type: 'sweep-end', sweep: s, points, complete: true });
  }
  if (close) {
    writer.event({ type: 'run-end', outcome: 'completed', reason: 'done', sweeps });
    writer.close();
  } else writer.flush();
  return { dir: join(data, id), sent, writer };
}

describe('journal', () => {
  it('keeps every reading at full precision, in order, with consecutive sequence numbers', () => {
    const { dir, sent } = writeSession(tmp(), 3, 50);
    const got: WireEvent[] = [];
    const scan = scanJournal(dir, (e) => got.push(e));
    const readings = got.filter((e) => e.type === 'reading');
    expect(readings.map((r) => ({ v: r.v, i: r.i }))).toEqual(sent);
    expect(got.map((e) => e.seq)).toEqual(got.map((_, k) => k + 1));
    expect(scan.bad).toEqual([]);
    expect(scan.tornTail).toBe(false);
  });

  it('recovery after a crash: torn last line reported and skipped, open sweep marked incomplete, run interrupted', () => {
    // 20 of the 25 planned points of sweep 2 reached the journal.
    const { dir, writer } = writeSession(tmp(), 2, 20, false, 25);
    void writer; // the "crashed" writer is never closed
    appendFileSync(join(dir, JOURNAL_FILE), '{"seq":999,"t":12.5,"type":"capt');
    appendFileSync(join(dir, READINGS_FILE), Buffer.alloc(20, 7)); // 20 of a record's 56 bytes
    const r = recoverSession(join(dir));
    expect(r.recovered).toBe(true);
    expect(r.tornLines).toBe(1);
    expect(r.closedSweep).toBe(2);
    expect(r.message).toMatch(/torn last line/);
    expect(r.message).toMatch(/incomplete last reading record \(20 of 56 bytes\)/);
    expect(statSync(join(dir, READINGS_FILE)).size).toBe(40 * 56);
    const after: WireEvent[] = [];
    const scan = scanJournal(dir, (e) => after.push(e));
    expect(scan.bad).toHaveLength(1);
    expect(scan.bad[0].problem).toMatch(/torn/);
    const tail = after.slice(-4).map((e) => e.type);
    // The cut sweep's final fit follows its end, as the run journals it.
    expect(tail).toEqual(['recovery', 'sweep-end', 'fit', 'run-end']);
    const end = after.at(-1);
    expect(end?.type === 'run-end' && end.outcome).toBe('interrupted');
    const sweepEnd = after.at(-3);
    expect(sweepEnd?.type === 'sweep-end' && sweepEnd.complete).toBe(false);
    expect(sweepEnd?.type === 'sweep-end' && sweepEnd.points).toBe(20);
    // Recovering again changes nothing.
    expect(recoverSession(dir).recovered).toBe(false);
  });

  it('recovery closes a sweep whose every planned point was journaled as complete', () => {
    const { dir } = writeSession(tmp(), 2, 20, false, 20);
    const r = recoverSession(dir);
    expect(r.message).toMatch(/sweep 2 closed: all 20 planned points were journaled/);
    const after: WireEvent[] = [];
    scanJournal(dir, (e) => after.push(e));
    const sweepEnd = after.find((e) => e.type === 'sweep-end' && e.sweep === 2);
    expect(sweepEnd).toMatchObject({ complete: true, points: 20 });
    // This session had no control of an instrument: nothing to say about an output.
    expect(r.outputMayBeOn).toBe(false);
  });

  it('events appended after the run are stamped with the time since the session started, never before the last event', () => {
    // A session that started 95 s ago and whose run took a few milliseconds: a note added now, and
    // a recovery run now, happened ~95 s into the session, not right after its last reading.
    const ago = 95_000;
    const closed = writeSession(tmp(), 1, 10, true, 10, new Date(Date.now() - ago));
    const before = Date.now();
    const note = annotateFolder(closed.dir, { type: 'annotation', text: 'looked at it later', tags: [], source: 'test' });
    const after = Date.now();
    expect(note.t).toBeGreaterThanOrEqual(ago - 5);
    expect(note.t).toBeLessThanOrEqual(ago + (after - before) + 1000);
    const crashed = writeSession(tmp(), 1, 10, false, 20, new Date(Date.now() - ago));
    recoverSession(crashed.dir);
    const ev: WireEvent[] = [];
    scanJournal(crashed.dir, (e) => ev.push(e));
    const rec = ev.find((e) => e.type === 'recovery');
    expect(rec?.t).toBeGreaterThanOrEqual(ago - 5);
    expect(rec?.t).toBeLessThanOrEqual(ago + 5000);
    // A start in the future (the clock set back since): the journal's own time goes on from its last event.
    const skewed = writeSession(tmp(), 1, 10, true, 10, new Date(Date.now() + 3_600_000));
    const lastT = scanJournal(skewed.dir, () => {}).lastT;
    const late = annotateFolder(skewed.dir, { type: 'annotation', text: 'clock set back', tags: [], source: 'test' });
    expect(late.t).toBeGreaterThanOrEqual(lastT);
    expect(late.t).toBeLessThan(lastT + 1000);
  });

  it('a damaged line in the middle is reported with its number and the rest is read', () => {
    const { dir } = writeSession(tmp(), 1, 10);
    const lines = readFileSync(join(dir, JOURNAL_FILE), 'utf8').split('\n');
    lines.splice(2, 0, '{"seq":3}', 'garbage');
    writeFileSync(join(dir, JOURNAL_FILE), lines.join('\n'));
    let n = 0;
    const scan = scanJournal(dir, (e) => e.type === 'reading' && n++);
    expect(n).toBe(10);
    expect(scan.bad.map((b) => b.line)).toEqual([3, 4]);
    expect(scan.bad[0].problem).toMatch(/without a type/);
  });

  it('export writes points.csv, sweeps.csv and session.json that a plain CSV reader understands', () => {
    const { dir, sent } = writeSession(tmp(), 2, 12);
    annotateFolder(dir, { type: 'annotation', text: 'probe re-landed, "pad 3"', tags: ['setup'], sweep: 2, source: 'test' });
    const out = join(tmp(), 'x');
    const r = exportSession(dir, out);
    expect(r.readings).toBe(24);
    const pts = readFileSync(join(out, 'points.csv'), 'utf8').trim().split('\n');
    expect(pts[0].split(',')).toEqual(POINTS_HEADER);
    expect(pts).toHaveLength(25);
    const row = pts[5].split(',');
    expect(Number(row[5])).toBe(sent[4].v);
    expect(Number(row[6])).toBe(sent[4].i);
    expect(pts[12].split(',')[7]).toBe('1'); // last point of sweep 1 at compliance
    const sw = readFileSync(join(out, 'sweeps.csv'), 'utf8').trim().split('\n');
    expect(sw).toHaveLength(3);
    expect(sw[2]).toContain('"probe re-landed, ""pad 3"""');
    const meta = JSON.parse(readFileSync(join(out, 'session.json'), 'utf8'));
    expect(meta.readings).toBe(24);
    expect(meta.annotations[0].tags).toEqual(['setup']);
    expect(meta.timeline.at(-1).type).toBe('run-end');
  });

  it("export names every column's unit: readable tags in the header, each row's line units, and a units map in session.json", () => {
    // Tags as the units read (SI symbols, BIPM SI Brochure 2019); no tag for dimensionless values.
    expect(['m^2/(V*s)', 'eV', '', '1', 'V/m', 'A/m^2', 'm', 'm^-3', 'A/(m^2*K^2)', 'ohm*m', 'K', 'V^-1'].map(csvUnitTag)).toEqual([
      'm2_per_V_s',
      'eV',
      '',
      '',
      'V_per_m',
      'A_per_m2',
      'm',
      'per_m3',
      'A_per_m2_K2',
      'ohm_m',
      'K',
      'per_V',
    ]);
    const data = tmp();
    const dir = writeLotSession(data, {
      label: 'units',
      fits: [
        { params: { barrierHeight: [3.1, 0.01, 'eV'], mobility: [2e-7, 1e-8, 'm^2/(V*s)'], idealityFactor: [1.3, 0.02, '1'] } },
        { params: { barrierHeight: [3.2, 0.01, 'eV'], mobility: [2.1e-7, 1e-8, 'm^2/(V*s)'], idealityFactor: [1.31, 0.02, '1'] } },
      ],
    });
    const out = join(tmp(), 'u');
    exportSession(dir, out);
    const lines = readFileSync(join(out, 'sweeps.csv'), 'utf8').trim().split('\n');
    const head = lines[0].split(',');
    for (const c of ['window_from_V', 'window_to_V', 'slope_unit', 'intercept_unit', 'barrierHeight_eV', 'mobility_m2_per_V_s', 'idealityFactor'])
      expect(head).toContain(c);
    expect(head.some((h) => /_1$|m2Vs/.test(h))).toBe(false);
    const row = lines[1].split(',');
    // The helper's fits are Fowler–Nordheim plots: ln(J/E²) against 1/E in m/V.
    expect(row[head.indexOf('slope_unit')]).toBe('1/(m/V)');
    expect(row[head.indexOf('intercept_unit')]).toBe(''); // the helper's y axis carries no unit
    const meta = JSON.parse(readFileSync(join(out, 'session.json'), 'utf8'));
    // Every column of both files has an entry.
    expect(Object.keys(meta.columns['sweeps.csv']).sort()).toEqual([...head].sort());
    expect(Object.keys(meta.columns['points.csv'])).toEqual(POINTS_HEADER);
    expect(meta.columns['sweeps.csv'].mobility_m2_per_V_s).toBe('m^2/(V*s)');
    expect(meta.columns['sweeps.csv'].idealityFactor_se).toBe('');
    expect(meta.columns['sweeps.csv'].slope).toBe('1/(m/V)');
    expect(meta.columns['points.csv'].current_A).toBe('A');
    // A real Fowler–Nordheim plot (its axes as the mechanism declares them) and a linear one.
    expect(lineUnits({ x: { label: '1/E', unit: 'm/V', kind: 'linear' }, y: { label: 'J/E²', unit: 'A/m^2/(V/m)^2', kind: 'log' } })).toEqual({
      slope: '1/(m/V)',
      intercept: 'ln(A/m^2/(V/m)^2)',
      residual: '',
    });
    expect(lineUnits({ x: { label: 'V', unit: 'V', kind: 'linear' }, y: { label: 'I', unit: 'A', kind: 'linear' } })).toEqual({
      slope: 'A/V',
      intercept: 'A',
      residual: 'A',
    });
  });
});
