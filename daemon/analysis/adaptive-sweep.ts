/**
 * Where the next point of an adaptive sweep goes, and when the sweep has learned enough. Pure
 * decisions over the readings so far; the station measures and feeds them back.
 *
 * The plan (our own; the design rules it follows are common practice in regression design):
 *  - while the current sits at the noise floor the mechanism says nothing: coarse steps, a twelfth
 *    of the range each;
 *  - once the current leaves the floor (twenty times the floor seen in the first two readings — the
 *    larger, unless the second is already a hundred times the first — or an absolute floor), fine
 *    steps — a sixtieth of the range, or coarser when the point budget is too small — growing by
 *    60 % per point up to a sixth of the range, so the regime is crossed in a few readings; on an
 *    autoranging instrument, once two regime readings give a secant of ln|I|, each step instead
 *    aims at 85 % of the next decade's top (see `stepToBand`; never more than twice the growing
 *    step, so a shallow secant — a leakage still dominating — does not send the bias far up at
 *    once), so the climb's readings too are taken where their range reads best;
 *  - no step is longer than the one the last two readings' secant (of ln|I| against V) says reaches
 *    the current limit, so the limit is approached, not jumped past (the steps shrink near it);
 *  - after every point in the regime the caller fits the sweep so far and reports the target
 *    parameter's standard error; the sweep stops once it is at or below the target (run/adaptive.ts
 *    asks the error `predictedSlopeError` says the same readings give with a typical instrument's
 *    noise to meet it too, so a chance low error or a noise level misread from a handful of
 *    readings does not stop it);
 *  - when the top is reached (the end of the range, or the current limit) before the target is met,
 *    each further reading goes where it shrinks the slope's variance most: the greedy sequential
 *    c-optimal design (Fedorov 1972, Theory of Optimal Experiments; Atkinson, Donev & Tobias 2007,
 *    Optimum Experimental Designs, with SAS — chapters not checked). The fit the station makes is
 *    the mechanism's line, ln I = a + b·x, plus a leakage current G·V held alongside it (for the
 *    mechanisms that carry one); near G = 0 its information matrix M = Σ w·f·fᵀ has rows
 *    f = (1, x, V/I) — (1, x) without leakage — and weights w = 1/σ²(ln I), σ = g + (o·R + floor)/|I|
 *    with R the autorange decade that reads the current and the floor a robust RMS of the readings
 *    before the onset (see ASSUMED_GAIN). A reading with row f lowers var(b) = (M⁻¹)_bb by
 *    w·(M⁻¹f)_b² / (1 + w·fᵀM⁻¹f) (Sherman–Morrison), and the level that lowers it most is read
 *    next. For a plain line and equal relative noise this settles on two levels, the top and one
 *    far below it where the floor does not yet swamp the reading (two support points: Elfving 1952,
 *    Ann. Math. Statist. 23, 255; with equal noise the two ends — Box, Hunter & Hunter 2005,
 *    Statistics for Experimenters); with the leakage term the lower level moves up, since the
 *    lowest currents then go to pin G rather than the slope. Candidates are the regime levels
 *    already read, whose currents are known, and on an autoranging instrument the band just below
 *    each decade's top (45–90 % of it) that the readings span, placed by joining the readings in
 *    ln|I|: there the range's offset weighs least, so the fill reads at the top of a decade rather
 *    than just past it. Each choice of a level is spread over one fine step (just below the top at
 *    the top), and each choice of a band over the band, so the readings stay distinct and the noise
 *    estimate from neighbouring readings still works. Downward moves are free; upward ones go only
 *    to levels (and bands) below the highest level read under the current limit. The fill ends
 *    after twice as many readings as a fine-step return leg over the regime would take;
 *  - compliance or the point budget end the sweep at once; every stop says why;
 *  - later sweeps of the same run reuse what the first learned (the floor, where the regime starts,
 *    the fill's low end and the top): they begin at the low end, climb to the top in steps that
 *    double (still under the secant's limit, so a device that has grown leakier is not pushed past
 *    the current limit) and fill the two ends at once. They never go above the earlier top: the
 *    stress an earlier sweep showed to be enough is not exceeded.
 */

