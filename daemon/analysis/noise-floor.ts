/**
 * The noise model of a sweep's current readings, σ_I² = σ_floor² + (g·I)²: the "offset + % of
 * reading" form in which source-measure units state their accuracy (common practice; SMU data
 * sheets), with both parts estimated from the sweep itself unless the user gives them.
 *
 * The floor σ_floor comes from readings that carry no signal: those at zero bias and those whose
 * current flows against the bias (for a passive film or a dark diode the physics gives no such
 * current, so what is read there is noise). Their robust RMS, √(median(I²)/0.4549) — the median of
 * χ²₁ is 0.4549 — estimates σ_floor whether the noise is of one sign or either. Readings within
 * FLOOR_MULTIPLE·σ_floor of zero are "at the noise floor" and are kept out of every logarithmic
 * transform: at |I|/σ = 5, ln|I| is biased by −0.022 with an SD of 0.21; at 3 the bias is −0.067 and
 * the SD 0.41 (Monte Carlo; common practice to require several σ).
 *
 * The relative part g comes from the point-to-point scatter about a smooth curve (each point
 * against the straight interpolation of its neighbours), with the floor's share taken out: g is
 * chosen so that the trimmed mean of the normalised squared residuals takes its χ²₁ value.
 */
import type { AccuracySpec } from './accuracy.js';
import { medianInPlace, selectInPlace } from './select.js';

/** Readings with |I| below this many floor σ are "at the noise floor". */
export const FLOOR_MULTIPLE = 5;
/** Median of the χ² distribution with one degree of freedom. */
const CHI2_1_MEDIAN = 0.454936423119572;
/** The smallest relative noise assumed (0.01 % of reading): no instrument reads better. */
export const MIN_RELATIVE = 1e-4;
/**
 * The relative noise taken when the readings cannot show their own: 0.1 % of reading, the order of
 * the "% of reading" term source-measure unit data sheets state for their current ranges (common
 * practice; the figure is from memory, and typical rather than any one instrument's).
 */
export const TYPICAL_RELATIVE = 1e-3;
/**
 * Fewest readings whose current is large enough that a typical relative noise would outweigh the
 * floor (|I| > floor / TYPICAL_RELATIVE) for the relative noise to be read from the scatter. Below
 * it the scatter is the floor's: the readings cannot tell a 0.01 % instrument from a 0.1 % one, and
 * taking the smaller (the best any instrument reads) made a five-reading sweep of a 7 nm oxide state
 * its barrier to ±0.4 meV where repeated sweeps scattered by ±1.6 meV.
 */
export const MIN_RELATIVE_READINGS = 6;

export interface NoiseModel {
  /** σ of a reading at zero current, A (0 when no reading reached the floor and none was given). */
  readonly floor: number;
  /** Relative σ, fraction of reading. */
  readonly relative: number;
  /** Where the floor came from. */
  readonly floorSource: 'readings' | 'earlier sweeps' | 'accuracy' | 'not reached';
  /** Readings the floor was estimated from (zero bias and against the bias). */
  readonly floorReadings: number;
  /** 'typical': too few readings above the floor to read it from the scatter, TYPICAL_RELATIVE taken. */
  readonly relativeSource: 'scatter' | 'accuracy' | 'typical';
}

/** σ of a current reading, A. */
export function currentSigma(noise: Pick<NoiseModel, 'floor' | 'relative'>, current: number): number {
  return Math.sqrt(noise.floor * noise.floor + noise.relative * noise.relative * current * current);
}

/** σ of ln|I|: σ_I/|I|. */
export function lnSigma(noise: Pick<NoiseModel, 'floor' | 'relative'>, current: number): number {
  const a = Math.abs(current);
  return a > 0 ? currentSigma(noise, a) / a : Infinity;
}

/** The level below which a reading is at the noise floor, A. */
export function floorLevel(noise: Pick<NoiseModel, 'floor'>): number {
  return FLOOR_MULTIPLE * noise.floor;
}

/** √(median(x²)/0.4549): the RMS of zero-mean normal values, robust against a few large ones. */
export function robustRms(vals: ArrayLike<number>): number {
  const s = new Float64Array(vals.length);
  for (let k = 0; k < vals.length; k++) s[k] = vals[k] * vals[k];
  return Math.sqrt(medianInPlace(s) / CHI2_1_MEDIAN);
}

