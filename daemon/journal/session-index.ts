/**
 * A session folder read for viewing, in time bounded by the file size and memory bounded by the
 * number of sweeps (not of readings): one pass over readings.f64 records where each sweep's
 * readings lie (sweeps are contiguous runs of records) and an envelope of |I| against V over all
 * sweeps; one pass over journal.jsonl keeps the events a viewer needs, folded per sweep. Any
 * sweep's readings are then one positioned read. Used by the page's session overview, its sweep
 * picker and re-analysis; the index is cached and rebuilt when either file changes.
 */
import { closeSync, existsSync, openSync, readSync, statSync } from 'node:fs';
import { join } from 'node:path';
import type { FitSummary, PackedReading, SolarSummary, WireEvent } from '../../protocols/wire.js';
import { FLAG } from '../../protocols/wire.js';
import { JOURNAL_FILE, READINGS_FILE, RECORD_BYTES, RECORD_FIELDS } from './journal.js';
import { scanJournal, type BadLine } from './reader.js';

type Ev<T extends WireEvent['type']> = Extract<WireEvent, { type: T }>;

/** Adaptive sweeps whose figures a session's overview carries (the newest; the journal holds all). */
export const ADAPTIVE_KEPT = 100;

/** Bins of the all-sweeps envelope along the bias axis. */
export const ENVELOPE_BINS = 240;

export interface SweepRecord {
  readonly sweep: number;
  /** First record (reading) of the sweep in readings.f64, and how many there are. */
  first: number;
  count: number;
  complete: boolean | null;
  /** The final fit as journaled (the last one, if the sweep was re-fitted after a settings change). */
  fit: FitSummary | null;
  fitError: string | null;
  /** A solar cell's figures of merit and diode fit, when the analysis asked for them. */
  solar: SolarSummary | null;
  /** The analysis settings in force when the sweep ended (what produced its final fit). */
  analysis: unknown;
}

export interface Envelope {
  /** Bin centres, V. */
  readonly v: number[];
  /** Smallest and largest |I| > 0 seen in each bin over all sweeps, A (null: no reading). */
  readonly lo: (number | null)[];
  readonly hi: (number | null)[];
  /** Signed current: smallest and largest I in each bin, A. */
  readonly min: (number | null)[];
  readonly max: (number | null)[];
}

export class SessionIndex {
  readonly sweeps: SweepRecord[] = [];
  private readonly bySweep = new Map<number, SweepRecord>();
  session: Ev<'session'> | null = null;
  /**
   * Events a viewer shows besides the per-sweep fold: cautions, decisions, output, annotations,
   * settings, recovery, run end, a breakdown test's result, and the last ADAPTIVE_KEPT adaptive
   * sweeps' figures.
   */
  readonly events: WireEvent[] = [];
  readonly drift: Ev<'drift'>[] = [];
  ranking: Ev<'ranking'> | null = null;
  runEnd: Ev<'run-end'> | null = null;
  analysis: unknown = null;
  complianceLimit: number | undefined;
  readings = 0;
  lastSeq = 0;
  bad: BadLine[] = [];
  envelope: Envelope = { v: [], lo: [], hi: [], min: [], max: [] };
  private stamp = '';

  private constructor(readonly dir: string) {}

  /** The index of a session folder, from the cache when neither file changed since it was built. */
  static open(dir: string): SessionIndex {
    const stamp = fileStamp(dir);
    const hit = CACHE.get(dir);
    if (hit && hit.stamp === stamp) {
      CACHE.delete(dir);
      CACHE.set(dir, hit);
      return hit;
    }
    const x = new SessionIndex(dir);
    x.stamp = stamp;
    x.build();
    CACHE.set(dir, x);
    while (CACHE.size > CACHE_SIZE) CACHE.delete(CACHE.keys().next().value as string);
    return x;
  }

  sweep(n: number): SweepRecord | undefined {
    return this.bySweep.get(n);
  }

  private record(n: number): SweepRecord {
    let s = this.bySweep.get(n);
    if (!s) {
      s = { sweep: n, first: -1, count: 0, complete: null, fit: null, fitError: null, solar: null, analysis: this.analysis };
      this.bySweep.set(n, s);
      this.sweeps.push(s);
    }
    return s;
  }

  private build(): void {
    // Events first (journal.jsonl), folded per sweep.
    let adaptive: Ev<'adaptive-sweep'>[] = [];
    const scan = scanJournal(
      this.dir,
      (e) => {
        switch (e.type) {
          case 'session':
            this.session = e;
            this.analysis = e.analysis;
            this.complianceLimit = (e.plan as { compliance?: number } | null)?.compliance;
            this.events.push(e);
            break;
          case 'settings':
            this.analysis = e.analysis;
            this.events.push(e);
            break;
          case 'sweep-start':
            this.record(e.sweep);
            break;
          case 'sweep-end': {
            const s = this.record(e.sweep);
            s.complete = e.complete;
            s.analysis = this.analysis;
            break;
          }
          case 'fit':
            if (e.final) {
              const s = this.record(e.sweep);
              s.fit = e.fit;
              s.fitError = e.error ?? null;
              s.solar = e.solar ?? null;
              s.analysis = this.analysis;
            }
            break;
          case 'drift':
            this.drift.push(e);
            break;
          case 'ranking':
            this.ranking = e;
            break;
          case 'run-end':
            this.runEnd = e;
            this.events.push(e);
            break;
          case 'caution':
          case 'decision':
          case 'output':
          case 'annotation':
          case 'recovery':
          case 'test-result':
            this.events.push(e);
            break;
          case 'adaptive-sweep':
            adaptive.push(e);
            if (adaptive.length > 2 * ADAPTIVE_KEPT) adaptive = adaptive.slice(-ADAPTIVE_KEPT);
            break;
          default:
            break;
        }
      },
      { readings: false },
    );
    this.events.push(...adaptive.slice(-ADAPTIVE_KEPT));
    this.bad = scan.bad;
    this.lastSeq = scan.lastSeq;
    // Readings: where each sweep lies, and the envelope (two passes: the bias range, then the bins).
    let vMin = Infinity;
    let vMax = -Infinity;
    let prev = Number.NaN;
    forEachChunk(this.dir, (f, records, base) => {
      for (let r = 0; r < records; r++) {
        const b = r * RECORD_FIELDS;
        const sweep = f[b + 1];
        if (sweep !== prev) {
          const s = this.record(sweep);
          if (s.first < 0) s.first = base + r;
          prev = sweep;
        }
        const rec = this.bySweep.get(sweep) as SweepRecord;
        rec.count = base + r - rec.first + 1;
        const v = f[b + 4];
        if (Number.isFinite(v)) {
          if (v < vMin) vMin = v;
          if (v > vMax) vMax = v;
        }
        if (f[b] > this.lastSeq) this.lastSeq = f[b];
      }
      this.readings = base + records;
    });
    this.sweeps.sort((a, b) => a.sweep - b.sweep);
    if (Number.isFinite(vMin)) this.envelope = this.buildEnvelope(vMin, vMax);
  }