import { robustRms } from './noise-floor.js';
import { invertSmall } from './small-matrix.js';

/** Growth of the step from one regime point to the next. */
const GROWTH = 1.6;
/** Growth of the step on a later sweep, which knows the regime already. */
const GROWTH_KNOWN = 2;
/** The golden ratio's fractional part, for evenly spread offsets. */
const GOLDEN = (Math.sqrt(5) - 1) / 2;
/**
 * The noise of a current reading assumed when placing the fill: σ_I = g·|I| + o·R, the "% of reading
 * + offset of the range" form in which source-measure units state their accuracy, with R the range
 * in use (common practice on data sheets; the figures — 0.05 % of reading, 0.02 % of the range —
 * are typical of them, from memory). The station sets the instrument to autorange, and autoranging
 * steps in decades, so a current just below a decade's top is read on that range (σ/I ≈ g + o) and
 * one just above it on the next (σ/I ≈ g + 10·o): up to three times the noise, ten times less
 * information, for nearly the same bias. The fit estimates the noise it uses from the readings; these
 * figures only decide where the readings go.
 */
const ASSUMED_GAIN = 5e-4;
const ASSUMED_RANGE_OFFSET = 2e-4;
/** The band of a decade the fill aims at: currents between these fractions of the decade's top. */
const BAND_LOW = 0.45;
const BAND_HIGH = 0.9;

/** The autorange decade that reads a current: the smallest power of ten at or above it, A. */
export function rangeOf(a: number): number {
  const r = 10 ** Math.ceil(Math.log10(a));
  return r < a * (1 - 1e-12) ? r * 10 : r;
}

/** A level the fill may read at: a level already read, or a band just below a decade's top (currents lo…hi, A). */
interface Candidate {
  readonly v: number;
  /** The current expected there, A. */
  readonly a: number;
  readonly band?: { readonly lo: number; readonly hi: number };
}

export type StopReason = 'target-reached' | 'current-limit' | 'compliance' | 'bias-limit' | 'earlier-top' | 'point-budget';

export const STOP_MEANING: Record<StopReason, string> = {
  'target-reached': 'the parameter reached its target standard error',
  'current-limit': "the current reached the plan's current limit",
  compliance: 'the instrument reached its compliance',
  'bias-limit': 'the bias reached the end of the range',
  'earlier-top': 'the bias reached the highest level an earlier sweep needed (a later sweep goes no higher)',
  'point-budget': 'the sweep used all of its points',
};

export interface AdaptiveSettings {
  readonly start: number;
  readonly stop: number;
  readonly maxPoints: number;
  /** |I| at which the sweep stops, A. */
  readonly currentLimit: number;
  /** Below this |I| a reading counts as floor whatever the first readings say, A. */
  readonly absoluteFloor?: number;
  /** The fit's x axis as a function of the bias, V (default: the bias itself). */
  readonly axis?: (v: number) => number;
  /** The fit holds a leakage conductance alongside the line (default false). */
  readonly leakage?: boolean;
  /**
   * The instrument's current offset as a fraction of the range it reads on (default
   * ASSUMED_RANGE_OFFSET, for an autoranging instrument); 0 for one held on a single range, where
   * no part of a decade reads better than another.
   */
  readonly rangeOffset?: number;
}

/** What one sweep learned, for the next one. */
export interface SweepKnowledge {
  /** Bias where the current left the floor, V. */
  readonly onset: number;
  /** The floor current, A. */
  readonly floor: number;
  /** σ of a reading at the floor: the robust RMS of the readings before the onset (what the fill's weights use), A. */
  readonly floorSigma?: number;
  /** The low end the fill used, V. */
  readonly low?: number;
  /** The top the fill used (the highest level read below the current limit), V, and what bounded it. */
  readonly top?: number;
  readonly topReason?: StopReason;
}

