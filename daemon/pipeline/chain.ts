/**
 * The live chain for one session: reading → flagged point (journaled) → breakdown watch (each reading
 * against the sweep's own trend, the noise floor ignored) → live fit of the sweep so far (a quick
 * analysis at most every FIT_INTERVAL_MS, the full one at the sweep's end) → drift chart across
 * sweeps → decisions.
 *
 * Every event goes to the journal first and then to `events$` (an rxjs Subject the websocket hub and
 * the CLI progress line subscribe to). The recording path is plain synchronous code — no operator
 * that could drop or reorder readings sits between the instrument and the journal.
 */
import { Subject } from 'rxjs';
import { resolveInputs, transformPoint, type FitReport } from '../analysis/analyze.js';
import { BreakdownWatch } from '../analysis/breakdown.js';
import { atOneBias } from '../analysis/sweep-points.js';
import { DriftChart } from '../analysis/drift.js';
import type { Mechanism, ResolvedInputs } from '../analysis/mechanism.js';
import { getMechanism } from '../analysis/mechanisms/index.js';
import { plotView, type PlotView } from '../analysis/plot.js';
import { OUTPUT_BEING_TURNED_OFF } from '../../protocols/caution-words.js';
import { displayUnit } from '../../protocols/display-units.js';
import { formatNumber } from '../../protocols/number-format.js';
import { rankMechanisms } from '../analysis/ranking.js';
import { FLAG, type FitSummary, type NewEvent, type RunOutcome, type SolarSummary, type WireEvent } from '../../protocols/wire.js';
import type { JournalWriter } from '../journal/journal.js';
import type { AnalysisSettings, BreakdownConfig, DriftConfig } from './settings.js';
import { finalFit, fitReadings, NullReadings, readingData, solarOfReadings, type SweepFitContext, sweepInputs, sweepRequest, unheld } from './sweep-fit.js';

export const FIT_INTERVAL_MS = 250;
const PROGRESS_INTERVAL_MS = 250;

export interface Decision {
  readonly action: 'warn' | 'stop-after-sweep' | 'abort';
  readonly outcome: RunOutcome;
  readonly reason: string;
}

export interface ChainOptions {
  readonly journal: JournalWriter;
  readonly analysis: AnalysisSettings;
  readonly drift: DriftConfig;
  readonly breakdown: BreakdownConfig;
  /** Compliance limit of the run, A (for the breakdown watch and the ≥ 0.99·limit rule). */
  readonly complianceLimit?: number;
  readonly hazardVoltage: number;
  /** Planned sweeps and points per sweep, for progress (0 when unknown: passive sources). */
  readonly sweeps?: number;
  readonly pointsPerSweep?: number;
  /** False for passive sources: plumbline cannot act on the instrument (cautions say so). */
  readonly control?: boolean;
  /**
   * Where events go after the journal: the station passes its one stream (which outlives each
   * session, so the chain does not complete it); without it the chain has a stream of its own.
   */
  readonly events?: Subject<WireEvent>;
  /**
   * Whether anyone will draw the linearized views (computed per fit, not journaled): the station
   * says whether a page server listens; by default, whether `views$` has a subscriber.
   */
  readonly viewsWanted?: () => boolean;
}

export { summarizeFit } from './sweep-fit.js';

/** Ranking runs at a sweep's end at most this often, and on sweeps up to this many points. */
const RANKING_INTERVAL_MS = 1000;
const RANKING_MAX_POINTS = 5000;

