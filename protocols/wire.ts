/**
 * The one contract between the daemon, its journal and the page. Every event the live chain emits
 * has a type from this file, is written to the session journal first and then broadcast over the
 * websocket. Field units are stated beside each field (SI; eV for energies; t in ms since the
 * session started).
 *
 * Journal lines (journal.jsonl, JSON Lines) are either one of the events below, or — for the
 * bulk of the data — a compact reading line `{"r":[seq,sweep,k,t,v,i,flags]}` (see READING_FIELDS).
 */

import type { DeviceIdentity } from './device-results.js';

/** Reading flag bits (a reading's flags are their sum); README.md's journal section lists each (test/protocols/readme-flags.test.ts). */
export const FLAG = {
  /** The instrument was at its compliance limit: the bias was not held; never fitted. */
  compliance: 1,
  /** The current was the instrument's overflow value (over range): stored as ±Infinity. */
  overflow: 2,
  /** The voltage was the instrument's overflow value: stored as ±Infinity. */
  voltageOverflow: 4,
  /**
   * The reading that showed a confirmed breakdown: the device was no longer the one being measured
   * (a new conduction path); kept in the journal, never fitted.
   */
  breakdown: 8,
} as const;

/** Field order inside a compact reading line. */
export const READING_FIELDS = ['seq', 'sweep', 'k', 't', 'v', 'i', 'flags'] as const;

export interface ReadingEvent {
  readonly type: 'reading';
  readonly seq: number;
  /** Sweep number, 1-based. */
  readonly sweep: number;
  /** Point index within the sweep, 0-based. */
  readonly k: number;
  /** ms since the session started. */
  readonly t: number;
  /** Measured bias, V. */
  readonly v: number;
  /** Measured current, A (current into the device positive, as the SMU reports it). */
  readonly i: number;
  /** FLAG bits. */
  readonly flags: number;
}

export interface ParameterFigure {
  readonly value: number;
  readonly stdErr: number;
  readonly unit: string;
  /** The statistical part of stdErr (the rest is the window choice's), where the fit gives it. */
  readonly statStdErr?: number;
}

/** What a fit publishes (a trimmed FitReport from daemon/analysis). */
export interface FitSummary {
  readonly model: string;
  readonly title: string;
  readonly window: { from: number; to: number; mode: string };
  readonly line: { slope: number; slopeStdErr: number; intercept: number; interceptStdErr: number; r2: number; residualStdDev: number; n: number };
  readonly axes: { x: { label: string; unit: string; kind: string }; y: { label: string; unit: string; kind: string } };
  readonly parameters: Record<string, ParameterFigure>;
  readonly plausible: boolean;
  readonly warnings: readonly string[];
  /**
   * The warnings of the checks that made the fit implausible, the deciding one first (empty when
   * plausible; absent in journals written before it was recorded).
   */
  readonly failed?: readonly string[];
  readonly points: { used: number; excluded: number; reasons: Record<string, number> };
  readonly regimes: readonly { from: number; to: number; slope: number; intercept: number; n: number }[];
  /**
   * The noise the readings were weighed with: floor σ (A), where it came from ('readings',
   * 'earlier sweeps' of the same run, 'accuracy', 'not reached') and the relative part (fraction).
   * Absent in journals written before it was recorded.
   */
  readonly noise?: { readonly floor: number; readonly floorSource: string; readonly relative: number };
}

/**
 * An illuminated solar cell's sweep (with the analysis option `solar`): figures of merit with
 * standard uncertainties from local fits of the measured curve (isc A, jsc A/m², voc V, pmax W,
 * vmp V, imp A, fillFactor and efficiency dimensionless; jsc and efficiency need the area), the
 * single-diode fit, and its model curve (V, A) to draw — all in the generator convention.
 */
export interface SolarSummary {
  readonly convention: 'load' | 'generator';
  readonly irradiance: number;
  readonly area: number | null;
  readonly temperature: { readonly value: number; readonly assumed: boolean };
  readonly figures: Record<string, ParameterFigure>;
  readonly model: { readonly parameters: Record<string, ParameterFigure>; readonly rmse: number | null } | null;
  readonly curve: { readonly v: readonly number[]; readonly i: readonly number[] } | null;
  readonly warnings: readonly string[];
  readonly error?: string;
}

export type RunOutcome =
  | 'completed'
  | 'stopped'
  | 'aborted-user'
  | 'aborted-drift'
  | 'aborted-breakdown'
  | 'instrument-fault'
  | 'guard-refused'
  | 'interrupted'
  /** The journal could not be written (disk full, I/O error): the run stopped with the output off. */
  | 'journal-fault'
  /** A defect in plumbline itself; the output was turned off. */
  | 'internal-error';

