/**
 * The session journal: one folder per session holding `journal.jsonl`, append-only JSON Lines.
 * Each line is an event from protocols/wire.ts or a compact reading line
 * `{"r":[seq,sweep,k,t,v,i,flags]}`. Numbers are written with JavaScript's shortest round-trip
 * form, so no digit is lost.
 *
 * Crash safety: lines are buffered and written with one write(2) every FLUSH_MS (100 ms) and
 * whenever the buffer passes 1 MiB; the file is fdatasync'ed at most every SYNC_MS (250 ms) after a
 * write. A killed process therefore loses at most the last ~100 ms of lines (the kernel keeps what
 * was written), a power cut at most ~350 ms. `session.lock` holds the writer's pid while it runs.
 */
import { closeSync, existsSync, fdatasync, mkdirSync, openSync, readFileSync, rmSync, writeFileSync, writeSync } from 'node:fs';
import { join } from 'node:path';
import type { NewEvent, ReadingEvent, WireEvent } from '../../protocols/wire.js';

export const JOURNAL_FILE = 'journal.jsonl';
export const LOCK_FILE = 'session.lock';
const FLUSH_MS = 100;
const SYNC_MS = 250;
const MAX_BUFFER = 1 << 20;

export class JournalError extends Error {
  readonly code = 'JOURNAL';
}

function num(x: number): string {
  return Number.isFinite(x) ? String(x) : 'null';
}

/** A session id from the time and a label: 20261202-031500-oxide-fn (a suffix keeps it unique). */
export function newSessionId(dataDir: string, label: string, now = new Date()): string {
  const p = (n: number, w = 2) => String(n).padStart(w, '0');
  const stamp = `${now.getUTCFullYear()}${p(now.getUTCMonth() + 1)}${p(now.getUTCDate())}-${p(now.getUTCHours())}${p(now.getUTCMinutes())}${p(now.getUTCSeconds())}`;
  const safe = label.replace(/[^a-zA-Z0-9-]+/g, '-').slice(0, 40) || 'run';
  let id = `${stamp}-${safe}`;
  for (let n = 2; existsSync(join(dataDir, id)); n++) id = `${stamp}-${safe}-${n}`;
  return id;
}

export class JournalWriter {
  private readonly fd: number;
  private buf: string[] = [];
  private bufBytes = 0;
  private timer: NodeJS.Timeout | undefined;
  private syncing = false;
  private lastSync = 0;
  private dirty = false;
  private lastFlush = performance.now();
  private closed = false;
  private seq: number;
  readonly t0: number;
  /** Bytes handed to write(2) so far in this process. */
  written = 0;

  private constructor(readonly dir: string, startSeq: number, t0: number, private readonly lock: boolean) {
    this.fd = openSync(join(dir, JOURNAL_FILE), 'a');
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
   * Sequence numbers continue from `lastSeq`; t continues from the session's last time.
   */
  static append(dir: string, lastSeq: number, lastT: number): JournalWriter {
    if (!existsSync(join(dir, JOURNAL_FILE))) throw new JournalError(`${dir}: no ${JOURNAL_FILE} here; is this a session folder?`);
    return new JournalWriter(dir, lastSeq, performance.now() - lastT, false);
  }

  get lastSeq(): number {
    return this.seq;
  }

  now(): number {
    return Math.round((performance.now() - this.t0) * 1000) / 1000;
  }

  /** Journals an event; returns it with its sequence number and time. */
  event(e: NewEvent): WireEvent {
    const full = { seq: ++this.seq, t: this.now(), ...e } as WireEvent;
    this.push(`${JSON.stringify(full)}\n`);
    return full;
  }

  /** Journals one reading in the compact form. */
  reading(sweep: number, k: number, v: number, i: number, flags: number): ReadingEvent {
    const seq = ++this.seq;
    const t = this.now();
    this.push(`{"r":[${seq},${sweep},${k},${t},${num(v)},${num(i)},${flags}]}\n`);
    return { type: 'reading', seq, sweep, k, t, v, i, flags };
  }

  private push(line: string): void {
    if (this.closed) throw new JournalError(`${this.dir}: journal already closed`);
    this.buf.push(line);
    this.bufBytes += line.length;
    // The timer covers an idle daemon; the clock check covers a busy one whose event loop does not
    // reach its timers (a long run of microtasks), so the bound holds either way.
    if (this.bufBytes >= MAX_BUFFER || performance.now() - this.lastFlush >= FLUSH_MS) this.flush();
    else if (!this.timer) this.timer = setTimeout(() => this.flush(), FLUSH_MS);
  }

  /** Writes the buffer now (synchronously). */
  flush(): void {
    if (this.timer) {
      clearTimeout(this.timer);
      this.timer = undefined;
    }
    this.lastFlush = performance.now();
    if (this.buf.length === 0 || this.closed) return;
    const data = this.buf.join('');
    this.buf = [];
    this.bufBytes = 0;
    let off = 0;
    const bytes = Buffer.from(data, 'utf8');
    while (off < bytes.length) off += writeSync(this.fd, bytes, off);
    this.written += bytes.length;
    this.dirty = true;
    this.maybeSync();
  }

  private maybeSync(): void {
    if (this.syncing || !this.dirty || this.closed) return;
    const wait = SYNC_MS - (performance.now() - this.lastSync);
    if (wait > 0) {
      setTimeout(() => this.maybeSync(), wait).unref();
      return;
    }
    this.syncing = true;
    this.dirty = false;
    this.lastSync = performance.now();
    fdatasync(this.fd, () => {
      this.syncing = false;
      if (this.dirty) this.maybeSync();
    });
  }

  /** Flushes, closes the file and removes the lock. */
  close(): void {
    if (this.closed) return;
    this.flush();
    this.closed = true;
    try {
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
