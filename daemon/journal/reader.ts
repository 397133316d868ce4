/**
 * Reads a session journal line by line in bounded memory (64 KiB chunks), tolerating damage: a line
 * that is not valid JSON, or not a known shape, is reported with its line number and skipped.
 * Recovery after a crash closes what the dead process left open.
 */
import { closeSync, existsSync, ftruncateSync, openSync, readdirSync, readSync, rmSync, statSync, writeSync } from 'node:fs';
import { join } from 'node:path';
import type { ReadingEvent, WireEvent } from '../../protocols/wire.js';
import { analysisSchema, type AnalysisSettings } from '../pipeline/settings.js';
import { finalFit, NullReadings } from '../pipeline/sweep-fit.js';
import { JOURNAL_FILE, JournalWriter, LOCK_FILE, liveLockHolder, READINGS_FILE, RECORD_BYTES, RECORD_FIELDS, requireSessionFolder } from './journal.js';

export interface BadLine {
  readonly line: number;
  readonly text: string;
  readonly problem: string;
}

export interface ScanResult {
  readonly lines: number;
  readonly bad: BadLine[];
  /** journal.jsonl does not end with a newline (the last line was torn by a crash). */
  readonly tornTail: boolean;
  /** Bytes of an incomplete last record in readings.f64 (torn by a crash), skipped. */
  readonly tornReadingBytes: number;
  readonly readings: number;
  readonly lastSeq: number;
  readonly lastT: number;
  /** The session event's start (ISO 8601), when the journal holds one. */
  readonly startedAt: string | null;
}

function parseLine(text: string): WireEvent | string {
  let o: unknown;
  try {
    o = JSON.parse(text);
  } catch {
    return 'not valid JSON (torn or damaged line)';
  }
  if (typeof o !== 'object' || o === null) return 'not a JSON object';
  const type = (o as { type?: unknown }).type;
  if (typeof type !== 'string') return 'event without a type';
  return o as WireEvent;
}

/** Iterates readings.f64 in 64 KiB chunks (whole records), calling `on` with each reading. */
function scanReadings(dir: string, on: (r: ReadingEvent) => void): { count: number; tornBytes: number } {
  const file = join(dir, READINGS_FILE);
  if (!existsSync(file)) return { count: 0, tornBytes: 0 };
  const size = statSync(file).size;
  const whole = size - (size % RECORD_BYTES);
  const fd = openSync(file, 'r');
  const per = 1170; // records per chunk (~64 KiB)
  const buf = Buffer.alloc(per * RECORD_BYTES);
  const f = new Float64Array(buf.buffer, buf.byteOffset, per * RECORD_FIELDS);
  let pos = 0;
  let count = 0;
  try {
    while (pos < whole) {
      const want = Math.min(buf.length, whole - pos);
      let got = 0;
      while (got < want) {
        const n = readSync(fd, buf, got, want - got, pos + got);
        if (n <= 0) break;
        got += n;
      }
      const records = Math.floor(got / RECORD_BYTES);
      for (let r = 0; r < records; r++) {
        const b = r * RECORD_FIELDS;
        on({ type: 'reading', seq: f[b], sweep: f[b + 1], k: f[b + 2], t: f[b + 3], v: f[b + 4], i: f[b + 5], flags: f[b + 6] });
      }
      count += records;
      pos += records * RECORD_BYTES;
      if (records === 0) break;
    }
  } finally {
    closeSync(fd);
  }
  return { count, tornBytes: size - whole };
}

/**
 * Calls `onEvent` for every good event and reading, merged in sequence order (journal.jsonl holds
 * the events, readings.f64 the readings). `line` is the event's line in journal.jsonl (0 for readings).
 * With `readings: false` only the events are read (summaries that need no readings).
 */
