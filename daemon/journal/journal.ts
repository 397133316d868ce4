/**
 * The session journal: one folder per session, two append-only files.
 *  - `journal.jsonl`: JSON Lines, one event from protocols/wire.ts per line (session, sweep
 *    boundaries, fits, drift, cautions, decisions, annotations, settings, output, run end).
 *  - `readings.f64`: the readings, one 56-byte record each: seven little-endian IEEE-754 doubles
 *    seq, sweep, k, t (ms since session start), v (V), i (A), flags. Binary keeps every bit and costs
 *    no number formatting, so the chain keeps up with fast sources; `plumbline export` turns it into
 *    points.csv. Events and readings share one sequence; readers merge the two files by seq.
 *
 * Crash safety: both files are buffered and written with one write(2) each every FLUSH_MS (100 ms)
 * and whenever a buffer fills — events first, and the readings before an event are written before
 * that event is buffered, so the files on disk are always a consistent prefix of the session;
 * fdatasync follows at most every SYNC_MS (250 ms).
 * A killed process loses at most the last ~100 ms (the kernel keeps what was written), a power cut
 * at most ~350 ms. `session.lock` holds the writer's pid while it runs.
 */
import { closeSync, existsSync, fdatasync, fstatSync, ftruncateSync, mkdirSync, openSync, readFileSync, rmSync, writeFileSync, writeSync } from 'node:fs';
import { endianness } from 'node:os';
import { join } from 'node:path';
import type { NewEvent, ReadingEvent, WireEvent } from '../../protocols/wire.js';
import { notFound } from '../../protocols/file-problem.js';

export const JOURNAL_FILE = 'journal.jsonl';
export const READINGS_FILE = 'readings.f64';
/** Doubles per reading record, and bytes. */
export const RECORD_FIELDS = 7;
export const RECORD_BYTES = RECORD_FIELDS * 8;
const RECORDS_PER_BUFFER = 16384;
export const LOCK_FILE = 'session.lock';
const FLUSH_MS = 100;
const SYNC_MS = 250;
const MAX_BUFFER = 1 << 20;

export class JournalError extends Error {
  readonly code: string = 'JOURNAL';
}

/**
 * Writing the journal failed (a full disk, a quota, an I/O error). From then on the writer refuses
 * every event: the station turns the output off rather than measure what it cannot record.
 */
export class JournalWriteError extends JournalError {
  override readonly code = 'JOURNAL_WRITE';
}

/** Plain words for the usual write failures. */
function writeFailure(dir: string, e: unknown): JournalWriteError {
  const err = e as NodeJS.ErrnoException;
  const what =
    err.code === 'ENOSPC'
      ? 'no space left on the disk'
      : err.code === 'EDQUOT'
        ? 'the disk quota is used up'
        : err.code === 'EIO'
          ? 'an input/output error on the disk'
          : err.code === 'EROFS'
            ? 'the file system is read-only'
            : err.message;
  return new JournalWriteError(`cannot write the journal in ${dir}: ${what} (${err.code ?? 'error'}); free space or fix the disk, then start a new run`);
}

// Records are written from a Float64Array, i.e. in the machine's byte order; the format is little-endian.
if (endianness() !== 'LE') throw new Error('plumbline journal: big-endian machines are not supported (readings.f64 is little-endian)');

/** A session id from the time and a label: 20261202-031500-oxide-fn (a suffix keeps it unique). */
export function newSessionId(dataDir: string, label: string, now = new Date()): string {
  const p = (n: number, w = 2) => String(n).padStart(w, '0');
  const stamp = `${now.getUTCFullYear()}${p(now.getUTCMonth() + 1)}${p(now.getUTCDate())}-${p(now.getUTCHours())}${p(now.getUTCMinutes())}${p(now.getUTCSeconds())}`;
  const safe = label.replace(/[^a-zA-Z0-9-]+/g, '-').slice(0, 40) || 'run';
  let id = `${stamp}-${safe}`;
  for (let n = 2; existsSync(join(dataDir, id)); n++) id = `${stamp}-${safe}-${n}`;
  return id;
}

/** Throws a JournalError naming `dir` unless it is a session folder (a folder holding the journal). */
export function requireSessionFolder(dir: string): void {
  if (existsSync(join(dir, JOURNAL_FILE))) return;
  throw new JournalError(existsSync(dir) ? `${dir}: no ${JOURNAL_FILE} here; is this a session folder?` : `${dir}: ${notFound(dir, 'folder')}`);
}

