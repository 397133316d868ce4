/**
 * What a page needs on connect: the current session's events other than readings, and its most
 * recent readings in a fixed ring of typed arrays — bounded memory however long the run.
 *
 * Events are kept by what the page shows: everything about the session as a whole (session,
 * settings, output, decisions, annotations, the run's end), the events of the last `sweepsKept`
 * sweeps (the page keeps that many), drift points of the last `driftKept` sweeps (the drift chart
 * reaches further back), of older cautions the first of each kind, the latest progress note and
 * the last `rejectedKept` rejected replies. The rest is in the journal; a page showing a past
 * session reads it from there.
 */
import type { PackedReading, WireEvent } from '../../protocols/wire.js';

const FIELDS = 7;

export interface RecentLimits {
  readonly readingCap?: number;
  readonly sweepsKept?: number;
  readonly driftKept?: number;
  readonly rejectedKept?: number;
}

export class RecentEvents {
  readonly readingCap: number;
  readonly sweepsKept: number;
  readonly driftKept: number;
  readonly rejectedKept: number;
  private readonly ring: Float64Array;
  private head = 0;
  private size = 0;
  private events: WireEvent[] = [];
  private progress: WireEvent | undefined;
  private latestSweep = 0;
  /** Length of `events` at which the next compaction runs (amortised O(1) per event). */
  private compactAt = 1024;
  lastSeq = 0;

  constructor(limits: RecentLimits = {}) {
    this.readingCap = limits.readingCap ?? 100_000;
    this.sweepsKept = limits.sweepsKept ?? 100;
    this.driftKept = limits.driftKept ?? 2_000;
    this.rejectedKept = limits.rejectedKept ?? 1_000;
    this.ring = new Float64Array(this.readingCap * FIELDS);
  }

  clear(): void {
    this.head = 0;
    this.size = 0;
    this.events = [];
    this.progress = undefined;
    this.latestSweep = 0;
    this.compactAt = 1024;
    this.lastSeq = 0;
  }

  add(e: WireEvent): void {
    this.lastSeq = e.seq;
    if (e.type === 'reading') {
      const b = this.head * FIELDS;
      const r = this.ring;
      r[b] = e.seq;
      r[b + 1] = e.sweep;
      r[b + 2] = e.k;
      r[b + 3] = e.t;
      r[b + 4] = e.v;
      r[b + 5] = e.i;
      r[b + 6] = e.flags;
      this.head = (this.head + 1) % this.readingCap;
      if (this.size < this.readingCap) this.size++;
      return;
    }
    if (e.type === 'progress') {
      this.progress = e;
      return;
    }
    const sweep = sweepOf(e);
    if (sweep !== undefined && sweep > this.latestSweep) this.latestSweep = sweep;
    this.events.push(e);
    if (this.events.length >= this.compactAt) this.compact();
  }

  /** Drops what the page no longer needs; the next compaction waits until the list has doubled. */
  private compact(): void {
    const sweepFrom = this.latestSweep - this.sweepsKept;
    const driftFrom = this.latestSweep - this.driftKept;
    let rejected = 0;
    for (const e of this.events) if (e.type === 'rejected') rejected++;
    const cautionKinds = new Set<string>();
    const kept: WireEvent[] = [];
    for (const e of this.events) {
      if (e.type === 'rejected') {
        if (rejected-- > this.rejectedKept) continue;
      } else if (e.type === 'caution') {
        // A caution stays while its sweep is kept; older ones stay as the first of their kind
        // (the page still shows that it happened in this session).
        const first = !cautionKinds.has(e.kind);
        cautionKinds.add(e.kind);
        if (e.sweep !== undefined && e.sweep <= sweepFrom && !first) continue;
      } else {
        const sweep = sweepOf(e);
        if (sweep !== undefined && sweep <= (e.type === 'drift' ? driftFrom : sweepFrom)) continue;
      }
      kept.push(e);
    }
    this.events = kept;
    this.compactAt = Math.max(1024, 2 * kept.length);
  }

  get readingCount(): number {
    return this.size;
  }

  readings(): PackedReading[] {
    const out: PackedReading[] = new Array(this.size);
    const start = (this.head - this.size + this.readingCap) % this.readingCap;
    const r = this.ring;
    for (let n = 0; n < this.size; n++) {
      const b = ((start + n) % this.readingCap) * FIELDS;
      out[n] = [r[b], r[b + 1], r[b + 2], r[b + 3], r[b + 4], r[b + 5], r[b + 6]];
    }
    return out;
  }

  /** The kept events in the order they happened (the latest progress note in its place). */
  nonReadings(): WireEvent[] {
    if (!this.progress) return this.events;
    const p = this.progress;
    const out = this.events.filter((e) => e.seq < p.seq);
    out.push(p);
    for (const e of this.events) if (e.seq > p.seq) out.push(e);
    return out;
  }
}

/** The sweep an event belongs to, when it belongs to one (session-wide events have none). */
function sweepOf(e: WireEvent): number | undefined {
  if (e.type === 'decision' || e.type === 'annotation') return undefined;
  return 'sweep' in e && typeof e.sweep === 'number' ? e.sweep : undefined;
}
