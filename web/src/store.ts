/**
 * The page's copy of what the daemon computed: the session's readings per sweep, its events, the
 * latest linearized views. Events arrive with sequence numbers; anything at or below the last one
 * seen is a duplicate and skipped. The page never computes physics: it keeps and draws these.
 */
import type { FitSummary, PackedReading, PlotViewData, ServerMessage, Snapshot, WireEvent } from '../../protocols/wire.js';

export interface SweepPoints {
  v: number[];
  i: number[];
  flags: number[];
}

type Ev<T extends WireEvent['type']> = Extract<WireEvent, { type: T }>;

export class Store {
  session: string | null = null;
  running = false;
  readOnly = false;
  station: Snapshot['station'] | null = null;
  lastSeq = 0;
  sweeps = new Map<number, SweepPoints>();
  events: WireEvent[] = [];
  finalFits = new Map<number, FitSummary | null>();
  fitErrors = new Map<number, string>();
  liveFit: { sweep: number; fit: FitSummary | null } | null = null;
  views = new Map<number, PlotViewData>();
  drift: Ev<'drift'>[] = [];
  ranking: Ev<'ranking'> | null = null;
  progress: Ev<'progress'> | null = null;
  outputOn = false;
  cautions: Ev<'caution'>[] = [];
  runEnd: Ev<'run-end'> | null = null;
  sessionEvent: Ev<'session'> | null = null;
  resyncing = false;
  /** Readings received, for tests and the status line. */
  readingCount = 0;
  /** t (ms since the session started) of the newest reading, for the latency benchmark. */
  lastReadingT = 0;
  dirty = true;

  reset(session: string | null): void {
    this.session = session;
    this.lastSeq = 0;
    this.sweeps = new Map();
    this.events = [];
    this.finalFits = new Map();
    this.fitErrors = new Map();
    this.liveFit = null;
    this.views = new Map();
    this.drift = [];
    this.ranking = null;
    this.progress = null;
    this.outputOn = false;
    this.cautions = [];
    this.runEnd = null;
    this.sessionEvent = null;
    this.readingCount = 0;
    this.dirty = true;
  }

  applySnapshot(s: Snapshot): void {
    this.reset(s.session);
    this.station = s.station;
    this.running = s.running;
    this.resyncing = false;
    const all: { seq: number; e?: WireEvent; r?: PackedReading }[] = [
      ...s.events.map((e) => ({ seq: e.seq, e })),
      ...s.readings.map((r) => ({ seq: r[0], r })),
    ];
    all.sort((a, b) => a.seq - b.seq);
    for (const x of all) {
      if (x.e) this.applyEvent(x.e);
      else if (x.r) this.applyReading(x.r);
    }
    this.lastSeq = s.lastSeq;
    for (const v of s.views) this.views.set(v.sweep, v.view);
    this.dirty = true;
  }

  applyMessage(m: ServerMessage): void {
    if (m.kind === 'snapshot') this.applySnapshot(m.snapshot);
    else if (m.kind === 'gap') this.resyncing = true;
    else if (m.kind === 'view') {
      if (m.session === this.session || this.session === null) this.views.set(m.sweep, m.view);
    } else {
      const all: { seq: number; e?: WireEvent; r?: PackedReading }[] = [
        ...m.events.map((e) => ({ seq: e.seq, e })),
        ...m.readings.map((r) => ({ seq: r[0], r })),
      ];
      if (m.readings.length && m.events.length) all.sort((a, b) => a.seq - b.seq);
      for (const x of all) {
        if (x.e?.type === 'session') this.reset(x.e.id);
        if (x.seq <= this.lastSeq) continue;
        this.lastSeq = x.seq;
        if (x.e) this.applyEvent(x.e);
        else if (x.r) this.applyReading(x.r);
      }
    }
    this.dirty = true;
  }

  private applyReading(r: PackedReading): void {
    let s = this.sweeps.get(r[1]);
    if (!s) {
      s = { v: [], i: [], flags: [] };
      this.sweeps.set(r[1], s);
      // Keep the last 100 sweeps in memory; older ones stay in the journal.
      if (this.sweeps.size > 100) this.sweeps.delete(Math.min(...this.sweeps.keys()));
    }
    s.v.push(r[4]);
    s.i.push(r[5]);
    s.flags.push(r[6]);
    this.readingCount++;
    this.lastReadingT = r[3];
  }

  applyEvent(e: WireEvent): void {
    switch (e.type) {
      case 'reading':
        this.applyReading([e.seq, e.sweep, e.k, e.t, e.v, e.i, e.flags]);
        return;
      case 'session':
        this.session = e.id;
        this.sessionEvent = e;
        this.running = true;
        break;
      case 'sweep-start':
        if (!this.sweeps.has(e.sweep)) this.sweeps.set(e.sweep, { v: [], i: [], flags: [] });
        break;
      case 'fit':
        if (e.final) {
          this.finalFits.set(e.sweep, e.fit);
          if (e.error) this.fitErrors.set(e.sweep, e.error);
        }
        this.liveFit = { sweep: e.sweep, fit: e.fit };
        break;
      case 'drift':
        this.drift = this.drift.filter((d) => d.sweep !== e.sweep);
        this.drift.push(e);
        break;
      case 'ranking':
        this.ranking = e;
        break;
      case 'progress':
        this.progress = e;
        break;
      case 'output':
        this.outputOn = e.on;
        break;
      case 'caution':
        this.cautions.push(e);
        break;
      case 'run-end':
        this.runEnd = e;
        this.running = false;
        this.outputOn = false;
        break;
      default:
        break;
    }
    this.events.push(e);
  }

  latestSweep(): number {
    let m = 0;
    for (const k of this.sweeps.keys()) m = Math.max(m, k);
    return m;
  }
}