export class JournalWriter {
  private readonly fd: number;
  private readonly rfd: number;
  private readonly rec = new Float64Array(RECORDS_PER_BUFFER * RECORD_FIELDS);
  private recPos = 0;
  private buf: string[] = [];
  private bufBytes = 0;
  private timer: NodeJS.Timeout | undefined;
  private syncing = false;
  private syncScheduled = false;
  private lastSync = 0;
  private dirty = false;
  private lastFlush = performance.now();
  private closed = false;
  private seq: number;
  readonly t0: number;
  /** Bytes handed to write(2) so far in this process. */
  written = 0;
  private failure: JournalWriteError | undefined;
  /** Sizes of the two files up to their last whole line / record. */
  private eventBytes: number;
  private readingBytes: number;
  /** Called once, when a write first fails (also from the background flush timer). */
  onError: ((e: JournalWriteError) => void) | undefined;

  private constructor(
    readonly dir: string,
    startSeq: number,
    t0: number,
    private readonly lock: boolean,
  ) {
    this.fd = openSync(join(dir, JOURNAL_FILE), 'a');
    this.rfd = openSync(join(dir, READINGS_FILE), 'a');
    this.eventBytes = fstatSync(this.fd).size;
    this.readingBytes = fstatSync(this.rfd).size;
    this.seq = startSeq;
    this.t0 = t0;
    if (lock) writeFileSync(join(dir, LOCK_FILE), `${process.pid}\n`);
  }

  /** Creates a new session folder under dataDir. */
  static create(dataDir: string, label: string): { writer: JournalWriter; id: string } {
    mkdirSync(dataDir, { recursive: true });
    const id = newSessionId(dataDir, label);
    const dir = join(dataDir, id);
    mkdirSync(dir);
    return { writer: new JournalWriter(dir, 0, performance.now(), true), id };
  }

  /**
   * Opens an existing session folder to append (annotations after the run, recovery notes).
   * Sequence numbers continue from `lastSeq`. t is the time since the session started (its session
   * event's `startedAt`, wall clock) at the moment of writing, never earlier than the journal's last
   * time `lastT` (a clock set back, or a session without a readable start, continues from there).
   */
  static append(dir: string, lastSeq: number, lastT: number, startedAt?: string | null): JournalWriter {
    requireSessionFolder(dir);
    const start = startedAt ? Date.parse(startedAt) : Number.NaN;
    const since = Number.isFinite(start) ? Date.now() - start : Number.NaN;
    const t = Number.isFinite(since) && since > lastT ? since : lastT;
    return new JournalWriter(dir, lastSeq, performance.now() - t, false);
  }

  get lastSeq(): number {
    return this.seq;
  }

  /** Simulated time let pass at once since the session started, ms (a fast simulator's waits). */
  private skew: () => number = () => 0;

  /**
   * Times this session on an instrument's clock that runs ahead of the wall clock: `elapsedMs()`
   * is the time the instrument has let pass at once so far (a built-in simulator in fast mode).
   * Only what passes from now on counts.
   */
  useInstrumentClock(elapsedMs: () => number): void {
    const base = elapsedMs();
    this.skew = () => elapsedMs() - base;
  }

  now(): number {
    return Math.round((performance.now() + this.skew() - this.t0) * 1000) / 1000;
  }

  /** Journals an event; returns it with its sequence number and time. */
  event(e: NewEvent): WireEvent {
    if (this.failure) throw this.failure;
    // Everything before this event reaches the files before the event can (flush() writes the
    // buffered events, then the readings): a crash at any moment leaves a journal that is a
    // prefix of the session in sequence order — no event without the readings before it, no
    // reading without its sweep's start.
    if (this.recPos > 0) this.flush();
    const full = { seq: ++this.seq, t: this.now(), ...e } as WireEvent;
    this.push(`${JSON.stringify(full)}\n`);
    return full;
  }

  /** Journals one reading (binary record). */
  reading(sweep: number, k: number, v: number, i: number, flags: number): ReadingEvent {
    if (this.failure) throw this.failure;
    if (this.closed) throw new JournalError(`${this.dir}: journal already closed`);
    const seq = ++this.seq;
    const now = performance.now();
    const t = Math.round((now + this.skew() - this.t0) * 1000) / 1000;
    const r = this.rec;
    let p = this.recPos;
    r[p++] = seq;
    r[p++] = sweep;
    r[p++] = k;
    r[p++] = t;
    r[p++] = v;
    r[p++] = i;
    r[p++] = flags;
    this.recPos = p;
    if (p === r.length || now - this.lastFlush >= FLUSH_MS) this.flush();
    else if (!this.timer) this.timer = setTimeout(this.timedFlush, FLUSH_MS);
    return { type: 'reading', seq, sweep, k, t, v, i, flags };
  }