export type CautionKind =
  | 'output-on'
  | 'hazard-voltage'
  | 'compliance'
  | 'breakdown-suspected'
  | 'breakdown-confirmed'
  | 'drift-warning'
  /** The drift watch's baseline sweeps themselves trend (their limits are wide). */
  | 'drift-baseline-trend'
  | 'drift-limit'
  /** The drift watch is on but the fit gives no parameter it can follow (or not the configured one). */
  | 'drift-not-watched'
  | 'instrument-fault'
  | 'journal-fault'
  /** Output off was sent but the instrument did not confirm it. */
  | 'output-unconfirmed'
  /** After a crash: the output may still be on. */
  | 'recovery'
  /** A breakdown test is starting: it destroys the device on purpose. */
  | 'destructive-test'
  | 'passive-source';

interface Stamped {
  readonly seq: number;
  readonly t: number;
}

export type WireEvent =
  | ReadingEvent
  | (Stamped & {
      readonly type: 'session';
      readonly id: string;
      /** ISO 8601 time at t = 0. */
      readonly startedAt: string;
      readonly source: { kind: string; detail: string; control: boolean };
      readonly instrument: string;
      readonly plan: unknown;
      readonly analysis: unknown;
      readonly drift: unknown;
      readonly limits: unknown;
      /** The dialect the instrument was driven with (name). */
      readonly dialect?: string;
      /** The device under test (wafer, site, x, y, area m², thickness m, temperature K, tags). */
      readonly device?: DeviceIdentity;
    })
  | (Stamped & {
      readonly type: 'sweep-start';
      readonly sweep: number;
      readonly planned: number;
      readonly label: string;
      /**
       * A constant-voltage stress interval: every reading at this bias (V), the stress time (s)
       * already accumulated when it opened. Its readings are a current against time, not a curve
       * against the bias. Absent for sweeps (and in journals written before it existed).
       */
      readonly held?: { readonly bias: number; readonly stressTime: number };
    })
  | (Stamped & { readonly type: 'sweep-end'; readonly sweep: number; readonly points: number; readonly complete: boolean; readonly note?: string })
  | (Stamped & {
      readonly type: 'fit';
      readonly sweep: number;
      readonly final: boolean;
      readonly fit: FitSummary | null;
      readonly error?: string /** Final fits of a solar cell (analysis option `solar`). */;
      readonly solar?: SolarSummary;
    })
  | (Stamped & {
      readonly type: 'drift';
      readonly sweep: number;
      readonly parameter: string;
      readonly value: number | null;
      /** The parameter's SI unit (as its fit gives it); the statistic and limits are in it too. */
      readonly unit?: string;
      readonly method: 'ewma' | 'cusum';
      readonly phase: 'baseline' | 'monitor';
      /** EWMA z, or the larger CUSUM sum (in the parameter's units). */
      readonly statistic: number | null;
      readonly center: number | null;
      readonly lower: number | null;
      readonly upper: number | null;
      readonly sigma: number | null;
      readonly state: 'baseline' | 'in-control' | 'warning' | 'out-of-control' | 'no-value';
    })
  | (Stamped & {
      readonly type: 'caution';
      readonly kind: CautionKind;
      readonly message: string;
      readonly sweep?: number;
      readonly numbers?: Record<string, number>;
    })
  | (Stamped & {
      readonly type: 'decision';
      readonly action: 'warn' | 'stop-after-sweep' | 'abort';
      readonly reason: string;
      readonly sweep?: number;
      readonly numbers?: Record<string, number>;
    })
  | (Stamped & {
      readonly type: 'annotation';
      readonly text: string;
      readonly tags: readonly string[];
      readonly sweep?: number;
      readonly source: string /** Corrections to the session's device identity (later values win). */;
      readonly device?: DeviceIdentity;
    })
  | (Stamped & { readonly type: 'settings'; readonly analysis: unknown; readonly source: string })
  | (Stamped & {
      readonly type: 'ranking';
      readonly sweep: number;
      readonly ranking: readonly { model: string; title: string; score: number; deltaAicc: number; plausible: boolean; reasons: readonly string[] }[];
      readonly warnings: readonly string[];
    })
  | (Stamped & {
      readonly type: 'progress';
      readonly sweep: number;
      readonly sweeps: number;
      readonly point: number;
      readonly points: number;
      /** Seconds left, estimated from the pace so far; null before there is a pace. */
      readonly eta: number | null;
    })
  /**
   * Fires when an output command was written (`sent`: the bytes reached the transport), and again
   * with `queried: true` when the instrument's own output query was asked: `confirmed` only when it
   * answered with the state in `on`. Older journals lack `sent` and `queried`.
   */
  | (Stamped & {
      readonly type: 'output';
      readonly on: boolean;
      readonly sent?: boolean;
      readonly queried?: boolean;
      readonly confirmed: boolean;
      readonly reason: string;
    })
  | (Stamped & { readonly type: 'rejected'; readonly raw: string; readonly reason: string })
  | (Stamped & { readonly type: 'run-end'; readonly outcome: RunOutcome; readonly reason: string; readonly sweeps: number })
  /**
   * Fires when a breakdown test ends: the device's result (a row of device-results.csv, SI units:
   * breakdownVoltage V, breakdownField V/m, chargeToBreakdown C/m², timeToBreakdown s, leakage A),
   * the criterion that fired and its numbers.
   */
  /**
   * Fires at the end of each adaptive sweep: readings, the largest |bias| applied (V), the charge
   * passed (C), the target parameter with its standard error, and why the sweep stopped.
   */
  | (Stamped & {
      readonly type: 'adaptive-sweep';
      readonly sweep: number;
      readonly readings: number;
      readonly maxAbsBias: number;
      readonly charge: number;
      readonly parameter: { readonly name: string; readonly value: number; readonly stdErr: number; readonly unit: string } | null;
      readonly stopReason: string;
    })
  | (Stamped & {
      readonly type: 'test-result';
      readonly test: string;
      readonly outcome: string;
      readonly reason: string;
      readonly result: Readonly<Record<string, unknown>>;
      readonly numbers?: Readonly<Record<string, number>>;
    })
  | (Stamped & {
      readonly type: 'recovery';
      readonly tornLines: number;
      readonly closedSweep: number | null;
      readonly addedRunEnd: boolean;
      readonly message: string;
    });