export function scanJournal(dir: string, onEvent: (e: WireEvent, line: number) => void, opts: { readings?: boolean } = {}): ScanResult {
  const file = join(dir, JOURNAL_FILE);
  requireSessionFolder(dir);
  // Events are few (a handful per sweep); they are read first and interleaved with the readings.
  const events: { e: WireEvent; line: number }[] = [];
  const fd = openSync(file, 'r');
  const chunk = Buffer.alloc(1 << 16);
  let carry = '';
  let lineNo = 0;
  const bad: BadLine[] = [];
  let lastSeq = 0;
  let lastT = 0;
  let startedAt: string | null = null;
  let lastByte = -1;
  const take = (text: string) => {
    lineNo++;
    if (text.length === 0) return;
    const e = parseLine(text);
    if (typeof e === 'string') {
      bad.push({ line: lineNo, text: text.slice(0, 200), problem: e });
      return;
    }
    events.push({ e, line: lineNo });
  };
  try {
    let n: number;
    let pos = 0;
    const decoder = new TextDecoder();
    while ((n = readSync(fd, chunk, 0, chunk.length, pos)) > 0) {
      pos += n;
      lastByte = chunk[n - 1];
      const text = carry + decoder.decode(chunk.subarray(0, n), { stream: true });
      const parts = text.split('\n');
      carry = parts.pop() ?? '';
      for (const p of parts) take(p);
    }
    carry += decoder.decode();
  } finally {
    closeSync(fd);
  }
  const tornTail = lastByte !== -1 && lastByte !== 0x0a;
  if (carry.length > 0) take(carry);
  let next = 0;
  const emit = (x: { e: WireEvent; line: number }) => {
    if (typeof x.e.seq === 'number' && x.e.seq > lastSeq) lastSeq = x.e.seq;
    if (typeof x.e.t === 'number' && x.e.t > lastT) lastT = x.e.t;
    if (x.e.type === 'session' && typeof x.e.startedAt === 'string') startedAt = x.e.startedAt;
    onEvent(x.e, x.line);
  };
  const r =
    opts.readings === false
      ? { count: 0, tornBytes: 0 }
      : scanReadings(dir, (reading) => {
          while (next < events.length && events[next].e.seq < reading.seq) emit(events[next++]);
          emit({ e: reading, line: 0 });
        });
  while (next < events.length) emit(events[next++]);
  return { lines: lineNo, bad, tornTail, tornReadingBytes: r.tornBytes, readings: r.count, lastSeq, lastT, startedAt };
}

/** Cuts an incomplete last record off readings.f64 (recovery only; everything whole is kept). */
function truncateTornReadings(dir: string, tornBytes: number): void {
  const file = join(dir, READINGS_FILE);
  const fd = openSync(file, 'r+');
  try {
    ftruncateSync(fd, statSync(file).size - tornBytes);
  } finally {
    closeSync(fd);
  }
}

export interface SessionSummary {
  readonly id: string;
  readonly dir: string;
  readonly started: string | null;
  readonly sweeps: number;
  readonly readings: number;
  readonly outcome: string | null;
  readonly live: boolean;
}

/** The session folders under a data directory, newest first. */
export function listSessions(dataDir: string): string[] {
  if (!existsSync(dataDir)) return [];
  return readdirSync(dataDir)
    .filter((d) => existsSync(join(dataDir, d, JOURNAL_FILE)) && statSync(join(dataDir, d)).isDirectory())
    .sort()
    .reverse();
}

export interface RecoveryReport {
  readonly dir: string;
  readonly recovered: boolean;
  readonly tornLines: number;
  readonly badLines: BadLine[];
  readonly closedSweep: number | null;
  readonly addedRunEnd: boolean;
  /** The run had the output on when its process died: nothing turned it off. */
  readonly outputMayBeOn?: boolean;
  readonly message: string;
}

/**
 * What to say of a session whose journal has no run end: a live process still writes it, or its run
 * was cut short (a crash, a kill, a power loss) and nothing has closed it yet.
 */
