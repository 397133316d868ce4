/**
 * Where the next point of an adaptive sweep goes, and when the sweep has learned enough. Pure
 * decisions over the readings so far; the station measures and feeds them back.
 *
 * The plan (our own):
 *  - while the current sits at the noise floor the mechanism says nothing: coarse steps, a twelfth
 *    of the range each;
 *  - once the current leaves the floor (twenty times the floor seen in the first readings, or an
 *    absolute floor), fine steps — a sixtieth of the range, or coarser when the point budget is too
 *    small — growing by a quarter per point up to the coarse step, because the fitted slope's error
 *    falls with the width of the range covered faster than with the number of points;
 *  - after every point in that regime the caller fits the sweep so far and reports the target
 *    parameter's standard error; the sweep stops as soon as it is at or below the target;
 *  - when the range is covered (the end of the range, or the current limit) before the target is
 *    met, a return leg comes back down through the regime in fine steps between the upward leg's
 *    levels (a dual sweep, as is common practice), until the target is met or the onset is reached;
 *  - no step is longer than the one the last two readings' secant (of ln|I| against V) says reaches
 *    the current limit, so the limit is approached, not jumped past;
 *  - compliance or the point budget end the sweep at once; every stop says why;
 *  - later sweeps of the same run start just below the bias where the earlier one left the floor
 *    (they skip what is known to be floor), with the same fine step.
 */

/** Growth of the step from one regime point to the next. */
const GROWTH = 1.25;

export type StopReason = 'target-reached' | 'current-limit' | 'compliance' | 'bias-limit' | 'point-budget';

export const STOP_MEANING: Record<StopReason, string> = {
  'target-reached': 'the parameter reached its target standard error',
  'current-limit': 'the current reached the plan\'s current limit',
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

  constructor(readonly settings: AdaptiveSettings, readonly prior?: SweepKnowledge) {
    this.dir = Math.sign(settings.stop - settings.start) || 1;
    this.span = Math.abs(settings.stop - settings.start);
    this.coarse = this.span / 12;
    this.fine = Math.max(this.span / 60, this.span / Math.max(1, settings.maxPoints - 12));
    if (prior) this.floor = prior.floor;
  }

  /** The first bias of the sweep: the start, or just below where an earlier sweep left the floor. */
  first(): number {
    const s = this.settings;
    if (!this.prior) return s.start;
    const back = this.prior.onset - this.dir * 2 * this.fine;
    return this.dir > 0 ? Math.max(s.start, Math.min(back, s.stop)) : Math.min(s.start, Math.max(back, s.stop));
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
      const sorted = this.i.slice(0, 2).map(Math.abs).sort((x, y) => x - y);
      this.floor = sorted[1];
    }
    if (this.onset === undefined && this.floor !== undefined && this.offFloor(a)) this.onset = v;
    if (this.filling) return this.fill();
    if (a >= s.currentLimit) return this.startFill(this.v.length >= 2 ? this.v[this.v.length - 2] : v, 'current-limit');
    // In the regime the steps start fine and grow by a quarter each point (up to the coarse step):
    // the slope's error falls with the width of the range covered more than with the number of
    // points, so the range is extended quickly while the region near the onset stays dense. Later
    // sweeps start at the regime already.
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

  /** Bias left before the secant of the last two readings reaches the current limit, V (Infinity when it does not rise). */
  private roomToLimit(v: number, a: number): number {
    const k = this.v.length - 1;
    if (k < 1) return Infinity;
    const a0 = Math.abs(this.i[k - 1]);
    const dv = Math.abs(v - this.v[k - 1]);
    if (!(a0 > 0) || !(a > a0) || !(dv > 0)) return Infinity;
    const slope = Math.log(a / a0) / dv;
    return Math.log(this.settings.currentLimit / a) / slope;
  }

  /**
   * The range is covered and the target not yet met: more readings go to the two ends of the
   * regime, alternately — the highest level reached (below the current limit) and the lowest level
   * well off the floor — because a line's slope is pinned best by points far apart (the two-point
   * design of regression; common practice in experiment design). `why` is the stop reason if the
   * regime was never reached.
   */
  private startFill(top: number, why: StopReason): { next: number } | { stop: StopReason } {
    if (this.onset === undefined) return this.end(why);
    // A return leg from the top back toward the onset in fine steps, placed between the upward
    // leg's levels: it adds points across the regime where the upward leg's growing steps left gaps.
    this.filling = { level: top - this.dir * 0.5 * this.fine, stopAt: this.onset, why };
    return this.fill();
  }

  private filling: { level: number; stopAt: number; why: StopReason } | undefined;

  private fill(): { next: number } | { stop: StopReason } {
    const f = this.filling as NonNullable<AdaptiveSweep['filling']>;
    const level = f.level;
    if (this.dir > 0 ? level < f.stopAt : level > f.stopAt) return this.end(f.why);
    f.level -= this.dir * this.fine;
    return { next: level };
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

  /** What this sweep learned (undefined when it never left the floor). */
  knowledge(): SweepKnowledge | undefined {
    return this.onset !== undefined && this.floor !== undefined ? { onset: this.onset, floor: this.floor } : this.prior;
  }

  private end(r: StopReason): { stop: StopReason } {
    this.stopped = r;
    return { stop: r };
  }
}