export class LiveChain {
  /** Every event, after the journal has it: the station's own stream when it passes one in. */
  readonly events$: Subject<WireEvent>;
  /** Linearized views for pages (display data, derived from journaled readings; not journaled). */
  readonly views$ = new Subject<{ sweep: number; final: boolean; view: PlotView }>();
  private lastRankingAt = -Infinity;
  private analysis: AnalysisSettings;
  private mech: Mechanism;
  private inputs: ResolvedInputs;
  private area = 1;
  private drift: DriftChart | undefined;
  /** The parameter the drift chart's baseline belongs to (a new one restarts the baseline). */
  private driftParameter: string | undefined;
  /** Whether the drift watch has said it has nothing to follow (once per model and inputs). */
  private driftUnwatchedSaid = false;
  private readonly breakdown: BreakdownWatch | undefined;
  // Current sweep.
  private sweep = 0;
  private k = 0;
  private v: number[] = [];
  private i: number[] = [];
  private c: number[] = [];
  /** Polarity of the breakdown watch's current trend (a change restarts it). */
  private trendSign = 0;
  /** The run's null readings (zero bias, against the bias) and the largest |I| seen, for the floor. */
  private readonly nulls = new NullReadings();

  /** The noise floor σ (A) of the run's null readings so far (zero bias, current against the bias), when they show one. */
  get noiseFloor(): { readonly sigma: number; readonly readings: number } | undefined {
    return this.nulls.floor;
  }
  private complianceSeen = false;
  private sweepTemperature: number | undefined;
  private hazardSeen = false;
  private lastFitAt = 0;
  private lastProgressAt = 0;
  private readonly t0 = performance.now();
  private readonly tp = { x: 0, y: 0, bias: 0 };
  private lastFinal: { sweep: number; v: number[]; i: number[]; c: number[] } | undefined;
  /** The points the sweep under way was planned to hold (0: not said). */
  private planned = 0;
  /** Seconds the run has left by its plan's own timing, when the run can say (a breakdown test). */
  private remaining: (() => number | null) | undefined;
  private stopRequested: Decision | undefined;
  sweepsDone = 0;
  readings = 0;
  /** Whether a sweep has started and not yet ended. */
  sweepInProgress = false;

  constructor(readonly options: ChainOptions) {
    this.events$ = options.events ?? new Subject<WireEvent>();
    this.analysis = options.analysis;
    this.mech = getMechanism(options.analysis.model);
    this.inputs = resolveInputs(this.mech, options.analysis.inputs);
    this.area = this.mech.usesArea && this.inputs.area !== undefined ? this.inputs.area : 1;
    if (options.drift.enabled) this.drift = new DriftChart(options.drift);
    if (options.breakdown.enabled) this.breakdown = new BreakdownWatch(options.breakdown, options.complianceLimit ?? Infinity);
  }

  get settings(): AnalysisSettings {
    return this.analysis;
  }

  /**
   * The fit's x axis as a function of the bias (the mechanism's own, of |V − flat band|) and whether
   * its fits hold a leakage term: what an adaptive sweep needs to place its readings. Undefined for
   * models that are not a mechanism of the current on a log axis.
   */
  fitAxis(): { axis: (v: number) => number; leakage: boolean } | undefined {
    const mech = this.mech;
    if (!(mech.current && mech.yKind === 'log' && mech.bias === 'magnitude')) return undefined;
    const inputs = this.inputs;
    return { axis: (v) => mech.x(Math.abs(v - inputs.flatBand), inputs), leakage: !!mech.leakage };
  }

  /** Journal, then broadcast. */
  emit(e: NewEvent): WireEvent {
    const full = this.options.journal.event(e);
    this.events$.next(full);
    return full;
  }

  /** The number of the sweep under way (or the last one), 0 before the first. */
  get sweepNumber(): number {
    return this.sweep;
  }

  /**
   * Where the progress events' time left comes from: the run's own plan (a breakdown test's phases
   * differ in length, so the pace of the readings so far says little). Without it, the pace of the
   * readings so far across sweeps of the plan's shape.
   */
  setRemaining(f: (() => number | null) | undefined): void {
    this.remaining = f;
  }

  startSweep(n: number, planned: number, label: string, held?: { bias: number; stressTime: number }): void {
    this.sweep = n;
    this.planned = Math.max(planned, 0);
    this.k = 0;
    this.v = [];
    this.i = [];
    this.c = [];
    this.trendSign = 0;
    this.complianceSeen = false;
    this.sweepTemperature = undefined;
    this.breakdown?.reset();
    this.lastFitAt = performance.now();
    this.emit({ type: 'sweep-start', sweep: n, planned, label, ...(held ? { held } : {}) });
    this.sweepInProgress = true;
  }

