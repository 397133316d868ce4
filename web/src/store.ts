/**
 * The page's copy of what the daemon computed: the session's readings per sweep (the last ones),
 * its events, fits and linearized views, and — for a past session — the envelope of every sweep.
 * Events arrive with sequence numbers; anything at or below the last one seen is a duplicate and
 * skipped. The page never computes physics: it keeps and draws these.
 */
import type { FitSummary, PackedReading, PlotViewData, ServerMessage, Snapshot, SolarSummary, WireEvent } from '../../protocols/wire.js';

export interface SweepPoints {
  v: number[];
  i: number[];
  flags: number[];
  /** When each reading was taken (ms from the session's start). */
  t: number[];
}

type Ev<T extends WireEvent['type']> = Extract<WireEvent, { type: T }>;

/** Sweeps whose readings the page keeps (older ones stay in the journal and the picker loads them). */
export const KEPT_SWEEPS = 100;

/** The analysis settings as the daemon sends them (SI). */
export interface AnalysisSettings {
  model: string;
  window: 'auto' | 'all' | { from?: number; to?: number };
  inputs: Record<string, number | undefined>;
  solar?: { irradiance?: number } | undefined;
}

/** |I| and I against V over every sweep of a past session (from the daemon's overview). */
export interface Envelope {
  v: number[];
  lo: (number | null)[];
  hi: (number | null)[];
  min: (number | null)[];
  max: (number | null)[];
}

