/**
 * Follows a session journal while it is written (or after), handing out seq-contiguous chunks:
 * the events (as their journal lines) and readings (as raw 56-byte records) with the next
 * sequence numbers, in order, in bounded memory. It only reads the files; the writer never waits
 * for it.
 *
 * Why chunks are contiguous and safe to hand out: the journal writer puts the readings before an
 * event on disk before the event, and the events before a reading before the reading (see
 * journal.ts). The follower looks at readings.f64 first and journal.jsonl second, so every event
 * older than a reading it has seen is already in the journal it reads next. A sequence number
 * missing from both files while later ones are present is a hole (a damaged or torn line) and is
 * reported as one, never waited for.
 */
import { closeSync, existsSync, fstatSync, openSync, readFileSync, readSync, statSync } from 'node:fs';
import { join } from 'node:path';
import { JOURNAL_FILE, LOCK_FILE, READINGS_FILE, RECORD_BYTES } from '../journal/journal.js';

export interface JournalEventLine {
  readonly seq: number;
  readonly type: string;
  /** The line as written (JSON text without the newline). */
  readonly line: string;
  readonly event: Record<string, unknown> & { seq: number; type: string; t: number };
}

export interface Chunk {
  readonly from: number;
  readonly to: number;
  readonly events: readonly JournalEventLine[];
  /** Raw reading records (RECORD_BYTES each), in seq order: a view valid until the next poll. */
  readonly records: Buffer;
  readonly readings: number;
  readonly holes: readonly number[];
}

const JOURNAL_CHUNK = 1 << 16;

/** Whether a live process (this one included) holds the session's lock. */
export function sessionLive(dir: string): boolean {
  const f = join(dir, LOCK_FILE);
  if (!existsSync(f)) return false;
  let pid: number;
  try {
    pid = Number.parseInt(readFileSync(f, 'utf8'), 10);
  } catch {
    return false;
  }
  if (!(pid > 0)) return false;
  if (pid === process.pid) return true;
  try {
    process.kill(pid, 0);
    return true;
  } catch (e) {
    return (e as NodeJS.ErrnoException).code === 'EPERM';
  }
}

export class JournalFollower {
  /** Next sequence number to hand out. */
  private next: number;
  private jOff = 0;
  private carry = '';
  private pending: JournalEventLine[] = [];
  private rOff = 0;
  private readonly rbuf: Buffer;
  /** Lines that were not valid events, skipped (line text trimmed). */
  readonly damaged: string[] = [];
  /** Seq of the run-end event once handed out. */
  private endSeq: number | undefined;

  /**
   * @param after  hand out sequence numbers after this one (0: from the start)
   * @param maxReadings  readings per chunk at most (bounds memory: maxReadings × 56 bytes)
   */
  constructor(
    readonly dir: string,
    after = 0,
    maxReadings = 8192,
  ) {
    this.rbuf = Buffer.allocUnsafe(maxReadings * RECORD_BYTES);
    this.next = after + 1;
    this.seekReadings(after);
  }

  /** The last sequence number handed out. */
  get position(): number {
    return this.next - 1;
  }

  /** The run-end event has been handed out. */
  get ended(): boolean {
    return this.endSeq !== undefined && this.endSeq < this.next;
  }

  /** Starts again after `after` (a reconnect resumes from the last acknowledged sequence). */
  seek(after: number): void {
    this.next = after + 1;
    this.jOff = 0;
    this.carry = '';
    this.pending = [];
    this.seekReadings(after);
  }

  /** Whether the files hold more than has been handed out (bytes not yet read, or queued events). */
  behind(): boolean {
    if (this.pending.length > 0) return true;
    const size = (f: string) => {
      try {
        return statSync(join(this.dir, f)).size;
      } catch {
        return 0;
      }
    };
    return size(READINGS_FILE) - (size(READINGS_FILE) % RECORD_BYTES) > this.rOff || size(JOURNAL_FILE) > this.jOff;
  }

  /** First record with seq > after, by binary search (records are in seq order). */
  private seekReadings(after: number): void {
    const file = join(this.dir, READINGS_FILE);
    if (!existsSync(file)) {
      this.rOff = 0;
      return;
    }
    const fd = openSync(file, 'r');
    try {
      const n = Math.floor(fstatSync(fd).size / RECORD_BYTES);
      const b = Buffer.allocUnsafe(8);
      let lo = 0;
      let hi = n;
      while (lo < hi) {
        const mid = (lo + hi) >> 1;
        readSync(fd, b, 0, 8, mid * RECORD_BYTES);
        if (b.readDoubleLE(0) <= after) lo = mid + 1;
        else hi = mid;
      }
      this.rOff = lo * RECORD_BYTES;
    } finally {
      closeSync(fd);
    }
  }