  /**
   * One reading. Returns an abort decision when the point shows breakdown. `brokeDown` says a
   * stress test's own judge confirmed breakdown at this reading; the watch here may say so too.
   * Either way the reading is journaled with the breakdown flag and never fitted.
   */
  reading(v: number, i: number, compliance: boolean, overflow: boolean, programmed?: number, voltageOverflow = false, brokeDown = false): Decision | undefined {
    let flags = (compliance ? FLAG.compliance : 0) | (overflow ? FLAG.overflow : 0) | (voltageOverflow ? FLAG.voltageOverflow : 0);
    // The breakdown watch judges before the reading is journaled, so that its flag goes with it.
    let verdict: ReturnType<BreakdownWatch['add']> | undefined;
    this.noteNull(v, i, flags);
    if (this.breakdown) {
      verdict = this.breakdown.add(v, i, compliance, this.trendPoint(v, i));
    }
    if (brokeDown || verdict?.state === 'confirmed') flags |= FLAG.breakdown;
    const ev = this.options.journal.reading(this.sweep, this.k, v, i, flags);
    this.events$.next(ev);
    this.k++;
    this.readings++;
    this.v.push(v);
    this.i.push(i);
    this.c.push(flags);
    let decision: Decision | undefined;

    // An over-range voltage reads as ±Infinity: it is flagged, not taken for a hazardous bias.
    if (!this.hazardSeen && Number.isFinite(v) && Math.abs(v) > this.options.hazardVoltage) {
      this.hazardSeen = true;
      this.emit({
        type: 'caution',
        kind: 'hazard-voltage',
        sweep: this.sweep,
        numbers: { voltage: v, hazardVoltage: this.options.hazardVoltage },
        message: `The output is above ${this.options.hazardVoltage} V. Follow your lab's high-voltage rules: interlocked fixture, hands off the probes and the device while the output is on.`,
      });
    }
    if (compliance && !this.complianceSeen) {
      this.complianceSeen = true;
      const at =
        programmed !== undefined && Math.abs(programmed - v) > 1e-3 * Math.max(1, Math.abs(programmed))
          ? `${programmed.toPrecision(4)} V programmed (${v.toPrecision(4)} V measured)`
          : `${v.toPrecision(4)} V`;
      this.emit({
        type: 'caution',
        kind: 'compliance',
        sweep: this.sweep,
        numbers: { voltage: v, current: i, ...(programmed !== undefined ? { programmed } : {}) },
        message: `Compliance reached at ${at}: the instrument no longer holds the programmed bias. Points at compliance are kept in the journal and left out of every fit.`,
      });
    }

    if (verdict) {
      if (verdict.state === 'confirmed') {
        const action =
          this.options.control === false
            ? 'plumbline does not control this instrument: turn its output off with its own controls now'
            : OUTPUT_BEING_TURNED_OFF;
        this.emit({
          type: 'caution',
          kind: 'breakdown-confirmed',
          sweep: this.sweep,
          numbers: verdict.numbers,
          message: `Breakdown: ${verdict.reason}. ${action}. Treat the device as broken; follow your lab's rules before touching the fixture.`,
        });
        decision = { action: 'abort', outcome: 'aborted-breakdown', reason: `breakdown confirmed in sweep ${this.sweep}: ${verdict.reason}` };
        this.emit({ type: 'decision', action: 'abort', reason: decision.reason, sweep: this.sweep, numbers: verdict.numbers });
      } else {
        this.emit({
          type: 'caution',
          kind: 'breakdown-suspected',
          sweep: this.sweep,
          numbers: verdict.numbers,
          message: `Possible breakdown: ${verdict.reason}.`,
        });
      }
    }

    // Clock checks every 16 readings: cheap at a million readings a second, prompt at ten.
    if ((this.k & 15) === 1 || this.k < 16) {
      const now = performance.now();
      if (now - this.lastFitAt >= FIT_INTERVAL_MS && this.v.length >= 3) {
        this.lastFitAt = now;
        this.publishFit(false);
      }
      if (now - this.lastProgressAt >= PROGRESS_INTERVAL_MS) {
        this.lastProgressAt = now;
        this.publishProgress(now);
      }
    }
    return decision;
  }