export function noRunEndNote(dir: string): string {
  const pid = liveLockHolder(dir);
  return pid !== undefined
    ? `the session has no run end yet: it is still being written (process ${pid} holds it); what is shown is what was on disk at this moment`
    : `the session has no run end: its run was cut short (a crash, a kill or a power loss) and nothing closed it; \`plumbline recover ${dir}\` closes it (its open sweep gets its end and final fit)`;
}

/** What to do when a daemon died with the output on (an instrument keeps its output state; common practice). */
export const OUTPUT_MAY_BE_ON =
  'nothing turned it off when the daemon stopped, and a source-measure unit keeps its output state on its own. Check the instrument (its front panel) and turn the output off there before touching the probes or the fixture.';

/**
 * Closes a session a dead process left open: terminates a torn last line (so the next append starts
 * on a fresh line; the torn text stays in the file and readers skip it), ends an unfinished sweep
 * (incomplete, with the reason) and journals its final fit from the readings on disk — the fit the
 * run would have made at that sweep's end (`pipeline/sweep-fit.ts`, with the settings then in force)
 * — and ends the run as 'interrupted'. A session a live process still writes is left alone;
 * a finished session is reported unchanged.
 */
export function recoverSession(dir: string): RecoveryReport {
  const holder = liveLockHolder(dir);
  if (holder !== undefined) {
    return { dir, recovered: false, tornLines: 0, badLines: [], closedSweep: null, addedRunEnd: false, message: `in use by process ${holder}; left alone` };
  }
  let openSweep: number | null = null;
  let planned = 0;
  let ended = false;
  let pointsInOpen = 0;
  let readings = 0;
  let maxSweep = 0;
  let control = false;
  let outputOn = false;
  // What the run's final fit of the open sweep would have used: the settings in force, the run's
  // compliance limit, its null readings so far, and the sweep's readings.
  type InForce = { ok: true; analysis: AnalysisSettings } | { ok: false; problem: string };
  let settings = { ok: false, problem: 'the journal holds no analysis settings' } as InForce;
  let complianceLimit: number | undefined;
  const nulls = new NullReadings();
  let open = { v: [] as number[], i: [] as number[], flags: [] as number[] };
  const takeSettings = (raw: unknown, where: string) => {
    const r = analysisSchema.safeParse(raw);
    settings = r.success
      ? { ok: true, analysis: r.data }
      : { ok: false, problem: `the analysis settings of the ${where} cannot be read (${r.error.issues[0]?.message ?? 'invalid'})` };
  };
  const scan = scanJournal(dir, (e) => {
    if (e.type === 'session') {
      control = e.source.control;
      complianceLimit = (e.plan as { compliance?: number } | null)?.compliance;
      takeSettings(e.analysis, 'session event');
    } else if (e.type === 'settings') takeSettings(e.analysis, `settings event ${e.seq}`);
    else if (e.type === 'output') outputOn = e.on;
    else if (e.type === 'sweep-start') {
      openSweep = e.sweep;
      planned = e.planned;
      pointsInOpen = 0;
      open = { v: [], i: [], flags: [] };
    } else if (e.type === 'sweep-end') openSweep = null;
    else if (e.type === 'reading') {
      readings++;
      maxSweep = Math.max(maxSweep, e.sweep);
      if (openSweep !== null && e.sweep === openSweep) {
        pointsInOpen++;
        open.v.push(e.v);
        open.i.push(e.i);
        open.flags.push(e.flags);
      }
      nulls.note(e.v, e.i, e.flags, settings.ok ? (settings.analysis.inputs.flatBand ?? 0) : 0);
    } else if (e.type === 'run-end') ended = true;
  });
  const tornLines = scan.bad.length;
  if (ended && !scan.tornTail && scan.tornReadingBytes === 0) {
    rmSync(join(dir, LOCK_FILE), { force: true });
    return {
      dir,
      recovered: false,
      tornLines,
      badLines: scan.bad,
      closedSweep: null,
      addedRunEnd: false,
      message: 'session was closed properly; nothing to recover',
    };
  }
  if (scan.tornTail) {
    const fd = openSync(join(dir, JOURNAL_FILE), 'a');
    writeSync(fd, '\n');
    closeSync(fd);
  }
  if (scan.tornReadingBytes > 0) truncateTornReadings(dir, scan.tornReadingBytes);
  const w = JournalWriter.append(dir, scan.lastSeq, scan.lastT, scan.startedAt);
  const closedSweep: number | null = openSweep;
  // Every planned point journaled: the sweep is whole, whatever stopped the daemon after it.
  const whole = closedSweep !== null && planned > 0 && pointsInOpen >= planned;
  // A run that drove the instrument and never recorded its output going off.
  const outputMayBeOn = !ended && control && outputOn;
  const parts = [`${readings} readings kept`];
  if (scan.tornTail) parts.push('the torn last line was skipped');
  if (scan.tornReadingBytes > 0) parts.push(`an incomplete last reading record (${scan.tornReadingBytes} of ${RECORD_BYTES} bytes) was dropped`);
  if (tornLines > (scan.tornTail ? 1 : 0)) parts.push(`${tornLines} damaged line(s) skipped`);
  if (closedSweep !== null)
    parts.push(
      whole
        ? `sweep ${closedSweep} closed: all ${planned} planned points were journaled`
        : `sweep ${closedSweep} marked incomplete after ${pointsInOpen} of ${planned} points`,
    );
  if (!ended) parts.push('run marked interrupted');
  if (outputMayBeOn) parts.push(`THE INSTRUMENT'S OUTPUT MAY STILL BE ON: ${OUTPUT_MAY_BE_ON}`);
  const message = `recovered: ${parts.join('; ')}`;
  w.event({ type: 'recovery', tornLines, closedSweep, addedRunEnd: !ended, message });
  if (outputMayBeOn) w.event({ type: 'caution', kind: 'recovery', message: `The daemon stopped while this run had the output on: ${OUTPUT_MAY_BE_ON}` });
  if (closedSweep !== null) {
    w.event(
      whole
        ? {
            type: 'sweep-end',
            sweep: closedSweep,
            points: pointsInOpen,
            complete: true,
            note: 'closed on recovery: every planned point was journaled before the daemon stopped',
          }
        : { type: 'sweep-end', sweep: closedSweep, points: pointsInOpen, complete: false, note: 'the daemon stopped mid-sweep (recovered on the next start)' },
    );
    // The final fit the run would have journaled at this sweep's end, from the readings on disk.
    const s = settings;
    if (s.ok) {
      const knownFloor = nulls.trusted();
      const { fit, error, solar } = finalFit(open.v, open.i, open.flags, { analysis: s.analysis, complianceLimit, ...(knownFloor ? { knownFloor } : {}) });
      w.event({ type: 'fit', sweep: closedSweep, final: true, fit, ...(error ? { error } : {}), ...(solar ? { solar } : {}) });
    } else w.event({ type: 'fit', sweep: closedSweep, final: true, fit: null, error: `not fitted on recovery: ${s.problem}` });
  }
  if (!ended)
    w.event({
      type: 'run-end',
      outcome: 'interrupted',
      reason: 'the daemon stopped without closing the session (crash, kill or power loss)',
      sweeps: maxSweep,
    });
  w.close();
  rmSync(join(dir, LOCK_FILE), { force: true });
  return { dir, recovered: true, tornLines, badLines: scan.bad, closedSweep, addedRunEnd: !ended, outputMayBeOn, message };
}

/** Recovers every unfinished session under a data directory (the start-up pass). */
export function recoverAll(dataDir: string): RecoveryReport[] {
  return listSessions(dataDir)
    .map((id) => recoverSession(join(dataDir, id)))
    .filter((r) => r.recovered);
}
