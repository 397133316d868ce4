/**
 * A sweep's fit from its readings, as the live chain makes it: the one place that turns a sweep's
 * readings and the analysis settings in force into a fit (and a solar cell's figures). The chain
 * calls it while a sweep runs and at its end; recovery calls it for a sweep a crash cut short, from
 * the readings on disk, so that sweep gets the same final fit the run would have journaled.
 */
import { analyze, type FitReport, type FitRequest, type IVData } from '../analysis/analyze.js';
import { READING_COLUMNS } from '../analysis/mechanism.js';
import { robustRms } from '../analysis/noise-floor.js';
import { solarSummary } from '../analysis/solar-live.js';
import { atOneBias } from '../analysis/sweep-points.js';
import { FLAG, type FitSummary, type SolarSummary } from '../../protocols/wire.js';
import type { AnalysisSettings } from './settings.js';

export function summarizeFit(r: FitReport): FitSummary {
  return {
    model: r.model,
    title: r.title,
    window: r.window,
    line: {
      slope: r.line.slope,
      slopeStdErr: r.line.slopeStdErr,
      intercept: r.line.intercept,
      interceptStdErr: r.line.interceptStdErr,
      r2: r.line.r2,
      residualStdDev: r.line.residualStdDev,
      n: r.line.n,
    },
    axes: {
      x: { label: r.axes.x.label, unit: r.axes.x.unit, kind: r.axes.x.kind },
      y: { label: r.axes.y.label, unit: r.axes.y.unit, kind: r.axes.y.kind },
    },
    parameters: r.parameters,
    plausible: r.plausible,
    warnings: r.warnings,
    failed: r.failed,
    points: r.points,
    regimes: r.regimes,
    noise: { floor: r.noise.floor, floorSource: r.noise.floorSource, relative: r.noise.relative },
  };
}

/** What a sweep's fit depends on besides its readings. */
export interface SweepFitContext {
  /** The analysis settings in force. */
  readonly analysis: AnalysisSettings;
  /** The run's compliance limit, A. */
  readonly complianceLimit?: number;
  /** The sweep's own temperature, K, when the data carry one (it replaces the settings'). */
  readonly temperature?: number;
  /** The noise floor of the run's null readings so far, when trusted (see NullReadings.trusted). */
  readonly knownFloor?: { readonly sigma: number; readonly readings: number };
}

/** Readings whose bias the source did not hold (at compliance, or at breakdown), from the reading flags. */
export const unheld =
  (flags: readonly number[]) =>
  (k: number): boolean =>
    (flags[k] & (FLAG.compliance | FLAG.breakdown)) !== 0;

/** A sweep's readings as analysis data (compliance and breakdown from the flag bits). */
export function readingData(v: number[], i: number[], flags: readonly number[]): IVData {
  return { x: v, y: i, compliance: flags.map((f) => f & FLAG.compliance), breakdown: flags.map((f) => f & FLAG.breakdown) };
}

/** The analysis inputs for a sweep: the settings', with the sweep's own temperature when it has one. */
export function sweepInputs(ctx: SweepFitContext): AnalysisSettings['inputs'] {
  return ctx.temperature === undefined ? ctx.analysis.inputs : { ...ctx.analysis.inputs, temperature: ctx.temperature };
}

/** The fit request for a sweep. */
export function sweepRequest(ctx: SweepFitContext, regimes: boolean): FitRequest {
  const a = ctx.analysis;
  return {
    model: a.model,
    columns: READING_COLUMNS,
    inputs: sweepInputs(ctx),
    window: a.window,
    complianceLimit: ctx.complianceLimit,
    regimes,
    ...(a.solar ? { illuminated: true } : {}),
    ...(ctx.knownFloor ? { knownFloor: ctx.knownFloor } : {}),
  };
}

