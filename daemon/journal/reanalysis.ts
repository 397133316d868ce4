/**
 * Looking at a session for the page: its overview (bounded in size whatever the session's length),
 * any one sweep with its recorded fit and linearized view, and re-analysis — sweeps fitted again
 * with other settings. Re-analysis never touches the journal: each one is appended as a line to
 * `reanalysis.jsonl` beside it (time, settings, results), as `plumbline refit` writes its own file.
 */
import { appendFileSync } from 'node:fs';
import { basename, join } from 'node:path';
import { analyze } from '../analysis/analyze.js';
import { plotView, type PlotView } from '../analysis/plot.js';
import { READING_COLUMNS } from '../analysis/mechanism.js';
import type { FitSummary, PackedReading, SolarSummary, WireEvent } from '../../protocols/wire.js';
import { solarSummary } from '../analysis/solar-live.js';
import { summarizeFit } from '../pipeline/chain.js';
import { analysisSchema, type AnalysisSettings } from '../pipeline/settings.js';
import { SessionIndex, type Envelope } from './session-index.js';

export const REANALYSIS_FILE = 'reanalysis.jsonl';

/** Sweeps whose readings an overview carries (the rest are in the envelope and the picker). */
export const OVERVIEW_SWEEPS = 40;

export interface SweepFit {
  readonly sweep: number;
  readonly fit: FitSummary | null;
  readonly error: string | null;
  /** A solar cell's figures of merit and diode fit (analysis option `solar`). */
  readonly solar?: SolarSummary | null;
}

/** The settings a sweep was analysed with, parsed (null when the journal's cannot be read). */
function settingsOf(raw: unknown): AnalysisSettings | null {
  const r = analysisSchema.safeParse(raw);
  return r.success ? r.data : null;
}

/** One sweep fitted with the given settings (what the live chain does at a sweep's end). */
export function fitSweep(
  data: { x: number[]; y: number[]; compliance: number[] },
  a: AnalysisSettings,
  complianceLimit: number | undefined,
): { fit: FitSummary | null; error: string | null; solar?: SolarSummary } {
  const solar = a.solar
    ? { solar: solarSummary(data, { temperature: a.inputs.temperature, area: a.inputs.area, irradiance: a.solar.irradiance, complianceLimit }) }
    : {};
  try {
    return {
      fit: summarizeFit(analyze(data, { model: a.model, columns: READING_COLUMNS, inputs: a.inputs, window: a.window, complianceLimit, regimes: false })),
      error: null,
      ...solar,
    };
  } catch (e) {
    return { fit: null, error: (e as Error).message, ...solar };
  }
}

/** The linearized view of one sweep with the given settings (an error is carried in the view). */
export function viewSweep(data: { x: number[]; y: number[]; compliance: number[] }, a: AnalysisSettings, complianceLimit: number | undefined): PlotView {
  try {
    return plotView(data, { model: a.model, columns: READING_COLUMNS, inputs: a.inputs, window: a.window, complianceLimit });
  } catch (e) {
    return {
      model: a.model,
      axes: { x: { label: 'x', unit: '', kind: 'linear' }, y: { label: 'y', unit: '', kind: 'linear' } },
      x: [],
      y: [],
      bias: [],
      inWindow: [],
      residual: [],
      line: null,
      window: null,
      regimes: [],
      error: (e as Error).message,
    };
  }
}

export interface SweepDetail {
  readonly sweep: number;
  readonly readings: PackedReading[];
  readonly complete: boolean | null;
  /** The journaled final fit and the settings in force when it was made. */
  readonly fit: FitSummary | null;
  readonly error: string | null;
  readonly solar: SolarSummary | null;
  readonly analysis: AnalysisSettings | null;
  readonly view: PlotView | null;
}

/** One sweep as recorded: readings, journaled final fit, and its view with the settings of the time. */
export function sweepDetail(dir: string, sweep: number): SweepDetail | undefined {
  const x = SessionIndex.open(dir);
  const s = x.sweep(sweep);
  if (!s) return undefined;
  const r = x.readSweep(sweep);
  const a = settingsOf(s.analysis);
  const data = { x: r.v, y: r.i, compliance: r.flags.map((f) => f & 1) };
  return {
    sweep,
    readings: r.rows,
    complete: s.complete,
    fit: s.fit,
    error: s.fitError,
    solar: s.solar,
    analysis: a,
    view: a ? viewSweep(data, a, x.complianceLimit) : null,
  };
}

/** One sweep's view with other settings, without recording anything. */
export function sweepViewWith(dir: string, sweep: number, a: AnalysisSettings): PlotView | undefined {
  const x = SessionIndex.open(dir);
  if (!x.sweep(sweep)) return undefined;
  return viewSweep(x.sweepData(sweep), a, x.complianceLimit);
}