  /**
   * Where a reading sits on the breakdown watch's trend plot: the mechanism's own plot for log
   * mechanisms (a straight line where the mechanism holds), ln I against ln V otherwise; undefined
   * at zero bias or for a current against the bias. A change of polarity starts a new trend.
   */
  private trendPoint(v: number, i: number): { x: number; y: number } | undefined {
    const b = v - this.inputs.flatBand;
    if (!Number.isFinite(b) || !Number.isFinite(i) || b === 0 || i * b <= 0) return undefined;
    const sign = b > 0 ? 1 : -1;
    if (sign !== this.trendSign) {
      this.trendSign = sign;
      this.breakdown?.resetTrend();
    }
    if (this.mech.yKind === 'log' && this.mech.bias === 'magnitude') {
      return transformPoint(this.mech, this.inputs, v, i, sign, this.area, this.tp) === undefined ? { x: this.tp.x, y: this.tp.y } : undefined;
    }
    return { x: Math.log(Math.abs(b)), y: Math.log(Math.abs(i)) };
  }

  /**
   * Readings at zero bias or against the bias carry no signal (a passive film, a dark diode): their
   * robust RMS is the noise floor the breakdown watch ignores, and the floor a later sweep's fit
   * uses when it reads none of its own. Skipped when they are large compared with the currents seen
   * (a photocurrent or a built-in field makes them real). For the fit, the floor must also show
   * itself as noise: a reading against the bias, or zero-bias readings of both signs (a device whose
   * zero-bias current is steady and of one sign carries a current there, not noise).
   */
  private noteNull(v: number, i: number, flags: number): void {
    const sigma = this.nulls.note(v, i, flags, this.inputs.flatBand);
    if (sigma !== undefined && sigma <= 0.01 * this.nulls.maxCurrent) this.breakdown?.setNoiseFloor(sigma);
  }

  rejected(raw: string, reason: string): void {
    this.emit({ type: 'rejected', raw: raw.slice(0, 200), reason });
  }

  private publishProgress(now: number): void {
    const sweeps = this.options.sweeps ?? 0;
    const per = this.options.pointsPerSweep ?? 0;
    const done = (this.sweep - 1) * per + this.k;
    const total = sweeps * per;
    const elapsed = (now - this.t0) / 1000;
    // From the plan's own timing when the run gives it; else from the pace so far, only while the
    // plan's shape holds (every sweep of the same length).
    const eta = this.remaining ? this.remaining() : total > 0 && done > 0 && done <= total ? (elapsed / done) * (total - done) : null;
    // The points of this sweep (a stress interval, a ramp), not the longest sweep of the plan.
    const points = Math.max(this.planned || per, this.k);
    this.emit({ type: 'progress', sweep: this.sweep, sweeps: Math.max(sweeps, this.sweep), point: this.k, points, eta });
  }

  /**
   * The temperature of the sweep under way, K, when the data carry their own (a temperature column
   * read by `watch`): its fits use it in place of the analysis setting's, which would put every sweep
   * of a temperature series at one temperature (a Poole–Frenkel film's ε_r then drifts from 4.0 to
   * 6.3 across 300–375 K while nothing in the film changed).
   */
  setSweepTemperature(t: number | undefined): void {
    this.sweepTemperature = t !== undefined && t > 0 && Number.isFinite(t) ? t : undefined;
  }