export class AdaptiveSweep {
  private readonly dir: number;
  private readonly span: number;
  readonly coarse: number;
  readonly fine: number;
  private readonly v: number[] = [];
  private readonly i: number[] = [];
  private floor: number | undefined;
  private onset: number | undefined;
  private stopped: StopReason | undefined;
  private filling: { high: number; cands: Candidate[]; uses: number[]; info: Information; left: number; why: StopReason } | undefined;
  /** The fill's ends once chosen, for the next sweep. */
  private ends: { low: number; top: number; why: StopReason } | undefined;

  constructor(
    readonly settings: AdaptiveSettings,
    readonly prior?: SweepKnowledge,
  ) {
    this.dir = Math.sign(settings.stop - settings.start) || 1;
    this.span = Math.abs(settings.stop - settings.start);
    this.coarse = this.span / 12;
    this.fine = Math.max(this.span / 60, this.span / Math.max(1, settings.maxPoints - 12));
    if (prior) this.floor = prior.floor;
  }

  /** The first bias of the sweep: the start, or on a later sweep the earlier sweep's low end (the station ramps there). */
  first(): number {
    return this.prior ? this.entry() : this.settings.start;
  }

  /** Where a later sweep enters the regime: the earlier low end (a fine step below its onset when it had none). */
  private entry(): number {
    const p = this.prior as SweepKnowledge;
    return this.clamp(p.low ?? p.onset - this.dir * this.fine);
  }

  private clamp(v: number): number {
    const s = this.settings;
    return this.dir > 0 ? Math.max(s.start, Math.min(v, s.stop)) : Math.min(s.start, Math.max(v, s.stop));
  }

  /** Whether a reading is in the regime the fit can use (off the floor). */
  private offFloor(a: number): boolean {
    const f = Math.max(this.floor ?? 0, this.settings.absoluteFloor ?? 0);
    return a > 20 * f && a > 0;
  }

  /** Records a reading; returns the next bias, or the reason to stop. */
  add(v: number, i: number, atCompliance: boolean): { next: number } | { stop: StopReason } {
    this.v.push(v);
    this.i.push(i);
    const a = Math.abs(i);
    const s = this.settings;
    if (atCompliance) return this.end('compliance');
    if (this.v.length >= s.maxPoints) return this.end('point-budget');
    // The floor: what the first two readings show, while they are still off the regime.
    if (this.floor === undefined && this.v.length >= 2) {
      const sorted = this.i
        .slice(0, 2)
        .map(Math.abs)
        .sort((x, y) => x - y);
      // The larger of the two, unless the second already carries signal (far above the first).
      this.floor = sorted[1] > 100 * Math.max(sorted[0], this.settings.absoluteFloor ?? 0) ? sorted[0] : sorted[1];
    }
    if (this.onset === undefined && this.floor !== undefined && this.offFloor(a)) this.onset = v;
    if (this.filling) {
      if (a > 0 && a < s.currentLimit) this.filling.info.add(this.row(v, a));
      return this.fill();
    }
    if (a >= s.currentLimit) return this.startFill(this.previousLevel(v), 'current-limit');
    // A later sweep that knows the top fills as soon as it gets there.
    const top = this.prior?.top;
    if (top !== undefined && (v - top) * this.dir >= -1e-12) return this.startFill(v, this.prior?.topReason ?? 'bias-limit');
    // Later sweeps start at the regime already: fine steps from their first reading.
    const inRegime = this.onset !== undefined || this.prior !== undefined;
    const m = this.onset !== undefined ? this.regimePoints - 1 : this.v.length - 1;
    let step = inRegime ? Math.min(this.span / 6, this.fine * GROWTH ** Math.max(0, m)) : this.coarse;
    const toBand = top === undefined && this.regimePoints >= 2 ? this.stepToBand(v, a) : undefined;
    if (toBand !== undefined) step = Math.min(2 * step, this.span / 6, Math.max(0.25 * this.fine, toBand));
    if (top !== undefined) {
      // Known ground: the steps double up to a quarter of the way left, and stop at the top.
      step = Math.min(Math.max(this.coarse, Math.abs(top - this.entry()) / 4), this.fine * GROWTH_KNOWN ** Math.max(0, this.regimePoints - 1));
      step = Math.min(step, (top - v) * this.dir);
    }
    // No step is to carry the current far past the limit: ln|I| is extrapolated along the secant of
    // the last two readings. Every mechanism of a film or junction bends over (its ln|I| slope falls
    // as the bias rises), so the secant overestimates the next current and the step errs short.
    const room = this.roomToLimit(v, a);
    if (room < step) {
      if (room < 0.25 * this.fine) return this.startFill(v, 'current-limit');
      step = room;
    }
    const next = v + this.dir * step;
    const beyond = this.dir > 0 ? next > s.stop + 1e-12 : next < s.stop - 1e-12;
    if (beyond) {
      const atEnd = Math.abs(v - s.stop) <= 1e-12;
      return atEnd ? this.startFill(v, 'bias-limit') : { next: s.stop };
    }
    return { next };
  }