export interface Overview {
  readonly id: string;
  readonly session: Extract<WireEvent, { type: 'session' }> | null;
  readonly runEnd: Extract<WireEvent, { type: 'run-end' }> | null;
  /** The analysis settings last in force. */
  readonly analysis: unknown;
  readonly readings: number;
  readonly lastSeq: number;
  /** Cautions, decisions, output changes, annotations, settings, recovery, run end (time order). */
  readonly events: WireEvent[];
  /** One entry per sweep: number, readings, complete, and its final fit's parameters (value, stdErr). */
  readonly sweeps: {
    readonly sweep: number[];
    readonly points: number[];
    readonly complete: (boolean | null)[];
    readonly model: (string | null)[];
    readonly error: (string | null)[];
    readonly parameters: Record<string, { unit: string; value: (number | null)[]; stdErr: (number | null)[] }>;
  };
  /** The last sweeps' final fits in full (the parameters panel), with the settings that made them. */
  readonly fits: (SweepFit & { analysis: AnalysisSettings | null })[];
  readonly drift: Extract<WireEvent, { type: 'drift' }>[];
  readonly ranking: Extract<WireEvent, { type: 'ranking' }> | null;
  /** Readings of the last sweeps (packed, sequence order). */
  readonly recent: PackedReading[];
  /** |I| and I against V over every sweep. */
  readonly envelope: Envelope;
  /** The last sweep's linearized view with the settings it was fitted with. */
  readonly view: { sweep: number; view: PlotView } | null;
  readonly damagedLines: number;
}

export function sessionOverview(dir: string, lastSweeps = OVERVIEW_SWEEPS): Overview {
  const x = SessionIndex.open(dir);
  const n = x.sweeps.length;
  const parameters: Overview['sweeps']['parameters'] = {};
  x.sweeps.forEach((s, k) => {
    for (const [name, p] of Object.entries(s.fit?.parameters ?? {})) {
      parameters[name] ??= { unit: p.unit, value: new Array<number | null>(n).fill(null), stdErr: new Array<number | null>(n).fill(null) };
      parameters[name].value[k] = p.value;
      parameters[name].stdErr[k] = p.stdErr;
    }
  });
  const tail = x.sweeps.slice(-lastSweeps);
  const recent: PackedReading[] = [];
  for (const s of tail) recent.push(...x.readSweep(s.sweep).rows);
  const last = x.sweeps.at(-1);
  let view: Overview['view'] = null;
  if (last) {
    const d = sweepDetail(dir, last.sweep);
    if (d?.view) view = { sweep: last.sweep, view: d.view };
  }
  return {
    id: basename(dir),
    session: x.session,
    runEnd: x.runEnd,
    analysis: x.analysis,
    readings: x.readings,
    lastSeq: x.lastSeq,
    events: x.events,
    sweeps: {
      sweep: x.sweeps.map((s) => s.sweep),
      points: x.sweeps.map((s) => s.count),
      complete: x.sweeps.map((s) => s.complete),
      model: x.sweeps.map((s) => s.fit?.model ?? null),
      error: x.sweeps.map((s) => s.fitError),
      parameters,
    },
    fits: x.sweeps.slice(-2).map((s) => ({ sweep: s.sweep, fit: s.fit, error: s.fitError, solar: s.solar, analysis: settingsOf(s.analysis) })),
    drift: x.drift,
    ranking: x.ranking,
    recent,
    envelope: x.envelope,
    view,
    damagedLines: x.bad.length,
  };
}

export interface ReanalysisResult {
  readonly session: string;
  /** ISO time of the re-analysis (it names the results in reanalysis.jsonl). */
  readonly at: string;
  readonly analysis: AnalysisSettings;
  readonly fits: SweepFit[];
  readonly views: { sweep: number; view: PlotView }[];
  readonly file: string;
}

/** At most this many sweeps per request (the page asks for the ones on screen). */
export const MAX_REANALYSIS_SWEEPS = 500;

/**
 * Fits `sweeps` of a session again with `analysis` (views for `views`), appends the results to
 * reanalysis.jsonl beside the journal and returns them. The journal is not touched.
 */
export function reanalyze(dir: string, analysis: AnalysisSettings, sweeps: readonly number[], views: readonly number[]): ReanalysisResult {
  const x = SessionIndex.open(dir);
  const fits: SweepFit[] = [];
  const viewsOut: ReanalysisResult['views'] = [];
  const wanted = [...new Set([...sweeps, ...views])].filter((n) => x.sweep(n)).sort((a, b) => a - b);
  for (const n of wanted) {
    const data = x.sweepData(n);
    if (sweeps.includes(n)) fits.push({ sweep: n, ...fitSweep(data, analysis, x.complianceLimit) });
    if (views.includes(n)) viewsOut.push({ sweep: n, view: viewSweep(data, analysis, x.complianceLimit) });
  }
  const at = new Date().toISOString();
  const file = join(dir, REANALYSIS_FILE);
  appendFileSync(file, `${JSON.stringify({ at, analysis, complianceLimit: x.complianceLimit ?? null, fits })}\n`);
  return { session: basename(dir), at, analysis, fits, views: viewsOut, file };
}