/**
 * Robust RMS of the null readings, √(median(I²)/0.4549), or undefined when fewer than three exist.
 * `zero` holds the zero-bias readings; `low` the readings of each branch from zero bias up to the
 * last one whose current flows against the bias (at least a fifth of them against it): below that
 * bias the noise still decides the sign, so these readings are the floor whatever their sign.
 * `signal` is the largest |I| of the sweep: null readings larger than 1 % of it are real currents
 * (a photocurrent, a built-in field, displacement current), not noise, and then only the zero-bias
 * readings count.
 */
export function estimateFloor(zero: number[], low: number[], signal: number): { sigma: number; n: number; note?: string } | undefined {
  const all = zero.concat(low);
  if (all.length < 3) return undefined;
  const s = robustRms(all);
  if (!(s > 0.01 * signal) || signal === 0) return { sigma: s, n: all.length };
  // Readings of both signs in good measure (a fifth of them or more each way) scatter about zero:
  // that is noise, whatever the sweep's largest current — a sweep that never leaves its floor (a
  // sense sweep of an insulator at low bias) has no larger current to measure them against, and a
  // photocurrent, a built-in field or an offset pushes them all one way.
  let positive = 0;
  let negative = 0;
  for (const c of all) {
    if (c > 0) positive++;
    else if (c < 0) negative++;
  }
  if (all.length >= 5 && Math.min(positive, negative) >= 0.2 * all.length) return { sigma: s, n: all.length };
  let big = 0;
  for (const c of low) big = Math.max(big, Math.abs(c));
  if (zero.length >= 3) {
    return {
      sigma: robustRms(zero),
      n: zero.length,
      note: `readings against the bias are too large to be noise (up to ${fmtA(big)}: a photocurrent, a built-in field or an offset?): the floor comes from the zero-bias readings alone`,
    };
  }
  return {
    sigma: 0,
    n: 0,
    note: `readings against the bias are too large to be noise (up to ${fmtA(big)}: a photocurrent, a built-in field or an offset?); the floor could not be estimated`,
  };
}

function fmtA(a: number): string {
  return `${Number(a.toPrecision(3))} A`;
}

/**
 * Relative noise g from the scatter of y about a smooth curve (x ascending), given each point's
 * known floor share q_k = σ_floor/|I_k| in y units (0 for none). Uses at most ~4,000 neighbour
 * triples (evenly strided) so the cost stays linear; the result is good to ±1 %.
 */
export function relativeFromScatter(x: ArrayLike<number>, y: ArrayLike<number>, q: ArrayLike<number>): number | undefined {
  const n = x.length;
  if (n < 5) return undefined;
  const stride = Math.max(1, Math.floor((n - 2) / 4000));
  const e2: number[] = [];
  const qa: number[] = [];
  const qb: number[] = [];
  const qc: number[] = [];
  for (let k = 1; k < n - 1; k += stride) {
    const span = x[k + 1] - x[k - 1];
    if (!(span > 0)) continue;
    const a = (x[k] - x[k - 1]) / span;
    const interp = y[k - 1] + a * (y[k + 1] - y[k - 1]);
    e2.push((y[k] - interp) ** 2);
    qa.push(q[k] * q[k]);
    qb.push((1 - a) * (1 - a) * q[k - 1] * q[k - 1] + a * a * q[k + 1] * q[k + 1]);
    qc.push(1 + a * a + (1 - a) * (1 - a));
  }
  const m = e2.length;
  if (m < 3) return undefined;
  // The mean of the smallest 90 % of the normalised squared residuals: for χ²₁ it is
  // P(χ²₃ < 2.7055)/0.9 = 0.6232 (E[X; X < c] = P(χ²₃ < c) for X ~ χ²₁). Nearly as efficient as
  // the mean square and as robust as needed against a few outliers or a local bend.
  const ratio = new Float64Array(m);
  const keep = Math.max(1, Math.floor(0.9 * m));
  const trimmedMean = (g: number) => {
    const g2 = g * g;
    for (let j = 0; j < m; j++) ratio[j] = e2[j] / (g2 * qc[j] + qa[j] + qb[j] || Number.MIN_VALUE);
    // The smallest `keep` ratios, in any order: a selection puts them first.
    if (keep < m) selectInPlace(ratio, keep - 1);
    let t = 0;
    for (let j = 0; j < keep; j++) t += ratio[j];
    return t / keep;
  };
  return solveRelative(trimmedMean, 0.6232, 1.01);
}

