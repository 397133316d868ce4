/**
 * Breakdown watch within one sweep. Dielectric breakdown shows as the current jumping by decades
 * over a bias step or a few, often straight to compliance, and it is irreversible (common practice;
 * JEDEC JESD35-A's ramp criteria are of the same kind: a current far above its trend, or compliance
 * with the voltage collapsing). A current that climbs steeply but smoothly — a tunnelling current,
 * a diode — or that rises out of the noise floor is not breakdown, so each reading is judged against
 * what the sweep's own recent readings predict for it, with the uncertainty of that prediction:
 *
 *  - the trend: a straight line through the last few readings above the floor on the mechanism's own
 *    plot (where its current is a straight line: ln(J/E²) against 1/E for Fowler–Nordheim, …; ln I
 *    against ln V for the linear mechanisms), extrapolated to the new reading's abscissa, with the
 *    standard error of that extrapolation (the line's covariance and the points' scatter);
 *  - confirmed: compliance with the bias collapsing (the source cannot hold `collapseFraction` of the
 *    previous bias: the device's resistance fell by far more than a step explains); or a reading —
 *    or compliance — at least `jumpDecades` and five prediction errors above the trend, reached
 *    within `withinSteps` readings from a level the trend followed;
 *  - suspected (a caution, no abort): while there is no trend yet to judge by (fewer than three
 *    readings above the floor), a jump of twice `jumpDecades` from a measured level, or compliance
 *    straight from below `lowFraction` of the limit;
 *  - ignored: readings at the floor (below `floor`, or five noise-floor σ when the chain knows the
 *    floor), and a first rise out of it.
 */
import { LineAccumulator } from './line-accumulator.js';

export interface BreakdownSettings {
  readonly jumpDecades: number;
  readonly withinSteps: number;
  /** Currents below this (A) are noise for the watch (the estimated floor raises it). */
  readonly floor: number;
  readonly lowFraction: number;
  readonly collapseFraction: number;
}

export const DEFAULT_BREAKDOWN: BreakdownSettings = { jumpDecades: 2, withinSteps: 3, floor: 1e-10, lowFraction: 1e-2, collapseFraction: 0.5 };

export interface BreakdownVerdict {
  readonly state: 'suspected' | 'confirmed';
  readonly reason: string;
  readonly numbers: Record<string, number>;
}

/** Where a reading sits on the trend's plot: x and y = ln of the current (or current density) less an offset. */
export interface TrendPoint {
  readonly x: number;
  readonly y: number;
}

/** Readings the trend line is drawn through. */
const TREND_POINTS = 6;
/** Excess over the trend, in its standard errors, that a breakdown must also pass. */
const Z_TREND = 5;

export class BreakdownWatch {
  private readonly recent: number[] = [];
  private prevV: number | undefined;
  private readonly trend = new LineAccumulator();
  private readonly trendPoints: TrendPoint[] = [];
  private level: number;

  constructor(
    readonly settings: BreakdownSettings = DEFAULT_BREAKDOWN,
    readonly complianceLimit = Infinity,
  ) {
    this.level = settings.floor;
  }

  reset(): void {
    this.recent.length = 0;
    this.prevV = undefined;
    this.resetTrend();
  }

  /** Forgets the trend (a new sweep, or the other polarity). */
  resetTrend(): void {
    this.trend.reset();
    this.trendPoints.length = 0;
  }

  /** The noise floor σ the chain has measured (A): readings within five of it are ignored. */
  setNoiseFloor(sigma: number): void {
    this.level = Math.max(this.settings.floor, 5 * sigma);
  }

  /** The trend's prediction at x and its standard error (ln units), when there is a trend. */
  private predict(x: number): { y: number; se: number } | undefined {
    if (this.trend.n < 3) return undefined;
    try {
      const f = this.trend.fit();
      const y = f.intercept + f.slope * x;
      const s2 = f.residualStdDev ** 2;
      const lev = f.interceptStdErr ** 2 + x * x * f.slopeStdErr ** 2 + 2 * x * f.covariance;
      // The point's own scatter too, with a floor of 5 % (noise of a reading, roughly).
      return { y, se: Math.sqrt(Math.max(0, lev) + s2 + 0.05 * 0.05) };
    } catch {
      return undefined;
    }
  }