/** Results of a re-analysis: the settings, and fits and views per sweep. */
export interface Reanalysis {
  at: string;
  analysis: AnalysisSettings;
  fits: Map<number, { fit: FitSummary | null; error: string | null; solar?: SolarSummary | null }>;
  views: Map<number, PlotViewData>;
}

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
  /** A solar cell's figures of merit and diode fit per finished sweep (analysis option `solar`). */
  finalSolar = new Map<number, SolarSummary>();
  /** The analysis settings in force when each sweep's final fit was made. */
  fitAnalysis = new Map<number, AnalysisSettings | null>();
  liveFit: { sweep: number; fit: FitSummary | null } | null = null;
  views = new Map<number, PlotViewData>();
  /** Sweeps whose view is the final one (the sweep had ended). */
  viewFinal = new Set<number>();
  /** What each sweep is, as the daemon named it at its start ("use-condition check before the test", "adaptive sweep 2 of 5"). */
  labels = new Map<number, string>();
  /** Constant-voltage stress intervals: the bias held and the stress time (s) when each opened. */
  held = new Map<number, { bias: number; stressTime: number }>();
  /** Sweeps that ended (sweep-end seen), with whether they were complete. */
  ended = new Map<number, boolean>();
  drift: Ev<'drift'>[] = [];
  ranking: Ev<'ranking'> | null = null;
  /** Each ranked sweep's ranking (the daemon ranks a finished sweep at most once a second), the last KEPT_SWEEPS. */
  rankings = new Map<number, Ev<'ranking'>>();
  progress: Ev<'progress'> | null = null;
  outputOn = false;
  /** The last output event: after a run, the page says the output is off and whether the instrument confirmed it. */
  lastOutput: Extract<WireEvent, { type: 'output' }> | null = null;
  cautions: Ev<'caution'>[] = [];
  runEnd: Ev<'run-end'> | null = null;
  /** A breakdown test's result (its last, should a session hold more than one). */
  testResult: Ev<'test-result'> | null = null;
  /** Each adaptive sweep's figures (readings, peak bias, charge, target parameter, why it stopped). */
  adaptive: Ev<'adaptive-sweep'>[] = [];
  sessionEvent: Ev<'session'> | null = null;
  /** The analysis settings in force now (session start, then settings changes). */
  analysis: AnalysisSettings | null = null;
  /** Every sweep number of the session (a past session's overview lists them all). */
  allSweeps: number[] = [];
  envelope: Envelope | null = null;
  reanalysis: Reanalysis | null = null;
  /** The sweep chosen in the picker; null follows the latest. */
  shownSweep: number | null = null;
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
    this.finalSolar = new Map();
    this.fitAnalysis = new Map();
    this.liveFit = null;
    this.views = new Map();
    this.viewFinal = new Set();
    this.ended = new Map();
    this.labels = new Map();
    this.held = new Map();
    this.drift = [];
    this.ranking = null;
    this.rankings = new Map();
    this.progress = null;
    this.outputOn = false;
    this.lastOutput = null;
    this.cautions = [];
    this.runEnd = null;
    this.testResult = null;
    this.adaptive = [];
    this.sessionEvent = null;
    this.analysis = null;
    this.allSweeps = [];
    this.envelope = null;
    this.reanalysis = null;
    this.shownSweep = null;
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
    this.running = s.running;
    this.lastSeq = s.lastSeq;
    for (const v of s.views) this.setView(v.sweep, v.final, v.view);
    this.dirty = true;
  }

  applyMessage(m: ServerMessage): void {
    if (m.kind === 'snapshot') this.applySnapshot(m.snapshot);
    else if (m.kind === 'gap') this.resyncing = true;
    else if (m.kind === 'view') {
      if (m.session === this.session || this.session === null) this.setView(m.sweep, m.final, m.view);
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

  setView(sweep: number, final: boolean, view: PlotViewData): void {
    this.views.set(sweep, view);
    if (final) this.viewFinal.add(sweep);
    // Views of sweeps long gone are not kept.
    if (this.views.size > 8) {
      const keys = [...this.views.keys()].sort((a, b) => a - b);
      for (const k of keys.slice(0, keys.length - 8)) if (k !== this.shownSweep) this.views.delete(k);
    }
  }

  /** The ranking to show with sweep `n`: its own, else the last one before it, else the latest. */
  rankingFor(n: number): Ev<'ranking'> | null {
    const own = this.rankings.get(n);
    if (own) return own;
    let best: Ev<'ranking'> | null = null;
    for (const r of this.rankings.values()) if (r.sweep <= n && (!best || r.sweep > best.sweep)) best = r;
    return best ?? this.ranking;
  }

  /** The sweep's points, created (and the oldest dropped beyond KEPT_SWEEPS) when first seen. */
  sweepPoints(n: number): SweepPoints {
    let s = this.sweeps.get(n);
    if (!s) {
      s = { v: [], i: [], flags: [], t: [] };
      this.sweeps.set(n, s);
      if (!this.allSweeps.length || this.allSweeps[this.allSweeps.length - 1] < n) this.allSweeps.push(n);
      if (this.sweeps.size > KEPT_SWEEPS) {
        let oldest = Infinity;
        for (const k of this.sweeps.keys()) if (k < oldest && k !== this.shownSweep) oldest = k;
        this.sweeps.delete(oldest);
      }
    }
    return s;
  }

  private applyReading(r: PackedReading): void {
    const s = this.sweepPoints(r[1]);
    s.v.push(r[4]);
    s.i.push(r[5]);
    s.flags.push(r[6]);
    s.t.push(r[3]);
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
        this.analysis = e.analysis as AnalysisSettings;
        break;
      case 'settings':
        this.analysis = e.analysis as AnalysisSettings;
        break;
      case 'sweep-start':
        this.sweepPoints(e.sweep);
        if (e.label) this.labels.set(e.sweep, e.label);
        if (e.held) this.held.set(e.sweep, e.held);
        break;
      case 'sweep-end':
        this.ended.set(e.sweep, e.complete);
        break;
      case 'fit':
        if (e.final) {
          this.finalFits.set(e.sweep, e.fit);
          this.fitAnalysis.set(e.sweep, this.analysis);
          if (e.error) this.fitErrors.set(e.sweep, e.error);
          else this.fitErrors.delete(e.sweep);
          if (e.solar) this.finalSolar.set(e.sweep, e.solar);
        }
        this.liveFit = { sweep: e.sweep, fit: e.fit };
        break;
      case 'drift':
        this.drift = this.drift.filter((d) => d.sweep !== e.sweep);
        this.drift.push(e);
        break;
      case 'ranking':
        this.ranking = e;
        this.rankings.set(e.sweep, e);
        if (this.rankings.size > KEPT_SWEEPS) this.rankings.delete(this.rankings.keys().next().value as number);
        break;
      case 'progress':
        this.progress = e;
        return;
      case 'output':
        this.outputOn = e.on;
        this.lastOutput = e;
        break;
      case 'caution':
        this.cautions.push(e);
        break;
      case 'test-result':
        this.testResult = e;
        break;
      case 'adaptive-sweep':
        this.adaptive.push(e);
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
    return Math.max(m, this.allSweeps.at(-1) ?? 0);
  }

  /**
   * The sweep the panels show: the one picked, or the latest — except that once a breakdown test
   * has its result, the latest sweep with a curve (more than one bias: the ramp, not the
   * one-reading use-condition check after it) is the one worth seeing.
   */
  currentSweep(): number {
    if (this.shownSweep !== null) return this.shownSweep;
    const latest = this.latestSweep();
    if (!this.testResult) return latest;
    for (let k = this.allSweeps.length - 1; k >= 0; k--) {
      const n = this.allSweeps[k];
      const pts = this.sweeps.get(n);
      if (!pts || pts.v.length < 2) continue;
      let lo = Infinity;
      let hi = -Infinity;
      for (const v of pts.v) {
        lo = Math.min(lo, v);
        hi = Math.max(hi, v);
      }
      if (hi - lo > 1e-6 * Math.max(1, Math.abs(hi))) return n;
    }
    return latest;
  }

  /** Whether a sweep is still being measured (no end seen while the run goes on). */
  isLive(sweep: number): boolean {
    return this.running && !this.readOnly && !this.ended.has(sweep);
  }
}