  /** What this sweep's fits depend on besides its readings: the settings, the sweep's temperature, the run's floor. */
  private context(): SweepFitContext {
    const knownFloor = this.nulls.trusted();
    return {
      analysis: this.analysis,
      complianceLimit: this.options.complianceLimit,
      ...(this.sweepTemperature !== undefined ? { temperature: this.sweepTemperature } : {}),
      ...(knownFloor ? { knownFloor } : {}),
    };
  }

  private fitNow(v: number[], i: number[], c: number[], regimes = true, quick = false): { fit: FitSummary | null; error?: string; report?: FitReport } {
    return fitReadings(v, i, c, this.context(), regimes, quick);
  }

  /** The fit of the sweep so far, without publishing it (adaptive plans decide from it). */
  fitSoFar(): { fit: FitSummary | null; error?: string } {
    const r = this.fitNow(this.v, this.i, this.c, false);
    return { fit: r.fit, ...(r.error ? { error: r.error } : {}) };
  }

  private publishFit(final: boolean): { fit: FitSummary | null } {
    // The regime search is left to the linearized view (computed only while a page watches): the
    // fit events carry the line and parameters, and the chain keeps its pace without a page.
    const r = final ? finalFit(this.v, this.i, this.c, this.context()) : this.fitNow(this.v, this.i, this.c, false, true);
    const solar = final ? (r as ReturnType<typeof finalFit>).solar : undefined;
    this.emit({ type: 'fit', sweep: this.sweep, final, fit: r.fit, ...(r.error ? { error: r.error } : {}), ...(solar ? { solar } : {}) });
    this.publishView(this.sweep, final, this.v, this.i, this.c);
    return r;
  }

  private solarNow(v: number[], i: number[], c: number[]): SolarSummary | undefined {
    return solarOfReadings(v, i, c, this.context());
  }

  private publishView(sweep: number, final: boolean, v: number[], i: number[], c: number[]): void {
    if (!(this.options.viewsWanted ? this.options.viewsWanted() : this.views$.observed) || atOneBias(v, unheld(c))) return;
    try {
      const view = plotView(readingData(v, i, c), sweepRequest(this.context(), true));
      this.views$.next({ sweep, final, view });
    } catch {
      /* a view the data cannot give is simply not drawn; the fit event carries the reason */
    }
  }

  /** The sweep of the last ranking published, and the last complete sweep the interval skipped. */
  private rankedSweep = 0;
  private rankingSkipped: { sweep: number; v: number[]; i: number[]; c: number[] } | undefined;

  private publishRanking(force = false, data = { sweep: this.sweep, v: this.v, i: this.i, c: this.c }): void {
    const now = performance.now();
    if (data.v.length > RANKING_MAX_POINTS || atOneBias(data.v, unheld(data.c))) return;
    if (!force && now - this.lastRankingAt < RANKING_INTERVAL_MS) {
      // Too soon after the last one (fast sweeps): kept, so the run's last sweep is ranked at its end.
      this.rankingSkipped = data;
      return;
    }
    this.lastRankingAt = now;
    this.rankedSweep = data.sweep;
    this.rankingSkipped = undefined;
    try {
      const r = rankMechanisms(readingData(data.v, data.i, data.c), {
        inputs: sweepInputs(this.context()),
        window: this.analysis.window,
        complianceLimit: this.options.complianceLimit,
      });
      this.emit({
        type: 'ranking',
        sweep: data.sweep,
        ranking: r.ranking.map((e) => ({ model: e.model, title: e.title, score: e.score, deltaAicc: e.deltaAicc, plausible: e.plausible, reasons: e.reasons })),
        warnings: r.warnings,
      });
    } catch {
      /* too few points for any mechanism: no ranking for this sweep */
    }
  }

  private safeRanking(data: { sweep: number; v: number[]; i: number[]; c: number[] }): void {
    try {
      this.publishRanking(true, data);
    } catch {
      /* a ranking is never worth failing the run's end over */
    }
  }

