/**
 * Where the next point of an adaptive sweep goes, and when the sweep has learned enough. Pure
 * decisions over the readings so far; the station measures and feeds them back.
 *
 * The plan (our own; the design rules it follows are common practice in regression design):
 *  - while the current sits at the noise floor the mechanism says nothing: coarse steps, a twelfth
 *    of the range each;
 *  - once the current leaves the floor (twenty times the floor seen in the first two readings — the
 *    larger, unless the second is already a hundred times the first — or an absolute floor), fine steps — a sixtieth of the range, or coarser when the point budget is too
 *    small — growing by 60 % per point up to the coarse step, so the regime is crossed in a few
 *    readings;
 *  - no step is longer than the one the last two readings' secant (of ln|I| against V) says reaches
 *    the current limit, so the limit is approached, not jumped past (the steps shrink near it);
 *  - after every point in the regime the caller fits the sweep so far and reports the target
 *    parameter's standard error; the sweep stops once it is at or below the target (run/adaptive.ts
 *    asks for three regime readings in a row that meet it, so a chance low error does not stop it);
 *  - when the top is reached (the end of the range, or the current limit) before the target is met,
 *    the further readings go to the two ends of the regime, alternately: around its low end (the
 *    level that pins the slope best with the top, weighing its distance from the top against the
 *    floor's share of its noise) and just below the top. A straight line's slope is pinned best by
 *    points far apart along its axis — its variance is σ²/Σw(x − x̄)², smallest with the points
 *    split between the two ends (the two-level design: Box, Hunter & Hunter 2005, Statistics for
 *    Experimenters; Montgomery 2017, Design and Analysis of Experiments) — while the up-leg's
 *    points in between keep the straightness of the window testable. Each end's levels spread over
 *    one fine step and are all distinct, so the noise estimate from neighbouring readings still
 *    works. Downward moves are free; upward ones go only to levels already read below the current
 *    limit. The fill ends after twice as many readings as a fine-step return leg over the regime
 *    would take;
 *  - compliance or the point budget end the sweep at once; every stop says why;
 *  - later sweeps of the same run reuse what the first learned (the floor and where the regime
 *    starts): they begin a fine step below the onset, in fine steps.
 */

/** Growth of the step from one regime point to the next. */
const GROWTH = 1.6;
/** The golden ratio's fractional part, for evenly spread offsets. */
const GOLDEN = (Math.sqrt(5) - 1) / 2;
/**
 * Relative noise of a reading assumed when placing the low end of the fill (0.1 % of reading: the
 * gain term of a source-measure unit's accuracy, common practice on data sheets). The fit estimates
 * its own; this only decides where readings go.
 */
const ASSUMED_GAIN = 1e-3;

export type StopReason = 'target-reached' | 'current-limit' | 'compliance' | 'bias-limit' | 'point-budget';

export const STOP_MEANING: Record<StopReason, string> = {
  'target-reached': 'the parameter reached its target standard error',
  'current-limit': "the current reached the plan's current limit",
  compliance: 'the instrument reached its compliance',
  'bias-limit': 'the bias reached the end of the range',
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
}

/** What one sweep learned, for the next one. */
export interface SweepKnowledge {
  /** Bias where the current left the floor, V. */
  readonly onset: number;
  /** The floor current, A. */
  readonly floor: number;
  /** The smaller of the first two readings' |I| (the floor as the fill's placement weighs it), A. */
  readonly quietFloor?: number;
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
  private filling: { low: number; high: number; k: number; left: number; why: StopReason } | undefined;

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

