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
 *    60 % per point up to a sixth of the range, so the regime is crossed in a few readings;
 *  - no step is longer than the one the last two readings' secant (of ln|I| against V) says reaches
 *    the current limit, so the limit is approached, not jumped past (the steps shrink near it);
 *  - after every point in the regime the caller fits the sweep so far and reports the target
 *    parameter's standard error; the sweep stops once it is at or below the target (run/adaptive.ts
 *    asks for three regime readings in a row that meet it, so a chance low error does not stop it);
 *  - when the top is reached (the end of the range, or the current limit) before the target is met,
 *    each further reading goes where it shrinks the slope's variance most: the greedy sequential
 *    c-optimal design (Fedorov 1972, Theory of Optimal Experiments; Atkinson, Donev & Tobias 2007,
 *    Optimum Experimental Designs, with SAS — chapters not checked). The fit the station makes is
 *    the mechanism's line, ln I = a + b·x, plus a leakage current G·V held alongside it (for the
 *    mechanisms that carry one); near G = 0 its information matrix M = Σ w·f·fᵀ has rows
 *    f = (1, x, V/I) — (1, x) without leakage — and weights w = 1/σ²(ln I), σ = g + floor/|I| with
 *    the floor the RMS of the readings before the onset. A reading with row f
 *    lowers var(b) = (M⁻¹)_bb by w·(M⁻¹f)_b² / (1 + w·fᵀM⁻¹f) (Sherman–Morrison), and the level that
 *    lowers it most is read next. For a plain line this settles on two levels, the top and one far
 *    below it where the floor does not yet swamp the reading (two support points: Elfving 1952,
 *    Ann. Math. Statist. 23, 255; with equal noise the two ends — Box, Hunter & Hunter 2005,
 *    Statistics for Experimenters); with the leakage term the lower level moves up, since the
 *    lowest currents then go to pin G rather than the slope. Candidates are the regime levels already read, whose currents are known; each
 *    choice is spread over one fine step (just below the top at the top) so the levels stay
 *    distinct and the noise estimate from neighbouring readings still works. Downward moves are
 *    free; upward ones go only to levels already read below the current limit. The fill ends
 *    after twice as many readings as a fine-step return leg over the regime would take;
 *  - compliance or the point budget end the sweep at once; every stop says why;
 *  - later sweeps of the same run reuse what the first learned (the floor, where the regime starts,
 *    the fill's low end and the top): they begin at the low end, climb to the top in steps that
 *    double (still under the secant's limit, so a device that has grown leakier is not pushed past
 *    the current limit) and fill the two ends at once. They never go above the earlier top: the
 *    stress an earlier sweep showed to be enough is not exceeded.
 */

import { invertSmall } from './small-matrix.js';

/** Growth of the step from one regime point to the next. */
const GROWTH = 1.6;
/** Growth of the step on a later sweep, which knows the regime already. */
const GROWTH_KNOWN = 2;
/** The golden ratio's fractional part, for evenly spread offsets. */
const GOLDEN = (Math.sqrt(5) - 1) / 2;
/**
 * Relative noise of a reading assumed when placing the fill (0.1 % of reading: the gain term of a
 * source-measure unit's accuracy, common practice on data sheets). The fit estimates its own; this
 * only decides where readings go.
 */
const ASSUMED_GAIN = 1e-3;

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
}

/** What one sweep learned, for the next one. */
export interface SweepKnowledge {
  /** Bias where the current left the floor, V. */
  readonly onset: number;
  /** The floor current, A. */
  readonly floor: number;
  /** σ of a reading at the floor: the RMS of the readings before the onset (what the fill's weights use), A. */
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
  private filling: { high: number; cands: number[]; uses: number[]; info: Information; left: number; why: StopReason } | undefined;
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

  /** The level read before the last one that stayed below the current limit. */
  private previousLevel(v: number): number {
    for (let k = this.v.length - 2; k >= 0; k--) if (Math.abs(this.i[k]) < this.settings.currentLimit) return this.v[k];
    return v;
  }

