/**
 * Robust statistics for comparing devices: quantiles, the median absolute deviation and modified
 * z-scores, which one bad device cannot drag (as the mean and standard deviation can).
 */

/** Sample quantile by linear interpolation between order statistics (Hyndman & Fan 1996, type 7). */
export function quantile(sorted: ArrayLike<number>, p: number): number {
  const n = sorted.length;
  if (n === 0) return Number.NaN;
  const h = (n - 1) * p;
  const lo = Math.floor(h);
  const hi = Math.min(n - 1, lo + 1);
  return sorted[lo] + (h - lo) * (sorted[hi] - sorted[lo]);
}

export function median(values: ArrayLike<number>): number {
  return quantile(Float64Array.from(values).sort(), 0.5);
}

/** Median absolute deviation from the median (unscaled). */
export function mad(values: ArrayLike<number>): number {
  const m = median(values);
  return median(Array.from(values, (v) => Math.abs(v - m)));
}

export interface BoxSummary {
  readonly n: number;
  readonly min: number;
  readonly q1: number;
  readonly median: number;
  readonly q3: number;
  readonly max: number;
  /** Whisker ends: the most extreme values within 1.5 IQR of the box (Tukey 1977). */
  readonly lowWhisker: number;
  readonly highWhisker: number;
}

export function boxSummary(values: ArrayLike<number>): BoxSummary {
  const s = Float64Array.from(values).sort();
  const q1 = quantile(s, 0.25);
  const q3 = quantile(s, 0.75);
  const iqr = q3 - q1;
  let lowWhisker = q1;
  let highWhisker = q3;
  for (const v of s) {
    if (v >= q1 - 1.5 * iqr) {
      lowWhisker = v;
      break;
    }
  }
  for (let k = s.length - 1; k >= 0; k--) {
    if (s[k] <= q3 + 1.5 * iqr) {
      highWhisker = s[k];
      break;
    }
  }
  return { n: s.length, min: s[0], q1, median: quantile(s, 0.5), q3, max: s[s.length - 1], lowWhisker, highWhisker };
}

/**
 * The step of the grid the values sit on, when they sit on one and some of them tie: every gap
 * between distinct values is a whole multiple of the smallest gap (to 1e-6 of it). Readings taken
 * on a ramp's levels (breakdown voltages 0.1 V apart) or at fixed intervals are such values.
 * Undefined for values that do not tie or do not share a grid. Float noise in the levels is allowed.
 */
export function gridResolution(values: ArrayLike<number>): number | undefined {
  const s = Float64Array.from(values).filter(Number.isFinite).sort();
  // Values within 1e-9 of the largest magnitude are one level (9.6 and 9.600000000000001 are both
  // a ramp's 96th step of 0.1 V).
  const eps = 1e-9 * s.reduce((a, v) => Math.max(a, Math.abs(v)), 0);
  const distinct: number[] = [];
  for (const v of s) if (distinct.length === 0 || v - distinct[distinct.length - 1] > eps) distinct.push(v);
  if (distinct.length < 2 || distinct.length === s.length) return undefined;
  let q = Number.POSITIVE_INFINITY;
  for (let k = 1; k < distinct.length; k++) q = Math.min(q, distinct[k] - distinct[k - 1]);
  if (!(q > 0)) return undefined;
  for (const v of distinct) {
    const m = (v - distinct[0]) / q;
    if (Math.abs(m - Math.round(m)) > 1e-6 * Math.max(1, Math.abs(m))) return undefined;
  }
  return q;
}

/**
 * Modified z-scores M = 0.6745 (x − median)/MAD (Iglewicz & Hoaglin 1993); 0.6745 = Φ⁻¹(0.75).
 *
 * `resolution`, when the values are known only to a grid step, floors the MAD at that step (our own
 * choice): when most devices tie on one level the MAD is 0 and every other device would score
 * infinite, although one or two steps away is all the grid can tell apart. When the MAD is still 0
 * the mean absolute deviation stands in, M = (x − median)/(1.253314·MeanAD) (common practice; the
 * factor √(π/2) makes it estimate σ for a normal sample, from memory). All values equal score 0.
 */
export function modifiedZ(values: ArrayLike<number>, resolution?: number): number[] {
  const m = median(values);
  const d = Math.max(mad(values), resolution !== undefined && resolution > 0 ? resolution : 0);
  if (d > 0) return Array.from(values, (v) => (0.6745 * (v - m)) / d);
  const arr = Array.from(values);
  const meanAd = arr.reduce((a, v) => a + Math.abs(v - m), 0) / arr.length;
  return arr.map((v) => (meanAd > 0 ? (v - m) / (1.253314 * meanAd) : 0));
}

/** Iglewicz & Hoaglin's cut-off: |M| > 3.5 marks a potential outlier. */
export const OUTLIER_Z = 3.5;