  /**
   * On an autoranging instrument, the step that the secant of the last two regime readings says
   * carries the current into the next band just below a decade's top (aimed at 85 % of the decade:
   * the secant overestimates the rise of a curve that bends over, so the reading lands lower, inside
   * the band rather than just past the decade). Undefined without a rising secant.
   */
  private stepToBand(v: number, a: number): number | undefined {
    const slope = this.rangeOffset > 0 ? this.secant(v, a) : undefined;
    if (slope === undefined) return undefined;
    const d = rangeOf(a);
    const aim = a < BAND_LOW * d ? 0.85 * d : 8.5 * d;
    return Math.log(aim / a) / slope;
  }

  /** The level read before the last one that stayed below the current limit. */
  private previousLevel(v: number): number {
    for (let k = this.v.length - 2; k >= 0; k--) if (Math.abs(this.i[k]) < this.settings.currentLimit) return this.v[k];
    return v;
  }

  /** Bias left before the secant of the last two readings reaches the current limit, V (Infinity when it does not rise). */
  private roomToLimit(v: number, a: number): number {
    const slope = this.secant(v, a);
    return slope === undefined ? Infinity : Math.log(this.settings.currentLimit / a) / slope;
  }

  /** The rise of ln|I| per volt between the last two readings (v, a the last), or undefined when it does not rise. */
  private secant(v: number, a: number): number | undefined {
    const k = this.v.length - 1;
    if (k < 1) return undefined;
    const a0 = Math.abs(this.i[k - 1]);
    const dv = (v - this.v[k - 1]) * this.dir;
    if (!(a0 > 0) || !(a > a0) || !(dv > 0)) return undefined;
    return Math.log(a / a0) / dv;
  }

  /**
   * The top is reached and the target not yet met: further readings alternate between the two ends
   * of the regime. `top` is the highest level read below the current limit; `why` is the stop reason
   * if the regime was never reached, or when the fill is used up.
   */
  private startFill(top: number, why: StopReason): { next: number } | { stop: StopReason } {
    if (this.onset === undefined) return this.end(why);
    // A regime of one level (the limit came at once) has no range to fill.
    if ((top - this.onset) * this.dir <= 0) return this.end(why);
    const k0 = this.v.indexOf(this.onset);
    const info = this.information();
    const cands: Candidate[] = [];
    for (let k = k0; k < this.v.length; k++) {
      const a = Math.abs(this.i[k]);
      if (!(a > 0) || a >= this.settings.currentLimit) continue;
      // Candidates: distinct regime levels at or below the top, with the current read there.
      const above = (this.v[k] - top) * this.dir > 1e-12;
      const below = (this.v[k] - this.lowest) * this.dir < -1e-12;
      if (!above && !below && !cands.some((c) => Math.abs(c.v - this.v[k]) < 1e-12)) cands.push({ v: this.v[k], a: this.currentAt(this.v[k]) });
    }
    if (cands.length < 2) return this.end(why);
    this.ends = { low: cands.reduce((m, c) => ((c.v - m) * this.dir < 0 ? c.v : m), top), top, why };
    cands.push(...this.bands(top));
    const left = Math.max(4, Math.round((2 * Math.abs(top - this.onset)) / this.fine));
    this.filling = { high: top, cands, uses: cands.map(() => 0), info, left, why };
    return this.fill();
  }