  /** Bias left before the secant of the last two readings reaches the current limit, V (Infinity when it does not rise). */
  private roomToLimit(v: number, a: number): number {
    const k = this.v.length - 1;
    if (k < 1) return Infinity;
    const a0 = Math.abs(this.i[k - 1]);
    const dv = (v - this.v[k - 1]) * this.dir;
    if (!(a0 > 0) || !(a > a0) || !(dv > 0)) return Infinity;
    const slope = Math.log(a / a0) / dv;
    return Math.log(this.settings.currentLimit / a) / slope;
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
    const info = new Information(this.settings.leakage ?? false);
    const cands: number[] = [];
    for (let k = k0; k < this.v.length; k++) {
      const a = Math.abs(this.i[k]);
      if (!(a > 0) || a >= this.settings.currentLimit) continue;
      info.add(this.row(this.v[k], a));
      // Candidates: distinct regime levels at or below the top, with the current read there.
      const above = (this.v[k] - top) * this.dir > 1e-12;
      const below = (this.v[k] - this.lowest) * this.dir < -1e-12;
      if (!above && !below && !cands.some((c) => Math.abs(c - this.v[k]) < 1e-12)) cands.push(this.v[k]);
    }
    if (cands.length < 2) return this.end(why);
    this.ends = { low: cands.reduce((m, c) => ((c - m) * this.dir < 0 ? c : m), top), top, why };
    const left = Math.max(4, Math.round((2 * Math.abs(top - this.onset)) / this.fine));
    this.filling = { high: top, cands, uses: cands.map(() => 0), info, left, why };
    return this.fill();
  }

  /** A reading's row of the information matrix and its weight (see the header). */
  private row(v: number, a: number): { f: number[]; w: number } {
    const floor = Math.max(this.floorSigma() ?? this.floor ?? 0, this.settings.absoluteFloor ?? 0);
    const sigma = ASSUMED_GAIN + floor / a;
    const x = this.settings.axis ? this.settings.axis(v) : v;
    return { f: this.settings.leakage ? [1, x, Math.abs(v) / a] : [1, x], w: 1 / (sigma * sigma) };
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
      const g = f.info.slopeGain(this.row(f.cands[c], this.currentAt(f.cands[c])));
      if (g > gain) {
        gain = g;
        best = c;
      }
    }
    if (best < 0) return this.end(f.why);
    const at = f.cands[best];
    // Offsets follow the golden-ratio sequence frac(n·φ), which fills an interval evenly whatever
    // the count (Weyl 1916), so the readings around a chosen level stay distinct.
    const u = (++f.uses[best] * GOLDEN) % 1;
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

  /** The RMS of the first sweep's readings before the onset (σ of a floor reading), A. */
  private floorSigma(): number | undefined {
    if (this.prior) return this.prior.floorSigma;
    const k0 = this.onset !== undefined ? this.v.indexOf(this.onset) : this.v.length;
    if (k0 < 1) return undefined;
    let ss = 0;
    for (let k = 0; k < k0; k++) ss += this.i[k] * this.i[k];
    return Math.sqrt(ss / k0);
  }

  /** What this sweep learned (the earlier knowledge when it never left the floor). */
  knowledge(): SweepKnowledge | undefined {
    if (this.onset === undefined || this.floor === undefined) return this.prior;
    const quiet = this.floorSigma();
    // A later sweep's onset is where it started; the regime's own start stays the earliest one seen.
    const onset = this.prior && (this.prior.onset - this.onset) * this.dir < 0 ? this.prior.onset : this.onset;
    // The top a later sweep may not pass: the fill's, an earlier sweep's, or — when the target was
    // reached on the way up — the highest level this sweep read (the stress shown to be enough).
    // Only levels whose reading stayed below the current limit count.
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
        : highest !== undefined
          ? { low: undefined, top: highest, why: (limited ? 'current-limit' : 'earlier-top') as StopReason }
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