  private buildEnvelope(vMin: number, vMax: number): Envelope {
    const n = vMax > vMin ? ENVELOPE_BINS : 1;
    const w = (vMax - vMin) / n || 1;
    const lo = new Float64Array(n).fill(Infinity);
    const hi = new Float64Array(n).fill(-Infinity);
    const mn = new Float64Array(n).fill(Infinity);
    const mx = new Float64Array(n).fill(-Infinity);
    forEachChunk(this.dir, (f, records) => {
      for (let r = 0; r < records; r++) {
        const b = r * RECORD_FIELDS;
        const v = f[b + 4];
        const i = f[b + 5];
        if (!Number.isFinite(v) || !Number.isFinite(i)) continue;
        const k = Math.min(n - 1, Math.max(0, Math.floor((v - vMin) / w)));
        const a = Math.abs(i);
        if (a > 0) {
          if (a < lo[k]) lo[k] = a;
          if (a > hi[k]) hi[k] = a;
        }
        if (i < mn[k]) mn[k] = i;
        if (i > mx[k]) mx[k] = i;
      }
    });
    const fin = (x: number) => (Number.isFinite(x) ? x : null);
    return {
      v: Array.from({ length: n }, (_, k) => vMin + (k + 0.5) * w),
      lo: Array.from(lo, fin),
      hi: Array.from(hi, fin),
      min: Array.from(mn, fin),
      max: Array.from(mx, fin),
    };
  }

  /** One sweep's readings (one positioned read). */
  readSweep(n: number): { v: number[]; i: number[]; flags: number[]; rows: PackedReading[] } {
    const s = this.bySweep.get(n);
    const out = { v: [] as number[], i: [] as number[], flags: [] as number[], rows: [] as PackedReading[] };
    if (!s || s.first < 0 || s.count === 0) return out;
    const buf = Buffer.alloc(s.count * RECORD_BYTES);
    const fd = openSync(join(this.dir, READINGS_FILE), 'r');
    let got = 0;
    try {
      while (got < buf.length) {
        const k = readSync(fd, buf, got, buf.length - got, s.first * RECORD_BYTES + got);
        if (k <= 0) break;
        got += k;
      }
    } finally {
      closeSync(fd);
    }
    const f = new Float64Array(buf.buffer, buf.byteOffset, Math.floor(got / RECORD_BYTES) * RECORD_FIELDS);
    for (let b = 0; b < f.length; b += RECORD_FIELDS) {
      out.v.push(f[b + 4]);
      out.i.push(f[b + 5]);
      out.flags.push(f[b + 6]);
      out.rows.push([f[b], f[b + 1], f[b + 2], f[b + 3], f[b + 4], f[b + 5], f[b + 6]]);
    }
    return out;
  }

  /** A sweep's readings as analysis input (compliance and breakdown from the flag bits). */
  sweepData(n: number): { x: number[]; y: number[]; compliance: number[]; breakdown: number[] } {
    const r = this.readSweep(n);
    return { x: r.v, y: r.i, compliance: r.flags.map((f) => f & FLAG.compliance), breakdown: r.flags.map((f) => f & FLAG.breakdown) };
  }
}

const CACHE = new Map<string, SessionIndex>();
const CACHE_SIZE = 4;

function fileStamp(dir: string): string {
  const s = (f: string) => {
    const p = join(dir, f);
    if (!existsSync(p)) return '-';
    const st = statSync(p);
    return `${st.size}:${st.mtimeMs}`;
  };
  return `${s(JOURNAL_FILE)}|${s(READINGS_FILE)}`;
}

/** readings.f64 in chunks of whole records: `on(values, records, indexOfFirstRecord)`. */
function forEachChunk(dir: string, on: (f: Float64Array, records: number, base: number) => void): void {
  const file = join(dir, READINGS_FILE);
  if (!existsSync(file)) return;
  const size = statSync(file).size;
  const whole = size - (size % RECORD_BYTES);
  const per = 18_724; // records per chunk (~1 MiB)
  const buf = Buffer.alloc(per * RECORD_BYTES);
  const f = new Float64Array(buf.buffer, buf.byteOffset, per * RECORD_FIELDS);
  const fd = openSync(file, 'r');
  let pos = 0;
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
      if (records === 0) break;
      on(f, records, pos / RECORD_BYTES);
      pos += records * RECORD_BYTES;
    }
  } finally {
    closeSync(fd);
  }
}