  /** The information matrix of the regime's readings so far. */
  private information(leakage = this.settings.leakage ?? false): Information {
    const info = new Information(leakage);
    const k0 = this.onset !== undefined ? this.v.indexOf(this.onset) : this.v.length;
    for (let k = k0; k < this.v.length; k++) {
      const a = Math.abs(this.i[k]);
      if (a > 0 && a < this.settings.currentLimit) info.add(this.row(this.v[k], a));
    }
    return info;
  }

  /**
   * The slope's standard error that the regime's readings so far would give if each carried the
   * noise assumed for placing the fill (ASSUMED_GAIN, ASSUMED_RANGE_OFFSET, the floor), in the fit's
   * own units (undefined before three regime readings, or when they cannot fix a slope). `leakage`:
   * whether the fit holds a leakage term beside its line.
   */
  predictedSlopeError(leakage: boolean): number | undefined {
    if (this.regimePoints < 3) return undefined;
    return this.information(leakage && (this.settings.leakage ?? false)).slopeError();
  }

  /** A reading's row of the information matrix and its weight (see the header). */
  private row(v: number, a: number): { f: number[]; w: number } {
    const floor = Math.max(this.floorSigma() ?? this.floor ?? 0, this.settings.absoluteFloor ?? 0);
    const sigma = ASSUMED_GAIN + (this.rangeOffset * rangeOf(a) + floor) / a;
    const x = this.settings.axis ? this.settings.axis(v) : v;
    return { f: this.settings.leakage ? [1, x, Math.abs(v) / a] : [1, x], w: 1 / (sigma * sigma) };
  }

  /**
   * The bands just below each decade's top that the regime's readings span (from the lowest regime
   * level to the top): there a reading is taken on the lower range, with the least offset.
   */
  private bands(top: number): Candidate[] {
    if (!(this.rangeOffset > 0)) return [];
    const lowA = this.currentAt(this.lowest);
    const topA = this.currentAt(top);
    if (!(lowA > 0) || !(topA > lowA)) return [];
    const out: Candidate[] = [];
    for (let d = rangeOf(lowA / BAND_LOW); BAND_HIGH * d <= topA; d *= 10) {
      const lo = BAND_LOW * d;
      const hi = BAND_HIGH * d;
      const mid = Math.sqrt(lo * hi);
      const v = this.biasFor(mid, top);
      if (v !== undefined) out.push({ v, a: mid, band: { lo, hi } });
    }
    return out;
  }

  /**
   * The bias at which the regime's readings, joined by straight lines in ln|I| (in bias order), first
   * reach the current `a`, at or below `top` (undefined when they do not).
   */
  private biasFor(a: number, top: number): number | undefined {
    const k0 = this.onset !== undefined ? this.v.indexOf(this.onset) : 0;
    const pts: [number, number][] = [];
    for (let k = k0; k < this.v.length; k++) {
      const c = Math.abs(this.i[k]);
      if (c > 0 && c < this.settings.currentLimit && (this.v[k] - top) * this.dir <= 1e-12) pts.push([this.v[k] * this.dir, Math.log(c)]);
    }
    pts.sort((p, q) => p[0] - q[0]);
    const t = Math.log(a);
    for (let j = 1; j < pts.length; j++) {
      const [x0, y0] = pts[j - 1];
      const [x1, y1] = pts[j];
      if (y0 <= t && t <= y1 && y1 > y0 && x1 > x0) return (x0 + ((t - y0) / (y1 - y0)) * (x1 - x0)) * this.dir;
    }
    return undefined;
  }