  /**
   * One reading: bias v (V), current i (A), whether the instrument reported compliance, and where it
   * sits on the trend's plot (undefined when it cannot be placed: zero bias, current against the bias).
   */
  add(v: number, i: number, compliance: boolean, at?: TrendPoint): BreakdownVerdict | undefined {
    const a = Math.abs(i);
    const s = this.settings;
    const ln10 = Math.LN10;
    let verdict: BreakdownVerdict | undefined;
    const prev = this.recent.length ? this.recent[this.recent.length - 1] : undefined;
    const pred = at ? this.predict(at.x) : undefined;
    const excess = pred && at ? (at.y - pred.y) / ln10 : undefined; // decades above the trend
    const far = pred !== undefined && excess !== undefined && excess >= s.jumpDecades && excess * ln10 >= Z_TREND * pred.se;
    let minPrev = Infinity;
    for (let k = Math.max(0, this.recent.length - s.withinSteps); k < this.recent.length; k++) minPrev = Math.min(minPrev, this.recent[k]);
    const fromMeasured = Number.isFinite(minPrev) && minPrev >= this.level;
    const jump = fromMeasured ? Math.log10(a / minPrev) : 0;
    const numbers = (extra: Record<string, number>): Record<string, number> => ({
      bias: v,
      current: a,
      ...(excess !== undefined ? { decadesAboveTrend: excess, trendStdErrDecades: (pred?.se ?? 0) / ln10 } : {}),
      ...extra,
    });
    if (compliance && this.prevV !== undefined && Math.abs(v) < s.collapseFraction * Math.abs(this.prevV)) {
      verdict = {
        state: 'confirmed',
        reason: `compliance with the bias collapsing from ${this.prevV.toPrecision(4)} V to ${v.toPrecision(4)} V (the device's resistance fell abruptly)`,
        numbers: numbers({ previousBias: this.prevV, complianceLimit: this.complianceLimit }),
      };
    } else if (compliance && far) {
      verdict = {
        state: 'confirmed',
        reason: `compliance at ${v.toPrecision(4)} V where the sweep's trend predicts ${(excess as number).toFixed(1)} decades less`,
        numbers: numbers({ complianceLimit: this.complianceLimit }),
      };
    } else if (compliance && !pred && prev !== undefined && prev >= this.level && prev < s.lowFraction * this.complianceLimit) {
      verdict = {
        state: 'suspected',
        reason: `compliance at ${v.toPrecision(4)} V straight after ${prev.toExponential(2)} A (below ${s.lowFraction} × the ${this.complianceLimit.toExponential(2)} A limit), with no trend yet to judge it by`,
        numbers: numbers({ previousCurrent: prev, complianceLimit: this.complianceLimit }),
      };
    } else if (!compliance && a >= this.level) {
      if (far && jump >= s.jumpDecades) {
        verdict = {
          state: 'confirmed',
          reason: `current rose ${jump.toFixed(1)} decades within ${s.withinSteps} steps at ${v.toPrecision(4)} V, ${(excess as number).toFixed(1)} decades above the sweep's trend (±${((pred as { se: number }).se / ln10).toFixed(2)})`,
          numbers: numbers({ jumpDecades: jump, steps: s.withinSteps }),
        };
      } else if (far) {
        verdict = {
          state: 'suspected',
          reason: `current ${(excess as number).toFixed(1)} decades above the sweep's trend at ${v.toPrecision(4)} V`,
          numbers: numbers({}),
        };
      } else if (!pred && jump >= 2 * s.jumpDecades) {
        verdict = {
          state: 'suspected',
          reason: `current rose ${jump.toFixed(1)} decades within ${s.withinSteps} steps at ${v.toPrecision(4)} V, with no trend yet to judge it by`,
          numbers: numbers({ jumpDecades: jump, steps: s.withinSteps }),
        };
      }
    }
    this.recent.push(a);
    this.prevV = v;
    if (this.recent.length > s.withinSteps + 1) this.recent.shift();
    // A reading that fits the trend (or starts one) joins it; a suspicious one does not.
    if (!verdict && !compliance && at && a >= this.level && Number.isFinite(at.x) && Number.isFinite(at.y)) {
      this.trend.add(at.x, at.y);
      this.trendPoints.push(at);
      if (this.trendPoints.length > TREND_POINTS) {
        const old = this.trendPoints.shift() as TrendPoint;
        this.trend.remove(old.x, old.y);
      }
    }
    return verdict;
  }
}