  /** Reads new whole records (at most maxReadings) into rbuf; returns how many. */
  private readRecords(): number {
    const file = join(this.dir, READINGS_FILE);
    if (!existsSync(file)) return 0;
    const fd = openSync(file, 'r');
    try {
      const size = fstatSync(fd).size;
      const whole = size - (size % RECORD_BYTES);
      const want = Math.min(this.rbuf.length, Math.max(0, whole - this.rOff));
      let got = 0;
      while (got < want) {
        const k = readSync(fd, this.rbuf, got, want - got, this.rOff + got);
        if (k <= 0) break;
        got += k;
      }
      return Math.floor(got / RECORD_BYTES);
    } finally {
      closeSync(fd);
    }
  }

  /** Reads new complete lines of journal.jsonl into `pending` (bounded: stops once enough are queued). */
  private readEvents(): void {
    const file = join(this.dir, JOURNAL_FILE);
    if (!existsSync(file) || this.pending.length > 4096) return;
    const fd = openSync(file, 'r');
    try {
      const buf = Buffer.allocUnsafe(JOURNAL_CHUNK);
      for (;;) {
        const k = readSync(fd, buf, 0, buf.length, this.jOff);
        if (k <= 0) break;
        this.jOff += k;
        const text = this.carry + buf.toString('utf8', 0, k);
        const lines = text.split('\n');
        this.carry = lines.pop() ?? '';
        for (const line of lines) this.take(line);
        if (k < buf.length || this.pending.length > 4096) break;
      }
    } finally {
      closeSync(fd);
    }
  }

  private take(line: string): void {
    if (line.length === 0) return;
    let e: JournalEventLine['event'];
    try {
      e = JSON.parse(line);
    } catch {
      this.damaged.push(line.slice(0, 200));
      return;
    }
    if (typeof e !== 'object' || e === null || typeof e.seq !== 'number' || typeof e.type !== 'string') {
      this.damaged.push(line.slice(0, 200));
      return;
    }
    if (e.type === 'run-end') this.endSeq = e.seq;
    if (e.seq < this.next) return;
    this.pending.push({ seq: e.seq, type: e.type, line, event: e });
  }

  /**
   * The next contiguous chunk, or null when nothing new is on disk. `final` (the writer is gone)
   * lets trailing holes be skipped instead of waited for.
   */
  poll(final = false): Chunk | null {
    // Readings first, then events: see the file comment.
    const n = this.readRecords();
    this.readEvents();
    const from = this.next;
    const events: JournalEventLine[] = [];
    const holes: number[] = [];
    const cap = this.rbuf.length / RECORD_BYTES;
    const rec = this.rbuf;
    let r0 = 0; // records before the first one handed out (older than `next`: only in a damaged file)
    let ri = 0;
    let pi = 0;
    while (true) {
      const ev = this.pending[pi];
      const rs = ri < n ? rec.readDoubleLE(ri * RECORD_BYTES) : undefined;
      if (rs !== undefined && rs < this.next) {
        if (ri > r0) break; // keep the records handed out contiguous; the next poll skips it
        r0 = ++ri;
        continue;
      }
      if (ev !== undefined && ev.seq === this.next) {
        events.push(ev);
        pi++;
        this.next++;
        continue;
      }
      if (rs === this.next) {
        ri++;
        this.next++;
        continue;
      }
      // Nothing for `next`: a hole when a later reading is on disk (the event would be there too,
      // unless a partial line is still being written), or, once the writer is gone, when anything
      // later exists at all.
      const laterEvent = ev !== undefined && ev.seq > this.next;
      const laterReading = rs !== undefined && rs > this.next;
      const readingsExhausted = ri === n && n < cap;
      if ((laterReading && (laterEvent || this.carry === '' || final)) || (final && laterEvent && readingsExhausted)) {
        holes.push(this.next);
        this.next++;
        if (holes.length > 10000) break;
        continue;
      }
      break;
    }
    this.pending = this.pending.slice(pi);
    this.rOff += r0 * RECORD_BYTES;
    if (this.next === from) return null;
    const records = rec.subarray(r0 * RECORD_BYTES, ri * RECORD_BYTES);
    this.rOff += (ri - r0) * RECORD_BYTES;
    return { from, to: this.next - 1, events, records, readings: ri - r0, holes };
  }
}
