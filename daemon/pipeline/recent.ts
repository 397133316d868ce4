/**
 * What a page needs on connect: the current session's events other than readings (capped), and its
 * most recent readings in a fixed ring of typed arrays — constant memory, no per-reading objects
 * kept alive, however long the run.
 */
import type { PackedReading, WireEvent } from '../../protocols/wire.js';

const FIELDS = 7;

export class RecentEvents {
  private readonly ring: Float64Array;
  private head = 0;
  private size = 0;
  private events: WireEvent[] = [];
  lastSeq = 0;

  constructor(readonly readingCap = 100_000, readonly eventCap = 50_000) {
    this.ring = new Float64Array(readingCap * FIELDS);
  }

  clear(): void {
    this.head = 0;
    this.size = 0;
    this.events = [];
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
    this.events.push(e);
    if (this.events.length > this.eventCap) {
      // Progress notes go first; the rest are few (a handful per sweep).
      const kept = this.events.filter((x) => x.type !== 'progress');
      this.events = kept.length > this.eventCap ? kept.slice(kept.length - this.eventCap / 2) : kept;
    }
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

  nonReadings(): WireEvent[] {
    return this.events;
  }
}