/**
 * The relative noise g ≥ MIN_RELATIVE at which a decreasing function f(g) falls to `target`, by
 * bisection on log g to a ratio `tolerance` between the bracketing values.
 */
function solveRelative(f: (g: number) => number, target: number, tolerance: number): number {
  if (f(MIN_RELATIVE) <= target) return MIN_RELATIVE;
  let lo = MIN_RELATIVE;
  let hi = 1;
  while (f(hi) > target && hi < 1e6) hi *= 10;
  for (let k = 0; k < 60 && hi / lo >= tolerance; k++) {
    const mid = Math.sqrt(lo * hi);
    if (f(mid) > target) lo = mid;
    else hi = mid;
  }
  return Math.sqrt(lo * hi);
}

/**
 * Relative noise g that makes the weighted residuals r (y units) of a fit have χ²/dof = 1, given
 * each point's floor share q (y units): Σ r²/(g² + q²) = dof, solved by bisection (monotone in g).
 */
export function relativeFromResiduals(r: ArrayLike<number>, q: ArrayLike<number>, dof: number): number {
  const n = r.length;
  const chi = (g: number) => {
    let t = 0;
    for (let k = 0; k < n; k++) t += (r[k] * r[k]) / (g * g + q[k] * q[k] || Number.MIN_VALUE);
    return t;
  };
  return solveRelative(chi, dof, 1.002);
}

/** The noise model from the user's accuracy statement, combined with what the readings show. */
export function noiseFromAccuracy(spec: AccuracySpec, estimatedFloor: number | undefined, n: number): NoiseModel {
  return {
    floor: Math.max(spec.offset, estimatedFloor ?? 0),
    relative: Math.max(spec.gain, MIN_RELATIVE),
    floorSource: estimatedFloor !== undefined && estimatedFloor > spec.offset ? 'readings' : 'accuracy',
    floorReadings: n,
    relativeSource: 'accuracy',
  };
}

/**
 * 5-point running median of currents along the bias order. Whether a reading stands above the floor,
 * and how much it weighs, are judged on it rather than on the reading itself, so that a reading's own
 * noise does not decide whether it enters or how much it counts (which would bias what is kept).
 * `out` (of the same length, not `values` itself) receives the result when given.
 */
export function runningMedian(values: ArrayLike<number>, out = new Float64Array(values.length)): Float64Array {
  const n = values.length;
  for (let j = 0; j < n; j++) {
    if (j < 2 || j > n - 3) {
      // At the ends the window would hold the neighbours on one side only: on a rising curve that
      // is a biased value, so the reading stands for itself there.
      out[j] = values[j];
      continue;
    }
    const a = values[j - 2];
    const b = values[j - 1];
    const c = values[j];
    const d = values[j + 1];
    const e = values[j + 2];
    const m = median5(a, b, c, d, e);
    const sum = a + b + c + d + e;
    // A NaN among them, or a zero that may be +0 or −0: the sort decides what stands in the middle.
    out[j] = m !== 0 && !Number.isNaN(sum) ? m : sortedMiddle(values, j - 2);
  }
  return out;
}

/**
 * The middle of five values (no NaN) by at most six comparisons: with the pairs ordered, p ≤ q and
 * r ≤ s, the smaller of p and r lies below three others and cannot be the median, which is then
 * the second smallest of the four values left.
 */
function median5(a: number, b: number, c: number, d: number, e: number): number {
  let p = Math.min(a, b);
  let q = Math.max(a, b);
  let r = Math.min(c, d);
  let s = Math.max(c, d);
  if (r < p) {
    const t = p;
    const u = q;
    p = r;
    q = s;
    r = t;
    s = u;
  }
  // Drop p; the second smallest of q, e and the ordered pair r ≤ s.
  const lo = Math.min(e, q);
  const hi = Math.max(e, q);
  return lo < r ? Math.min(hi, r) : Math.min(lo, s);
}

/** The middle of values[a…a+4] as the stable insertion sort orders them. */
function sortedMiddle(values: ArrayLike<number>, a: number): number {
  const buf = [0, 0, 0, 0, 0];
  for (let q = 0; q < 5; q++) {
    const x = values[a + q];
    let r = q - 1;
    while (r >= 0 && buf[r] > x) {
      buf[r + 1] = buf[r];
      r--;
    }
    buf[r + 1] = x;
  }
  return buf[2];
}
