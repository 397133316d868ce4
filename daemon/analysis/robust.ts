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

/** Modified z-scores M = 0.6745 (x − median)/MAD (Iglewicz & Hoaglin 1993); 0.6745 = Φ⁻¹(0.75). */
export function modifiedZ(values: ArrayLike<number>): number[] {
  const m = median(values);
  const d = mad(values);
  return Array.from(values, (v) => (d > 0 ? (0.6745 * (v - m)) / d : v === m ? 0 : Number.POSITIVE_INFINITY * Math.sign(v - m)));
}

/** Iglewicz & Hoaglin's cut-off: |M| > 3.5 marks a potential outlier. */
export const OUTLIER_Z = 3.5;