  /**
   * Ends the sweep: final fit, drift chart, decisions. Returns a decision when the run must stop
   * (after this sweep) or abort.
   */
  endSweep(complete: boolean, note?: string): Decision | undefined {
    this.sweepInProgress = false;
    this.emit({ type: 'sweep-end', sweep: this.sweep, points: this.k, complete, ...(note ? { note } : {}) });
    const { fit } = this.publishFit(true);
    if (complete) this.publishRanking();
    this.lastFinal = { sweep: this.sweep, v: this.v, i: this.i, c: this.c };
    this.sweepsDone++;
    this.publishProgress(performance.now());
    const decision = complete ? this.chartDrift(fit) : undefined;
    return decision ?? this.stopRequested;
  }

  private chartDrift(fit: FitSummary | null): Decision | undefined {
    if (!this.drift) return undefined;
    const cfg = this.options.drift;
    if (fit) this.checkDriftParameter(fit);
    const name = cfg.parameter ?? (fit ? Object.keys(fit.parameters)[0] : undefined);
    if (name === undefined) return undefined;
    if (this.driftParameter !== undefined && name !== this.driftParameter) {
      // Another parameter (another model): its values are not comparable with the old baseline.
      this.drift = new DriftChart(cfg);
    }
    this.driftParameter = name;
    const p = fit?.parameters[name];
    const point = this.drift.add(p?.value, p?.stdErr);
    this.emit({ type: 'drift', sweep: this.sweep, parameter: name, value: p?.value ?? null, ...(p ? { unit: p.unit } : {}), method: cfg.method, ...point });
    const numbers: Record<string, number> = {};
    for (const [k, x] of Object.entries({
      value: p?.value,
      statistic: point.statistic,
      center: point.center,
      lower: point.lower,
      upper: point.upper,
      sigma: point.sigma,
    })) {
      if (typeof x === 'number') numbers[k] = x;
    }
    // Words for people: the trade's unit, none for a dimensionless value (the numbers stay SI).
    const du = displayUnit(p?.unit ?? '', name);
    const unit = du.unit ? ` ${du.unit}` : '';
    const q = (x: number | null | undefined, digits: number) => formatNumber((x ?? Number.NaN) * du.scale, digits);
    const stat =
      point.statistic === null
        ? ''
        : cfg.method === 'ewma'
          ? `EWMA ${q(point.statistic, 5)}${unit} outside [${q(point.lower, 5)}, ${q(point.upper, 5)}]${unit}`
          : `CUSUM ${q(point.statistic, 3)}${unit} beyond ±${q(point.upper, 3)}${unit}`;
    const trend = this.drift.baselineTrend;
    if (trend && point.phase === 'baseline' && point.center !== null) {
      // The baseline just closed on sweeps that trend: the limits it sets are wide.
      const first = this.sweep - trend.sweeps + 1;
      this.emit({
        type: 'caution',
        kind: 'drift-baseline-trend',
        sweep: this.sweep,
        numbers: { slope: trend.slope, slopeStdErr: trend.stdErr },
        message: `${name} trends through the baseline sweeps ${first}–${this.sweep}: ${trend.slope > 0 ? '+' : ''}${q(trend.slope, 3)}${unit} per sweep (${formatNumber(Math.abs(trend.slope / trend.stdErr), 2)} standard errors). The drift limits built on a moving baseline are wide and the watch may react late: the device may still be settling (let it, then start the baseline again), or the trend is the drift.`,
      });
    }
    if (point.state === 'out-of-control') {
      const reason = `${name} drifted in sweep ${this.sweep}: ${stat} (baseline centre ${q(point.center, 5)}${unit}, σ ${q(point.sigma, 3)}${unit})`;
      this.emit({ type: 'caution', kind: 'drift-limit', sweep: this.sweep, numbers, message: `Drift: ${reason}.` });
      this.emit({ type: 'decision', action: cfg.action, reason, sweep: this.sweep, numbers });
      if (cfg.action !== 'warn') return { action: cfg.action, outcome: 'aborted-drift', reason };
    } else if (point.state === 'warning') {
      this.emit({
        type: 'caution',
        kind: 'drift-warning',
        sweep: this.sweep,
        numbers,
        message: `${name} is moving away from its baseline in sweep ${this.sweep} (beyond the warning line).`,
      });
    }
    return undefined;
  }