  private get rangeOffset(): number {
    return this.settings.rangeOffset ?? ASSUMED_RANGE_OFFSET;
  }

  /** The current read at a level (the last reading there), A. */
  private currentAt(v: number): number {
    const k = this.v.lastIndexOf(v);
    return k >= 0 ? Math.abs(this.i[k]) : 0;
  }

  private fill(): { next: number } | { stop: StopReason } {
    const f = this.filling as NonNullable<AdaptiveSweep['filling']>;
    if (f.left <= 0) return this.end(f.why);
    f.left--;
    let best = -1;
    let gain = -Infinity;
    for (let c = 0; c < f.cands.length; c++) {
      const g = f.info.slopeGain(this.row(f.cands[c].v, f.cands[c].a));
      if (g > gain) {
        gain = g;
        best = c;
      }
    }
    if (best < 0) return this.end(f.why);
    const cand = f.cands[best];
    const at = cand.v;
    // Offsets follow the golden-ratio sequence frac(n·φ), which fills an interval evenly whatever
    // the count (Weyl 1916), so the readings around a chosen level stay distinct.
    const u = (++f.uses[best] * GOLDEN) % 1;
    if (cand.band) {
      // Within the band, evenly in ln I, at the bias the readings so far say gives that current.
      const v = this.biasFor(cand.band.lo * (cand.band.hi / cand.band.lo) ** u, f.high);
      if (v !== undefined) return { next: v };
    }
    const atTop = Math.abs(at - f.high) < 1e-12;
    const inside = (x: number) => (this.dir > 0 ? x >= this.lowest && x <= f.high : x <= this.lowest && x >= f.high);
    if (atTop) return { next: f.high - this.dir * this.fine * u };
    // Around any other level; mirrored at the lowest level read, so the readings stay inside the regime.
    const level = at + this.dir * this.fine * (u - 0.5);
    const mirrored = at + this.dir * this.fine * (0.5 - u);
    return { next: inside(level) ? level : inside(mirrored) ? mirrored : at };
  }

  /** The lowest regime level read (the onset; an earlier sweep's onset on a later sweep), V. */
  private get lowest(): number {
    const own = this.onset ?? this.settings.start;
    const before = this.prior?.onset;
    return before !== undefined && (before - own) * this.dir < 0 ? before : own;
  }

  /** The caller's verdict after a fit: the target error is reached. */
  targetReached(): StopReason {
    return this.end('target-reached').stop;
  }

  /** Whether the sweep has left the floor (fits can start). */
  get inRegime(): boolean {
    return this.onset !== undefined;
  }

  /** Readings in the regime so far. */
  get regimePoints(): number {
    if (this.onset === undefined) return 0;
    const k = this.v.indexOf(this.onset);
    return this.v.length - k;
  }

  get stopReason(): StopReason | undefined {
    return this.stopped;
  }

  /** σ of a floor reading, from the first sweep's readings before the onset, A. */
  private floorSigma(): number | undefined {
    if (this.prior) return this.prior.floorSigma;
    const k0 = this.onset !== undefined ? this.v.indexOf(this.onset) : this.v.length;
    if (k0 < 1) return undefined;
    // Robust (the fit's floor estimate takes the same form), so the last readings before the
    // onset, already carrying a little signal, do not raise it. Of one or two readings it is
    // median-unbiased (median I²/0.4549 has σ² as its median), not mean-unbiased as an RMS is.
    return robustRms(this.i.slice(0, k0));
  }