/** A sweep's readings fitted (`quick`: the live fit while the sweep runs). */
export function fitReadings(
  v: number[],
  i: number[],
  flags: number[],
  ctx: SweepFitContext,
  regimes = true,
  quick = false,
): { fit: FitSummary | null; error?: string; report?: FitReport } {
  if (atOneBias(v, unheld(flags)))
    return { fit: null, error: 'every reading is at one bias (a constant-stress interval): there is no current–voltage curve to fit' };
  try {
    const report = analyze(readingData(v, i, flags), { ...sweepRequest(ctx, regimes), quick });
    return { fit: summarizeFit(report), report };
  } catch (e) {
    return { fit: null, error: (e as Error).message };
  }
}

/** A finished sweep of a solar cell (analysis option `solar`): figures of merit and the diode fit. */
export function solarOfReadings(v: number[], i: number[], flags: number[], ctx: SweepFitContext): SolarSummary | undefined {
  const s = ctx.analysis.solar;
  if (!s) return undefined;
  const inp = sweepInputs(ctx);
  return solarSummary(readingData(v, i, flags), {
    temperature: inp.temperature,
    area: inp.area,
    irradiance: s.irradiance,
    complianceLimit: ctx.complianceLimit,
  });
}

/** The final fit a sweep's end journals: the `fit` event's body (without the regime search, as the chain does). */
export function finalFit(
  v: number[],
  i: number[],
  flags: number[],
  ctx: SweepFitContext,
): { fit: FitSummary | null; error?: string; solar?: SolarSummary; report?: FitReport } {
  const r = fitReadings(v, i, flags, ctx, false, false);
  const solar = solarOfReadings(v, i, flags, ctx);
  return { fit: r.fit, ...(r.error ? { error: r.error } : {}), ...(solar ? { solar } : {}), ...(r.report ? { report: r.report } : {}) };
}

/**
 * The run's null readings (at zero bias, or with the current against the bias): they carry no signal
 * (a passive film, a dark diode), and their robust RMS is the noise floor the breakdown watch
 * ignores and the floor a later sweep's fit uses when it reads none of its own.
 */
export class NullReadings {
  private readonly nulls: number[] = [];
  /** The largest |I| seen. */
  maxCurrent = 0;
  /** Whether a null reading flowed against the bias, and the signs of the zero-bias ones. */
  private readonly signs = { against: false, plus: false, minus: false };
  /** The floor the null readings give, once they show themselves as noise. */
  floor: { sigma: number; readings: number } | undefined;

  /**
   * One reading (its flags, and the flat-band voltage of the settings in force). Returns the robust
   * RMS of the recent null readings when there are enough of them, else undefined. For the fit's
   * floor the null readings must also show themselves as noise: a reading against the bias, or
   * zero-bias readings of both signs (a device whose zero-bias current is steady and of one sign
   * carries a current there, not noise).
   */
  note(v: number, i: number, flags: number, flatBand: number): number | undefined {
    if (flags !== 0 || !Number.isFinite(v) || !Number.isFinite(i)) return undefined;
    const b = v - flatBand;
    if (Math.abs(i) > this.maxCurrent) this.maxCurrent = Math.abs(i);
    if (!(Math.abs(b) <= 1e-4 * Math.max(1, Math.abs(v)) || i * b < 0)) return undefined;
    this.nulls.push(i);
    if (this.nulls.length > 256) this.nulls.shift();
    if (i * b < 0) this.signs.against = true;
    else if (i > 0) this.signs.plus = true;
    else if (i < 0) this.signs.minus = true;
    if (this.nulls.length < 3) return undefined;
    const sigma = robustRms(this.nulls);
    const n = this.signs;
    if (n.against || (n.plus && n.minus)) this.floor = { sigma, readings: this.nulls.length };
    return sigma;
  }

  /** The floor a fit may use: only once the currents seen dwarf it (a photocurrent or a built-in field makes null readings real). */
  trusted(): { sigma: number; readings: number } | undefined {
    return this.floor && this.floor.sigma <= 0.01 * this.maxCurrent ? this.floor : undefined;
  }
}