  /**
   * A drift watch that is on but has nothing to follow says so, once: the model's fit gives no
   * parameter at all (a straight line through the raw columns), or not the one `drift.parameter`
   * names. Otherwise the watch would do nothing in silence while the config says it guards the run.
   */
  private checkDriftParameter(fit: FitSummary): void {
    if (this.driftUnwatchedSaid) return;
    const cfg = this.options.drift;
    const names = Object.keys(fit.parameters);
    if (cfg.parameter === undefined ? names.length > 0 : names.includes(cfg.parameter)) return;
    this.driftUnwatchedSaid = true;
    const action = `action '${cfg.action}'`;
    const model = `set the analysis model (--model, the page's Analysis form, or analysis.model in the station config)`;
    const message =
      cfg.parameter === undefined
        ? `The drift watch is on (${action}) but the ${fit.model} fit gives no parameter to follow, so no drift is watched in this run. To watch drift, ${model} to one whose fit gives parameters, or turn the watch off (drift.enabled false in the station config).`
        : `The drift watch follows '${cfg.parameter}' (drift.parameter in the station config, ${action}), but the ${fit.model} fit of sweep ${this.sweep} gives ${names.length ? names.map((n) => `'${n}'`).join(', ') : 'no parameter'}: '${cfg.parameter}' is not watched. Set drift.parameter to ${names.length ? 'one of these' : "a parameter the model's fit gives"}, or ${model} to one whose fit gives '${cfg.parameter}'.`;
    this.emit({ type: 'caution', kind: 'drift-not-watched', sweep: this.sweep, message });
  }

  /** Asks the run to stop after the current sweep. */
  requestStop(reason: string): void {
    this.stopRequested = { action: 'stop-after-sweep', outcome: 'stopped', reason };
    this.emit({ type: 'decision', action: 'stop-after-sweep', reason });
  }

  /** New analysis settings: journaled, applied to the next points, and the last finished sweep is re-fitted. */
  setAnalysis(a: AnalysisSettings, source: string): void {
    const mech = getMechanism(a.model);
    const inputs = resolveInputs(mech, a.inputs);
    if (this.drift && (a.model !== this.analysis.model || JSON.stringify(a.inputs) !== JSON.stringify(this.analysis.inputs))) {
      // Another model, or other inputs to it: the charted values change meaning, so the baseline starts again.
      this.drift = new DriftChart(this.options.drift);
      this.driftParameter = undefined;
      this.driftUnwatchedSaid = false;
    }
    this.analysis = a;
    this.mech = mech;
    this.inputs = inputs;
    this.area = mech.usesArea && inputs.area !== undefined ? inputs.area : 1;
    // The breakdown watch's trend lives on the mechanism's plot: in another plot it starts again.
    this.breakdown?.resetTrend();
    this.trendSign = 0;
    this.emit({ type: 'settings', analysis: a, source });
    const last = this.lastFinal;
    if (last) {
      const r = this.fitNow(last.v, last.i, last.c);
      const solar = this.solarNow(last.v, last.i, last.c);
      this.emit({ type: 'fit', sweep: last.sweep, final: true, fit: r.fit, ...(r.error ? { error: r.error } : {}), ...(solar ? { solar } : {}) });
      this.publishView(last.sweep, true, last.v, last.i, last.c);
    }
  }

  end(outcome: RunOutcome, reason: string): void {
    // The page and the journal end on the ranking of the run's last complete sweep, not an earlier one.
    const skipped = this.rankingSkipped;
    if (skipped && skipped.sweep > this.rankedSweep) this.safeRanking(skipped);
    this.emit({ type: 'run-end', outcome, reason, sweeps: this.sweepsDone });
    this.options.journal.close();
    if (!this.options.events) this.events$.complete();
    this.views$.complete();
  }
}