export type EventType = WireEvent['type'];

/** An event before the journal gives it a sequence number and time. */
export type NewEvent = WireEvent extends infer E ? (E extends WireEvent ? Omit<E, 'seq' | 't'> : never) : never;

/**
 * A reading packed as an array in READING_FIELDS order: [seq, sweep, k, t, v, i, flags]. The
 * websocket and the snapshot carry readings this way (a third of the bytes of the object form).
 */
export type PackedReading = readonly [number, number, number, number, number, number, number];

export function packReading(r: ReadingEvent): PackedReading {
  return [r.seq, r.sweep, r.k, r.t, r.v, r.i, r.flags];
}

export function unpackReading(p: PackedReading): ReadingEvent {
  return { type: 'reading', seq: p[0], sweep: p[1], k: p[2], t: p[3], v: p[4], i: p[5], flags: p[6] };
}

/** Messages on the websocket, daemon → page. */
export type ServerMessage =
  | { readonly kind: 'snapshot'; readonly snapshot: Snapshot }
  /**
   * Everything since the previous batch: the events other than readings, and the readings packed.
   * When a batch holds more readings than a page can use, they are thinned evenly (every sweep's
   * first and last kept) and `thinned` says how many there were; the journal always has them all
   * (GET /api/sessions/:id/readings).
   */
  | {
      readonly kind: 'events';
      readonly events: readonly WireEvent[];
      readonly readings: readonly PackedReading[];
      readonly thinned?: { readonly readings: number; readonly sent: number };
    }
  /** Events from..to (inclusive) were not delivered to this client; a snapshot follows. */
  | { readonly kind: 'gap'; readonly from: number; readonly to: number }
  /**
   * The linearized view of one sweep for the chosen model (display data derived from journaled
   * readings, so it is not journaled itself): sent with every fit, latest per sweep per batch.
   */
  | { readonly kind: 'view'; readonly session: string | null; readonly sweep: number; readonly final: boolean; readonly view: PlotViewData };

/** Mirrors daemon/analysis/plot.ts PlotView (display values; the page only draws them). */
export interface PlotViewData {
  readonly model: string;
  readonly axes: { x: { label: string; unit: string; kind: string }; y: { label: string; unit: string; kind: string } };
  readonly x: readonly number[];
  readonly y: readonly number[];
  readonly bias: readonly number[];
  readonly inWindow: readonly number[];
  readonly residual: readonly (number | null)[];
  readonly line: { x: [number, number]; y: [number, number] } | null;
  readonly window: { x: [number, number]; bias: [number, number] } | null;
  readonly regimes: readonly { x: [number, number]; y: [number, number] }[];
  readonly error?: string;
}

export interface Snapshot {
  readonly station: { readonly control: boolean; readonly hazardVoltage: number; readonly limits: unknown };
  readonly running: boolean;
  readonly session: string | null;
  /**
   * Sequence number of the last event included; live events with seq ≤ lastSeq are already in the
   * snapshot and are skipped by the page.
   */
  readonly lastSeq: number;
  /** The current session's events other than readings (all of them, up to a cap). */
  readonly events: readonly WireEvent[];
  /** The current session's most recent readings (up to a cap), packed, in sequence order. */
  readonly readings: readonly PackedReading[];
  /** Latest linearized views (the last few sweeps). */
  readonly views: readonly { sweep: number; final: boolean; view: PlotViewData }[];
}