  private push(line: string): void {
    if (this.closed) throw new JournalError(`${this.dir}: journal already closed`);
    this.buf.push(line);
    this.bufBytes += line.length;
    // The timer covers an idle daemon; the clock check covers a busy one whose event loop does not
    // reach its timers (a long run of microtasks), so the bound holds either way.
    if (this.bufBytes >= MAX_BUFFER || performance.now() - this.lastFlush >= FLUSH_MS) this.flush();
    else if (!this.timer) this.timer = setTimeout(this.timedFlush, FLUSH_MS);
  }

  /** The background flush: a failure is reported through onError, never thrown into a timer. */
  private readonly timedFlush = (): void => {
    try {
      this.flush();
    } catch {
      /* reported through onError */
    }
  };

  /** Whether a write has failed (the writer then refuses everything). */
  get failed(): JournalWriteError | undefined {
    return this.failure;
  }

  private fail(e: unknown): never {
    if (!this.failure) {
      this.failure = writeFailure(this.dir, e);
      this.buf = [];
      this.bufBytes = 0;
      this.recPos = 0;
      try {
        this.onError?.(this.failure);
      } catch {
        /* the listener's own trouble must not hide this one */
      }
    }
    throw this.failure;
  }

  /** Writes the buffer now (synchronously). */
  flush(): void {
    if (this.timer) {
      clearTimeout(this.timer);
      this.timer = undefined;
    }
    this.lastFlush = performance.now();
    if (this.closed || this.failure) return;
    try {
      // Events first, then readings (see event()).
      if (this.buf.length > 0) {
        const data = this.buf.join('');
        this.buf = [];
        this.bufBytes = 0;
        const bytes = Buffer.from(data, 'utf8');
        this.writeWhole(this.fd, bytes, 'eventBytes');
        this.written += bytes.length;
        this.dirty = true;
      }
      if (this.recPos > 0) this.writeReadings();
    } catch (e) {
      this.fail(e);
    }
    this.maybeSync();
  }

  /**
   * Writes all of `bytes` or, when the disk refuses part of them, cuts the file back to where it
   * was, so a full disk leaves whole lines and whole records only.
   */
  private writeWhole(fd: number, bytes: Uint8Array, size: 'eventBytes' | 'readingBytes'): void {
    let off = 0;
    try {
      while (off < bytes.length) off += writeSync(fd, bytes, off);
    } catch (e) {
      if (off > 0) {
        try {
          ftruncateSync(fd, this[size]);
        } catch {
          /* the reader skips a torn tail anyway */
        }
      }
      throw e;
    }
    this[size] += bytes.length;
  }

  private writeReadings(): void {
    const bytes = new Uint8Array(this.rec.buffer, 0, this.recPos * 8);
    this.writeWhole(this.rfd, bytes, 'readingBytes');
    this.written += bytes.length;
    this.recPos = 0;
    this.dirty = true;
  }

  private maybeSync(): void {
    if (this.syncing || this.syncScheduled || !this.dirty || this.closed) return;
    const wait = SYNC_MS - (performance.now() - this.lastSync);
    if (wait > 0) {
      this.syncScheduled = true;
      setTimeout(() => {
        this.syncScheduled = false;
        this.maybeSync();
      }, wait).unref();
      return;
    }
    this.syncing = true;
    this.dirty = false;
    this.lastSync = performance.now();
    const synced = (err: NodeJS.ErrnoException | null) => {
      if (err && !this.closed && !this.failure) {
        try {
          this.fail(err);
        } catch {
          /* reported through onError */
        }
      }
    };
    fdatasync(this.rfd, (e1) => {
      synced(e1);
      fdatasync(this.fd, (e2) => {
        synced(e2);
        this.syncing = false;
        if (this.dirty) this.maybeSync();
      });
    });
  }

  /** Flushes, closes the file and removes the lock. */
  close(): void {
    if (this.closed) return;
    try {
      this.flush();
    } finally {
      this.closed = true;
      this.closeFiles();
    }
  }

  private closeFiles(): void {
    try {
      closeSync(this.rfd);
      closeSync(this.fd);
    } catch {
      /* a pending fdatasync may hold it; the data is written */
    }
    if (this.lock) rmSync(join(this.dir, LOCK_FILE), { force: true });
  }
}

/** The pid in a session's lock file, when a live process holds it. */
export function liveLockHolder(dir: string): number | undefined {
  const f = join(dir, LOCK_FILE);
  if (!existsSync(f)) return undefined;
  const pid = Number.parseInt(readFileSync(f, 'utf8'), 10);
  if (!(pid > 0) || pid === process.pid) return undefined;
  try {
    process.kill(pid, 0);
    return pid;
  } catch {
    return undefined;
  }
}