  /** The first bias of the sweep: the start, or a fine step below where an earlier sweep left the floor. */
  first(): number {
    return this.prior ? this.clamp(this.prior.onset - this.dir * this.fine) : this.settings.start;
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
    if (this.filling) return this.fill();
    if (a >= s.currentLimit) return this.startFill(this.previousLevel(v), 'current-limit');
    // Later sweeps start at the regime already: fine steps from their first reading.
    const inRegime = this.onset !== undefined || this.prior !== undefined;
    const m = this.onset !== undefined ? this.regimePoints - 1 : this.v.length - 1;
    let step = inRegime ? Math.min(this.coarse, this.fine * GROWTH ** Math.max(0, m)) : this.coarse;
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
    // The low end: the regime level read so far that pins the slope best together with the top.
    // With u = ln|I| standing in for the plot's axis (the mechanism's line is straight in it) and a
    // reading's relative σ² = g² + (floor/I)², a level's worth is (u_top − u)²/σ²: far from the top
    // but not so near the floor that its noise swamps it (the optimum sits where floor/I ≈ g/√(d − 1),
    // d = u_top − u: a few times floor/g).
    // The floor here is the smaller of the first two readings: the onset rule takes the larger (to
    // be sure a reading is off the floor), but a second reading already in the regime would make
    // every low level look noisy.
    const f = Math.max(this.quietFloor() ?? this.floor ?? 0, this.settings.absoluteFloor ?? 0);
    const k0 = this.v.indexOf(this.onset);
    const kTop = this.v.lastIndexOf(top);
    const aTop = kTop >= 0 ? Math.abs(this.i[kTop]) : 0;
    let low = this.onset;
    let best = -1;
    for (let k = k0; k < this.v.length; k++) {
      const a = Math.abs(this.i[k]);
      if (!(a > 0) || !(a < aTop) || (this.v[k] - top) * this.dir >= 0) continue;
      const d = Math.log(aTop / a);
      const worth = (d * d) / (ASSUMED_GAIN * ASSUMED_GAIN + (f / a) ** 2);
      if (worth > best) {
        best = worth;
        low = this.v[k];
      }
    }
    // A regime of one level (the limit came at once) has no two ends to fill.
    if ((top - this.onset) * this.dir <= 0) return this.end(why);
    const left = Math.max(4, Math.round((2 * Math.abs(top - this.onset)) / this.fine));
    this.filling = { low, high: top, k: 0, left, why };
    return this.fill();
  }

  private fill(): { next: number } | { stop: StopReason } {
    const f = this.filling as NonNullable<AdaptiveSweep['filling']>;
    if (f.left <= 0) return this.end(f.why);
    f.left--;
    const j = f.k++;
    // Alternately the low end and the top, each end's levels spread over one fine step (around the
    // low end, just below the top) and all distinct: offsets follow the golden-ratio sequence
    // frac(n·φ), which fills an interval evenly whatever the count (Weyl 1916), so the ends stay
    // where they are worth most however long the fill runs.
    const u = ((Math.floor(j / 2) + 1) * GOLDEN) % 1;
    const level = j % 2 === 0 ? f.low + this.dir * this.fine * (u - 0.5) : f.high - this.dir * this.fine * u;
    const inside = this.dir > 0 ? level >= this.lowest && level < f.high : level <= this.lowest && level > f.high;
    return inside ? { next: level } : j % 2 === 0 ? { next: f.low } : { next: f.high };
  }

  /** The lowest regime level read (the onset), V. */
  private get lowest(): number {
    return this.onset ?? this.settings.start;
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

  /** The smaller of the first two readings of the first sweep, A. */
  private quietFloor(): number | undefined {
    if (this.prior) return this.prior.quietFloor;
    return this.i.length >= 2 ? Math.min(Math.abs(this.i[0]), Math.abs(this.i[1])) : undefined;
  }

  /** What this sweep learned (the earlier knowledge when it never left the floor). */
  knowledge(): SweepKnowledge | undefined {
    if (this.onset === undefined || this.floor === undefined) return this.prior;
    const quiet = this.quietFloor();
    return { onset: this.onset, floor: this.floor, ...(quiet !== undefined ? { quietFloor: quiet } : {}) };
  }

  private end(r: StopReason): { stop: StopReason } {
    this.stopped = r;
    return { stop: r };
  }
}