  /** What this sweep learned (the earlier knowledge when it never left the floor). */
  knowledge(): SweepKnowledge | undefined {
    if (this.onset === undefined || this.floor === undefined) return this.prior;
    const quiet = this.floorSigma();
    // A later sweep's onset is where it started; the regime's own start stays the earliest one seen.
    const onset = this.prior && (this.prior.onset - this.onset) * this.dir < 0 ? this.prior.onset : this.onset;
    // The top a later sweep may not pass: the fill's, an earlier sweep's, or — when the target was
    // reached on the way up, or a limit stopped the climb — the highest level this sweep read (the
    // stress shown to be enough, or all the device takes). Only levels whose reading stayed below
    // the current limit count. A sweep that ran out of points on the way up sets no top: where it
    // stopped says nothing about the device.
    let highest: number | undefined;
    for (let k = 0; k < this.v.length; k++) {
      if (!(Math.abs(this.i[k]) < this.settings.currentLimit)) continue;
      if (highest === undefined || (this.v[k] - highest) * this.dir > 0) highest = this.v[k];
    }
    const limited = this.stopped === 'current-limit' || this.stopped === 'compliance';
    const ends =
      this.ends ??
      (this.prior?.top !== undefined
        ? { low: this.prior.low, top: this.prior.top, why: this.prior.topReason }
        : highest !== undefined && (limited || this.stopped === 'target-reached' || this.stopped === 'bias-limit')
          ? { low: undefined, top: highest, why: (limited ? 'current-limit' : this.stopped === 'bias-limit' ? 'bias-limit' : 'earlier-top') as StopReason }
          : undefined);
    return {
      onset,
      floor: this.floor,
      ...(quiet !== undefined ? { floorSigma: quiet } : {}),
      ...(ends?.low !== undefined ? { low: ends.low } : {}),
      ...(ends?.top !== undefined ? { top: ends.top, ...(ends.why ? { topReason: ends.why } : {}) } : {}),
    };
  }

  private end(r: StopReason): { stop: StopReason } {
    this.stopped = r;
    return { stop: r };
  }
}

/**
 * The information matrix Σ w·f·fᵀ of a line (rows (1, x)) or a line with a leakage term (rows
 * (1, x, V/I)), and how much one more reading would lower the slope's variance. Columns are scaled
 * by the first rows' magnitudes before inverting (x in V/m and V/I in Ω are far apart), which
 * leaves the choice of level unchanged.
 */
export class Information {
  private readonly m: number[][];
  private readonly scale: number[];
  private rows = 0;
  /** M⁻¹, kept until the next reading changes M (every candidate of one choice shares it). */
  private inverse: number[][] | undefined | null = null;

  constructor(leakage: boolean) {
    const p = leakage ? 3 : 2;
    this.m = Array.from({ length: p }, () => new Array(p).fill(0));
    this.scale = new Array(p).fill(0);
  }

  add(r: { f: number[]; w: number }): void {
    const p = this.m.length;
    if (this.rows === 0) for (let j = 0; j < p; j++) this.scale[j] = Math.abs(r.f[j]) || 1;
    this.rows++;
    const f = r.f.map((x, j) => x / this.scale[j]);
    for (let a = 0; a < p; a++) for (let b = 0; b < p; b++) this.m[a][b] += r.w * f[a] * f[b];
    this.inverse = null;
  }

  /** √(M⁻¹)_bb: the slope's standard error, in the slope's units (undefined when M is singular). */
  slopeError(): number | undefined {
    if (this.inverse === null) this.inverse = invertSmall(this.m);
    const v = this.inverse?.[1][1];
    return v !== undefined && v > 0 ? Math.sqrt(v) / this.scale[1] : undefined;
  }

  /** w·(M⁻¹f)_b² / (1 + w·fᵀM⁻¹f): the fall in var(b) one reading with row f brings (0 when M is singular). */
  slopeGain(r: { f: number[]; w: number }): number {
    if (this.inverse === null) this.inverse = invertSmall(this.m);
    const inv = this.inverse;
    if (!inv) return 0;
    const p = this.m.length;
    const f = r.f.map((x, j) => x / this.scale[j]);
    const u = inv.map((row) => row.reduce((acc, x, j) => acc + x * f[j], 0));
    let q = 0;
    for (let j = 0; j < p; j++) q += f[j] * u[j];
    return (r.w * u[1] * u[1]) / (1 + r.w * q);
  }
}
