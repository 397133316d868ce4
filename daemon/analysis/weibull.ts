/**
 * Two-parameter Weibull analysis of breakdown data (a field, a charge or a time to breakdown per
 * device): maximum-likelihood fit with right-censored units (devices that survived the test),
 * confidence bounds by the likelihood ratio or the Fisher matrix, median-rank plotting positions,
 * the Anderson–Darling goodness of fit, a test for a bent plot (two populations), and Poisson area
 * scaling. Pure maths; no I/O.
 *
 *   F(x) = 1 − exp[−a·(x/η)^β]
 *
 * β is the shape (the slope of the Weibull plot), η the scale (the 63.2 % point of a device of the
 * reference area) and a = A/A_ref the device's area relative to the reference area (1 when all
 * devices have the reference area). That per-device factor is the weakest-link (Poisson defect)
 * area scaling: a device of area A fails when any of its A/A_ref independent reference-area
 * patches fails, so 1 − F_A = (1 − F_ref)^(A/A_ref) (Wu & Suñé, IEEE Trans. Electron Devices 56,
 * 1433 (2009), who use it as the standard check of intrinsic breakdown statistics; the same
 * weakest-link scaling is common practice across dielectric reliability). Moving η from area A1 to A2 gives
 * η2 = η1·(A1/A2)^(1/β) with β unchanged.
 *
 * Method (IEC 61649:2008, Weibull analysis, describes maximum likelihood with censored data and
 * both kinds of bounds; in our own words):
 * - log-likelihood ℓ = Σ_F [ln β − β ln η + (β − 1) ln x + ln a] − Σ_all a (x/η)^β (F: failures);
 * - setting ∂ℓ/∂η = 0 gives η^β = Σ a x^β / r (r failures), and ∂ℓ/∂β = 0 then reduces to one
 *   equation in β, g(β) = 1/β + mean_F(ln x) − Σ a x^β ln x / Σ a x^β = 0, which is strictly
 *   decreasing in β and so has a single root (solved by safeguarded Newton steps inside a bracket);
 * - Fisher-matrix bounds: the inverse of the observed information (minus the Hessian of ℓ at the
 *   optimum) gives the variances, and the bounds are taken on the log scale, β·exp(±z·SE/β),
 *   which keeps them positive (Nelson, Applied Life Data Analysis, 1982);
 * - likelihood-ratio bounds: every value θ with 2[ℓ̂ − ℓ_profile(θ)] ≤ χ²₁(C) (the profile
 *   maximises ℓ over the other parameter); they are the better choice for the small lots typical of
 *   breakdown tests (Meeker & Escobar, Statistical Methods for Reliability Data, 1998, ch. 8).
 */
import { gridResolution } from './robust.js';
import { AnalysisError } from './errors.js';
import { seededUniform } from './random.js';

/** One device: its value (field, charge, time …), whether it survived, and its area factor. */
export interface WeibullData {
  /** Breakdown values (failures) or the value each survivor reached (censored), all > 0. */
  readonly values: ArrayLike<number>;
  /** true (or non-zero) where the device did not break down: right-censored at its value. */
  readonly censored?: ArrayLike<boolean | number>;
  /** Device area relative to the reference area (default 1 for every device). */
  readonly areaFactor?: ArrayLike<number>;
}

export interface WeibullFit {
  readonly n: number;
  readonly failures: number;
  readonly censored: number;
  readonly shape: number;
  readonly scale: number;
  /** ℓ at the optimum (full log-likelihood, as scipy's logpdf/logsf sums give it). */
  readonly logLikelihood: number;
  /** Inverse observed information in (β, η): var β, cov, var η. */
  readonly covariance: { readonly shapeShape: number; readonly shapeScale: number; readonly scaleScale: number };
}

export type BoundsMethod = 'likelihood-ratio' | 'fisher';

export interface Interval {
  readonly value: number;
  readonly low: number;
  readonly high: number;
}

/** Internal, normalised form of the data: t = x / s so that sums of t^β do not overflow. */
interface Prepared {
  readonly n: number;
  readonly r: number;
  readonly s: number;
  readonly lnT: Float64Array;
  readonly fail: Uint8Array;
  readonly a: Float64Array;
  readonly lnA: Float64Array;
  /** Σ over failures of ln t and of ln a. */
  readonly sumLnTF: number;
  readonly sumLnAF: number;
  readonly maxLnT: number;
}

function prepare(d: WeibullData): Prepared {
  const n = d.values.length;
  if (n === 0) throw new AnalysisError('TOO_FEW_POINTS', 'Weibull analysis needs at least two devices that broke down; got none', 'values');
  if (d.censored && d.censored.length !== n) throw new AnalysisError('BAD_INPUT', `censored flags: ${d.censored.length} for ${n} values`, 'censored');
  if (d.areaFactor && d.areaFactor.length !== n) throw new AnalysisError('BAD_INPUT', `area factors: ${d.areaFactor.length} for ${n} values`, 'areaFactor');
  const fail = new Uint8Array(n);
  const a = new Float64Array(n);
  const lnA = new Float64Array(n);
  let lnSum = 0;
  for (let i = 0; i < n; i++) {
    const x = d.values[i];
    if (!(x > 0) || !Number.isFinite(x)) throw new AnalysisError('BAD_INPUT', `value ${i + 1} is ${x}: Weibull values must be finite and > 0`, 'values');
    fail[i] = d.censored?.[i] ? 0 : 1;
    const ai = d.areaFactor ? d.areaFactor[i] : 1;
    if (!(ai > 0) || !Number.isFinite(ai)) throw new AnalysisError('BAD_INPUT', `area factor ${i + 1} is ${ai}: must be finite and > 0`, 'areaFactor');
    a[i] = ai;
    lnA[i] = Math.log(ai);
    lnSum += Math.log(x);
  }
  const s = Math.exp(lnSum / n);
  const lnT = new Float64Array(n);
  let r = 0;
  let sumLnTF = 0;
  let sumLnAF = 0;
  let maxLnT = -Infinity;
  let minF = Infinity;
  let maxF = -Infinity;
  for (let i = 0; i < n; i++) {
    lnT[i] = Math.log(d.values[i] / s);
    if (lnT[i] > maxLnT) maxLnT = lnT[i];
    if (fail[i]) {
      r++;
      sumLnTF += lnT[i];
      sumLnAF += lnA[i];
      minF = Math.min(minF, lnT[i]);
      maxF = Math.max(maxF, lnT[i]);
    }
  }
  if (r < 2) throw new AnalysisError('TOO_FEW_POINTS', `Weibull analysis needs at least two devices that broke down; got ${r} of ${n}`, 'values');
  if (!(maxF > minF)) throw new AnalysisError('BAD_INPUT', 'all breakdown values are equal: the Weibull shape is not defined', 'values');
  return { n, r, s, lnT, fail, a, lnA, sumLnTF, sumLnAF, maxLnT };
}

/**
 * Weighted sums at shape β of a·t^β (scaled by exp(−β·m) to stay finite), ·ln t and ·ln² t, with
 * t measured from a shift c (ln(t) − c): returns lnS (log of Σ a t^β, unscaled), m1 = Σ w ln t / Σ w
 * and m2 = Σ w ln² t / Σ w, w = a t^β.
 */
function moments(p: Prepared, beta: number, c = 0): { lnS: number; m1: number; m2: number } {
  const m = p.maxLnT - c;
  let s0 = 0;
  let s1 = 0;
  let s2 = 0;
  for (let i = 0; i < p.n; i++) {
    const u = p.lnT[i] - c;
    const w = p.a[i] * Math.exp(beta * (u - m));
    s0 += w;
    s1 += w * u;
    s2 += w * u * u;
  }
  return { lnS: Math.log(s0) + beta * m, m1: s1 / s0, m2: s2 / s0 };
}

/** ℓ(β, η_t) on the normalised data (η_t = η / s); the original ℓ is this minus r·ln s. */
function logLikT(p: Prepared, beta: number, lnEtaT: number): number {
  let sum = 0;
  for (let i = 0; i < p.n; i++) sum += p.a[i] * Math.exp(beta * (p.lnT[i] - lnEtaT));
  return p.r * Math.log(beta) - p.r * beta * lnEtaT + (beta - 1) * p.sumLnTF + p.sumLnAF - sum;
}

/**
 * The root of a strictly decreasing function f on (0, ∞) in u = ln β: brackets it by doubling from
 * `start`, then Newton steps (df = derivative with respect to β) kept inside the bracket, falling
 * back to bisection.
 */
function decreasingRoot(f: (beta: number) => { f: number; df: number }, start: number): number {
  let lo = Math.log(start);
  let hi = lo;
  let flo = f(Math.exp(lo)).f;
  let fhi = flo;
  for (let k = 0; flo < 0 && k < 200; k++) {
    hi = lo;
    fhi = flo;
    lo -= 1;
    flo = f(Math.exp(lo)).f;
  }
  for (let k = 0; fhi > 0 && k < 200; k++) {
    lo = hi;
    flo = fhi;
    hi += 1;
    fhi = f(Math.exp(hi)).f;
  }
  if (!(flo >= 0 && fhi <= 0)) throw new AnalysisError('BAD_INPUT', 'the Weibull likelihood has no maximum for these data (shape unbounded)', 'values');
  let u = (lo + hi) / 2;
  for (let it = 0; it < 200; it++) {
    const beta = Math.exp(u);
    const { f: fu, df } = f(beta);
    if (fu === 0) return beta;
    if (fu > 0) lo = u;
    else hi = u;
    // Newton in u: d f/du = β·df.
    let next = u - fu / (beta * df);
    if (!(next > lo && next < hi) || !Number.isFinite(next)) next = (lo + hi) / 2;
    if (Math.abs(next - u) < 1e-15 * Math.max(1, Math.abs(u)) || hi - lo < 1e-15) return Math.exp(next);
    u = next;
  }
  return Math.exp(u);
}

/** ML shape on prepared data. */
function mlShape(p: Prepared): number {
  const meanF = p.sumLnTF / p.r;
  return decreasingRoot((beta) => {
    const m = moments(p, beta);
    return { f: 1 / beta + meanF - m.m1, df: -1 / (beta * beta) - (m.m2 - m.m1 * m.m1) };
  }, 1);
}

/** ln η_t that maximises ℓ at a given β: η_t^β = Σ a t^β / r. */
function lnEtaAt(p: Prepared, beta: number): number {
  return (moments(p, beta).lnS - Math.log(p.r)) / beta;
}

export function fitWeibull(d: WeibullData): WeibullFit {
  const p = prepare(d);
  return fitPrepared(p);
}

function fitPrepared(p: Prepared): WeibullFit {
  const beta = mlShape(p);
  const lnEtaT = lnEtaAt(p, beta);
  const eta = p.s * Math.exp(lnEtaT);
  // Observed information in (β, η) at the optimum (Σ a z = r there).
  let szl = 0;
  let szl2 = 0;
  for (let i = 0; i < p.n; i++) {
    const L = p.lnT[i] - lnEtaT;
    const z = p.a[i] * Math.exp(beta * L);
    szl += z * L;
    szl2 += z * L * L;
  }
  const Ibb = p.r / (beta * beta) + szl2;
  const Ibe = -(beta / eta) * szl;
  const Iee = (beta * beta * p.r) / (eta * eta);
  const det = Ibb * Iee - Ibe * Ibe;
  return {
    n: p.n,
    failures: p.r,
    censored: p.n - p.r,
    shape: beta,
    scale: eta,
    logLikelihood: logLikT(p, beta, lnEtaT) - p.r * Math.log(p.s),
    covariance: { shapeShape: Iee / det, shapeScale: -Ibe / det, scaleScale: Ibb / det },
  };
}

/** The full log-likelihood at (β, η) (failures' log density plus survivors' log survival). */
export function weibullLogLikelihood(d: WeibullData, shape: number, scale: number): number {
  const p = prepare(d);
  return logLikT(p, shape, Math.log(scale / p.s)) - p.r * Math.log(p.s);
}

// ---------------------------------------------------------------------------------------------
// Normal and χ² quantiles

/**
 * Standard normal quantile Φ⁻¹(p): P. J. Acklam's rational approximation (relative error below
 * 1.2e-9 over the whole range), enough for confidence levels.
 */
export function normalQuantile(p: number): number {
  if (!(p > 0 && p < 1)) throw new AnalysisError('BAD_INPUT', `probability ${p} must lie strictly between 0 and 1`, 'confidence');
  const a = [-3.969683028665376e1, 2.209460984245205e2, -2.759285104469687e2, 1.38357751867269e2, -3.066479806614716e1, 2.506628277459239];
  const b = [-5.447609879822406e1, 1.615858368580409e2, -1.556989798598866e2, 6.680131188771972e1, -1.328068155288572e1];
  const c = [-7.784894002430293e-3, -3.223964580411365e-1, -2.400758277161838, -2.549732539343734, 4.374664141464968, 2.938163982698783];
  const d = [7.784695709041462e-3, 3.224671290700398e-1, 2.445134137142996, 3.754408661907416];
  const plow = 0.02425;
  if (p < plow) {
    const q = Math.sqrt(-2 * Math.log(p));
    return (((((c[0] * q + c[1]) * q + c[2]) * q + c[3]) * q + c[4]) * q + c[5]) / ((((d[0] * q + d[1]) * q + d[2]) * q + d[3]) * q + 1);
  }
  if (p > 1 - plow) return -normalQuantile(1 - p);
  const q = p - 0.5;
  const r = q * q;
  return ((((((a[0] * r + a[1]) * r + a[2]) * r + a[3]) * r + a[4]) * r + a[5]) * q) / (((((b[0] * r + b[1]) * r + b[2]) * r + b[3]) * r + b[4]) * r + 1);
}

/** χ² quantile with one degree of freedom at probability C: the square of Φ⁻¹((1 + C)/2). */
export function chiSquare1Quantile(confidence: number): number {
  const z = normalQuantile((1 + confidence) / 2);
  return z * z;
}

// ---------------------------------------------------------------------------------------------
// Bounds

/**
 * Profile log-likelihood (normalised units) of q_k, the value at which a reference-area device's
 * cumulative hazard (x/η)^β equals k: η = q·k^(−1/β), maximised over β. k = 1 gives η itself;
 * k = A1/A2 gives η scaled to area A2; k = −ln(1 − p) gives the p-quantile. ℓ(β | q) is concave
 * in β, so its maximum is the single root of its derivative.
 */
function profileQ(p: Prepared, lnQT: number, k: number): number {
  let sumLF = 0;
  for (let i = 0; i < p.n; i++) if (p.fail[i]) sumLF += p.lnT[i] - lnQT;
  const beta = decreasingRoot((b) => {
    const m = moments(p, b, lnQT);
    const S = Math.exp(m.lnS);
    // d/dβ of r ln β + Σ_F ln(t/q)·β − k Σ a (t/q)^β (constant terms dropped).
    return { f: p.r / b + sumLF - k * S * m.m1, df: -p.r / (b * b) - k * S * m.m2 };
  }, 1);
  return logLikT(p, beta, lnQT - Math.log(k) / beta);
}

/** Profile of β (η maximised out). */
function profileBeta(p: Prepared, beta: number): number {
  return logLikT(p, beta, lnEtaAt(p, beta));
}

/**
 * Both solutions of ℓ̂ − prof(u) = Δ around u0 (u on a log scale), found by stepping outwards by
 * `step` until the drop exceeds Δ, then bisection.
 */
function lrInterval(prof: (u: number) => number, lHat: number, u0: number, step: number, delta: number): [number, number] {
  const solve = (dir: number): number => {
    let inner = u0;
    let outer = u0 + dir * step;
    for (let k = 0; lHat - prof(outer) < delta; k++) {
      inner = outer;
      outer = u0 + dir * step * 2 ** (k + 1);
      if (k > 60) return dir * Infinity;
    }
    for (let it = 0; it < 200 && Math.abs(outer - inner) > 1e-13 * Math.max(1, Math.abs(inner)); it++) {
      const mid = (inner + outer) / 2;
      if (lHat - prof(mid) < delta) inner = mid;
      else outer = mid;
    }
    return (inner + outer) / 2;
  };
  return [solve(-1), solve(1)];
}

export interface WeibullBounds {
  readonly method: BoundsMethod;
  readonly confidence: number;
  readonly shape: Interval;
  readonly scale: Interval;
}

function checkConfidence(c: number): void {
  if (!(c > 0 && c < 1)) throw new AnalysisError('BAD_INPUT', `confidence ${c} must lie between 0 and 1 (e.g. 0.9 for 90 % two-sided bounds)`, 'confidence');
}

/** Two-sided bounds on β and η at the given confidence (e.g. 0.9: 5 % below, 5 % above). */
export function weibullBounds(d: WeibullData, confidence = 0.9, method: BoundsMethod = 'likelihood-ratio'): WeibullBounds {
  checkConfidence(confidence);
  const p = prepare(d);
  const fit = fitPrepared(p);
  return {
    method,
    confidence,
    shape: shapeInterval(p, fit, confidence, method),
    scale: quantityInterval(p, fit, 1, confidence, method),
  };
}

function shapeInterval(p: Prepared, fit: WeibullFit, confidence: number, method: BoundsMethod): Interval {
  const beta = fit.shape;
  const se = Math.sqrt(fit.covariance.shapeShape);
  if (method === 'fisher') {
    const z = normalQuantile((1 + confidence) / 2);
    return { value: beta, low: beta * Math.exp((-z * se) / beta), high: beta * Math.exp((z * se) / beta) };
  }
  const lHat = fit.logLikelihood + p.r * Math.log(p.s);
  const [a, b] = lrInterval((u) => profileBeta(p, Math.exp(u)), lHat, Math.log(beta), Math.max(0.02, se / beta), chiSquare1Quantile(confidence) / 2);
  return { value: beta, low: Math.exp(a), high: Math.exp(b) };
}

/** Bounds on q_k = η·k^(1/β) (see profileQ). */
function quantityInterval(p: Prepared, fit: WeibullFit, k: number, confidence: number, method: BoundsMethod): Interval {
  const { shape: beta, scale: eta, covariance: cv } = fit;
  const value = eta * k ** (1 / beta);
  // Delta method for ln q = ln η + ln k / β.
  const gb = -Math.log(k) / (beta * beta);
  const ge = 1 / eta;
  const varLn = gb * gb * cv.shapeShape + 2 * gb * ge * cv.shapeScale + ge * ge * cv.scaleScale;
  const seLn = Math.sqrt(Math.max(varLn, 0));
  if (method === 'fisher') {
    const z = normalQuantile((1 + confidence) / 2);
    return { value, low: value * Math.exp(-z * seLn), high: value * Math.exp(z * seLn) };
  }
  const lHat = fit.logLikelihood + p.r * Math.log(p.s);
  const u0 = Math.log(value / p.s);
  const [a, b] = lrInterval((u) => profileQ(p, u, k), lHat, u0, Math.max(1e-3, seLn), chiSquare1Quantile(confidence) / 2);
  return { value, low: p.s * Math.exp(a), high: p.s * Math.exp(b) };
}

/**
 * The value below which a fraction `fraction` of devices of area ratio `areaRatio` (to the reference
 * area) break down, with bounds: x_p = η·(−ln(1 − p)/areaRatio)^(1/β).
 */
export function weibullQuantile(d: WeibullData, fraction: number, confidence = 0.9, method: BoundsMethod = 'likelihood-ratio', areaRatio = 1): Interval {
  checkConfidence(confidence);
  if (!(fraction > 0 && fraction < 1)) throw new AnalysisError('BAD_INPUT', `fraction ${fraction} must lie between 0 and 1`, 'fraction');
  const p = prepare(d);
  return quantityInterval(p, fitPrepared(p), -Math.log1p(-fraction) / areaRatio, confidence, method);
}

/**
 * η moved from area `fromArea` to `toArea` with bounds: η2 = η1·(A1/A2)^(1/β) (weakest-link area
 * scaling; the bounds account for the uncertainty of β as well as of η).
 */
export function scaledScale(d: WeibullData, fromArea: number, toArea: number, confidence = 0.9, method: BoundsMethod = 'likelihood-ratio'): Interval {
  if (!(fromArea > 0) || !(toArea > 0)) throw new AnalysisError('BAD_INPUT', 'areas for scaling must be > 0', 'area');
  checkConfidence(confidence);
  const p = prepare(d);
  return quantityInterval(p, fitPrepared(p), fromArea / toArea, confidence, method);
}

/** The closed form of the area scaling: η2 = η1·(A1/A2)^(1/β). */
export function areaScaledScale(scale: number, shape: number, fromArea: number, toArea: number): number {
  return scale * (fromArea / toArea) ** (1 / shape);
}

export function weibullCdf(x: number, shape: number, scale: number): number {
  return x <= 0 ? 0 : -Math.expm1(-((x / scale) ** shape));
}

// ---------------------------------------------------------------------------------------------
// Plotting positions

/** Bernard's approximation to the median rank of the i-th of n ordered failures: (i − 0.3)/(n + 0.4). */
export function bernardRank(i: number, n: number): number {
  return (i - 0.3) / (n + 0.4);
}

export interface PlotPoint {
  /** The device's value. */
  readonly x: number;
  /** Median-rank estimate of the fraction failed at x. */
  readonly F: number;
  /** Index of the device in the input. */
  readonly index: number;
}

/**
 * Plotting positions of the failures, in increasing x. Complete samples: Bernard's median ranks.
 * With survivors, each failure's order number is adjusted for the survivors below it (L. G.
 * Johnson, The Statistical Treatment of Fatigue Experiments, 1964: new order = (reverse rank ×
 * previous order + n + 1)/(reverse rank + 1)) and then put into Bernard's formula. Ties: failures
 * before survivors at the same value (common practice).
 */
export function medianRankPoints(d: WeibullData): PlotPoint[] {
  const n = d.values.length;
  const idx = Array.from({ length: n }, (_, k) => k);
  const isCens = (k: number) => Boolean(d.censored?.[k]);
  idx.sort((a, b) => d.values[a] - d.values[b] || Number(isCens(a)) - Number(isCens(b)) || a - b);
  const out: PlotPoint[] = [];
  let order = 0;
  for (let pos = 0; pos < n; pos++) {
    const k = idx[pos];
    if (isCens(k)) continue;
    const reverse = n - pos;
    order = (reverse * order + n + 1) / (reverse + 1);
    out.push({ x: d.values[k], F: bernardRank(order, n), index: k });
  }
  return out;
}

/** The Weibull plot's ordinate: W = ln(−ln(1 − F)). */
export function weibullPlotY(F: number): number {
  return Math.log(-Math.log1p(-F));
}

// ---------------------------------------------------------------------------------------------
// Goodness of fit

export interface AndersonDarling {
  readonly statistic: 'anderson-darling';
  /** A² with both parameters estimated. */
  readonly value: number;
  /** A²·(1 + 0.2/√n), compared with the critical values below. */
  readonly modified: number;
  /** Upper-tail critical values of the modified statistic (D'Agostino & Stephens 1986, Table 4.17, from memory; a test checks them by simulation). */
  readonly critical: { readonly '0.10': number; readonly '0.05': number; readonly '0.01': number };
  /** The Weibull model is rejected at the 5 % level. */
  readonly rejected: boolean;
}

export const AD_CRITICAL = { '0.10': 0.637, '0.05': 0.757, '0.01': 1.038 } as const;

/**
 * Anderson–Darling statistic of a complete sample against the fitted Weibull. With both parameters
 * estimated its distribution does not depend on them (it is that of the smallest-extreme-value
 * case for ln x), hence one table of critical values.
 */
export function andersonDarling(values: ArrayLike<number>, shape: number, scale: number): AndersonDarling {
  const x = Float64Array.from(values).sort();
  const n = x.length;
  let s = 0;
  for (let i = 0; i < n; i++) {
    // ln F(x_i) and ln(1 − F(x_{n−1−i})) computed without cancellation.
    const zi = (x[i] / scale) ** shape;
    const zj = (x[n - 1 - i] / scale) ** shape;
    const lnF = Math.log(-Math.expm1(-zi));
    const lnS = -zj;
    s += (2 * i + 1) * (lnF + lnS);
  }
  const value = -n - s / n;
  const modified = value * (1 + 0.2 / Math.sqrt(n));
  return { statistic: 'anderson-darling', value, modified, critical: AD_CRITICAL, rejected: modified > AD_CRITICAL['0.05'] };
}

// ---------------------------------------------------------------------------------------------
// Bent plots: two populations

export interface BendResult {
  /** The split: the lowest `lower` failures form one branch, the rest the other. */
  readonly lower: number;
  readonly upper: number;
  /** The value at which the branches meet (the largest x of the lower branch). */
  readonly at: number;
  /** The Weibull shape of each branch (1 / the slope of ln x on W). */
  readonly lowerShape: number;
  readonly upperShape: number;
  /** Fraction of the one-line residual sum of squares that the two lines remove. */
  readonly statistic: number;
  /** Parametric-bootstrap p-value of the statistic under one Weibull population. */
  readonly pValue: number;
  readonly bootstrap: number;
}

interface Seg {
  sx: number;
  sy: number;
  sxx: number;
  sxy: number;
  syy: number;
  n: number;
}

function sse(s: Seg): { sse: number; slope: number } {
  const vx = s.sxx - (s.sx * s.sx) / s.n;
  const vy = s.syy - (s.sy * s.sy) / s.n;
  const cxy = s.sxy - (s.sx * s.sy) / s.n;
  if (!(vx > 0)) return { sse: Math.max(vy, 0), slope: Number.NaN };
  return { sse: Math.max(vy - (cxy * cxy) / vx, 0), slope: cxy / vx };
}

/** The best split of points (u, v), ordered, into two straight lines of v on u (≥ minLo, ≥ minHi points). */
function bestSplit(
  u: ArrayLike<number>,
  v: ArrayLike<number>,
  minLo: number,
  minHi: number,
): { k: number; stat: number; slopeLo: number; slopeHi: number } | null {
  const m = u.length;
  if (m < minLo + minHi + 2) return null;
  const tot: Seg = { sx: 0, sy: 0, sxx: 0, sxy: 0, syy: 0, n: m };
  for (let i = 0; i < m; i++) {
    tot.sx += u[i];
    tot.sy += v[i];
    tot.sxx += u[i] * u[i];
    tot.sxy += u[i] * v[i];
    tot.syy += v[i] * v[i];
  }
  const one = sse(tot).sse;
  if (!(one > 0)) return null;
  const lo: Seg = { sx: 0, sy: 0, sxx: 0, sxy: 0, syy: 0, n: 0 };
  let best = { k: -1, stat: -Infinity, slopeLo: Number.NaN, slopeHi: Number.NaN };
  for (let i = 0; i < m - minHi; i++) {
    lo.sx += u[i];
    lo.sy += v[i];
    lo.sxx += u[i] * u[i];
    lo.sxy += u[i] * v[i];
    lo.syy += v[i] * v[i];
    lo.n++;
    if (lo.n < minLo) continue;
    const hi: Seg = { sx: tot.sx - lo.sx, sy: tot.sy - lo.sy, sxx: tot.sxx - lo.sxx, sxy: tot.sxy - lo.sxy, syy: tot.syy - lo.syy, n: m - lo.n };
    const a = sse(lo);
    const b = sse(hi);
    const stat = 1 - (a.sse + b.sse) / one;
    if (stat > best.stat) best = { k: lo.n, stat, slopeLo: a.slope, slopeHi: b.slope };
  }
  return best.k < 0 ? null : best;
}

function plotArrays(d: WeibullData): { lnx: Float64Array; w: Float64Array; x: Float64Array } {
  const pts = medianRankPoints(d);
  return {
    lnx: Float64Array.from(pts, (q) => Math.log(q.x)),
    w: Float64Array.from(pts, (q) => weibullPlotY(q.F)),
    x: Float64Array.from(pts, (q) => q.x),
  };
}

/** Smallest branches the bend test considers: an early-failure tail is often only a few devices. */
const MIN_LOWER = 2;
const MIN_UPPER = 4;

/**
 * Does the Weibull plot bend? Two straight branches (the lowest k failures, at least 2, and the
 * rest, at least 4), each a regression of ln x on W (the values are what is random; the ranks are
 * fixed), are compared with one line by the share of residual sum of squares they remove; its p-value comes from a parametric bootstrap: lots drawn from the fitted Weibull, survivors censored
 * at the values they reached, analysed the same way. Returns null when there are too few failures
 * (fewer than 8) to tell.
 */
export function bendTest(d: WeibullData, fit: WeibullFit, bootstrap = 199, seed = 20240611): BendResult | null {
  const { lnx, w, x } = plotArrays(d);
  const best = bestSplit(w, lnx, MIN_LOWER, MIN_UPPER);
  if (!best) return null;
  const n = d.values.length;
  const rnd = seededUniform(seed);
  const sim = new Float64Array(n);
  const cens = new Uint8Array(n);
  let exceed = 0;
  for (let b = 0; b < bootstrap; b++) {
    for (let i = 0; i < n; i++) {
      const a = d.areaFactor ? d.areaFactor[i] : 1;
      const v = fit.scale * (-Math.log(rnd()) / a) ** (1 / fit.shape);
      const c = d.censored?.[i] ? d.values[i] : Infinity;
      sim[i] = Math.min(v, c);
      cens[i] = v > c ? 1 : 0;
    }
    const pts = plotArrays({ values: sim, censored: cens });
    const sb = bestSplit(pts.w, pts.lnx, MIN_LOWER, MIN_UPPER);
    if (sb && sb.stat >= best.stat) exceed++;
  }
  return {
    lower: best.k,
    upper: lnx.length - best.k,
    at: x[best.k - 1],
    lowerShape: 1 / best.slopeLo,
    upperShape: 1 / best.slopeHi,
    statistic: best.stat,
    pValue: (exceed + 1) / (bootstrap + 1),
    bootstrap,
  };
}

// ---------------------------------------------------------------------------------------------
// The whole analysis

export interface WeibullOptions {
  readonly confidence?: number;
  readonly bounds?: BoundsMethod;
  /** Unit of the values, carried into the result (SI: "V/m", "C/m^2", "s"). */
  readonly unit?: string;
  /** Area of the devices (or the reference area when devices differ), m². */
  readonly area?: number;
  /** Area to scale η to, m² (needs `area`). */
  readonly toArea?: number;
  /** p-value below which a bent plot is reported (default 0.01). */
  readonly bendLevel?: number;
  readonly bootstrap?: number;
  readonly seed?: number;
  /** How a value is written in warnings (default: SI with the unit). */
  readonly display?: (value: number) => string;
}

export interface WeibullReport {
  readonly n: number;
  readonly failures: number;
  readonly censored: number;
  readonly shape: Interval;
  readonly scale: Interval & { readonly unit: string };
  readonly method: 'maximum-likelihood';
  readonly bounds: { readonly method: BoundsMethod; readonly confidence: number };
  readonly points: readonly { readonly x: number; readonly F: number }[];
  readonly warnings: string[];
  readonly logLikelihood: number;
  readonly covariance: WeibullFit['covariance'];
  readonly goodnessOfFit: AndersonDarling | null;
  readonly bend: BendResult | null;
  readonly area: number | null;
  readonly areaScaling: { readonly fromArea: number; readonly toArea: number; readonly scale: Interval & { readonly unit: string } } | null;
  /** The value by which 1 % of devices (of the reference area) have broken down, with bounds. */
  readonly onePercent: Interval & { readonly unit: string };
}

/**
 * Failures read on a grid coarse against their scatter: the grid step over η, compared with the
 * standard deviation of ln x for a Weibull, π/(β√6) (the smallest-extreme-value distribution's,
 * Johnson, Kotz & Balakrishnan 1995, from memory). Coarse when the step exceeds a fifth of it (our
 * own threshold). Null when the failures do not tie on a grid or the grid is fine.
 */
export function coarseGrid(d: WeibullData, shape: number, scale: number): { step: number; ratio: number; tied: number } | null {
  const failed = Array.from(d.values).filter((_, k) => !d.censored?.[k]);
  const step = gridResolution(failed);
  if (step === undefined) return null;
  const ratio = step / scale / (Math.PI / (shape * Math.sqrt(6)));
  if (ratio <= 0.2) return null;
  const tol = 1e-9 * failed.reduce((m, v) => Math.max(m, Math.abs(v)), 0);
  const sorted = [...failed].sort((a, b) => a - b);
  const tied = sorted.filter((v, k) => (k > 0 && v - sorted[k - 1] <= tol) || (k < sorted.length - 1 && sorted[k + 1] - v <= tol)).length;
  return { step, ratio, tied };
}

export function analyzeWeibull(d: WeibullData, o: WeibullOptions = {}): WeibullReport {
  const confidence = o.confidence ?? 0.9;
  const method = o.bounds ?? 'likelihood-ratio';
  const unit = o.unit ?? '';
  const show = o.display ?? ((v: number) => `${v.toPrecision(4)}${unit ? ` ${unit}` : ''}`);
  checkConfidence(confidence);
  const p = prepare(d);
  const fit = fitPrepared(p);
  const shape = shapeInterval(p, fit, confidence, method);
  const scale = quantityInterval(p, fit, 1, confidence, method);
  const warnings: string[] = [];
  const points = medianRankPoints(d).map((q) => ({ x: q.x, F: q.F }));
  const gof = fit.censored === 0 ? andersonDarling(d.values, fit.shape, fit.scale) : null;
  if (gof?.rejected)
    warnings.push(
      `the Anderson–Darling statistic ${gof.modified.toPrecision(3)} exceeds its 5 % critical value ${AD_CRITICAL['0.05']}: one Weibull distribution does not describe these values well`,
    );
  const bend = bendTest(d, fit, o.bootstrap ?? 199, o.seed);
  if (bend && bend.pValue < (o.bendLevel ?? 0.01)) {
    if (bend.lowerShape < bend.upperShape) {
      warnings.push(
        `the Weibull plot bends at ${show(bend.at)}: the lowest ${bend.lower} failures follow a shallower slope (β ≈ ${bend.lowerShape.toPrecision(3)}) than the other ${bend.upper} (β ≈ ${bend.upperShape.toPrecision(3)}), p = ${bend.pValue.toPrecision(2)} — an early-failure (extrinsic, defect-related) branch below the intrinsic one; a single β and η describe neither`,
      );
    } else {
      warnings.push(
        `the Weibull plot bends at ${show(bend.at)}: the highest ${bend.upper} failures follow a shallower slope (β ≈ ${bend.upperShape.toPrecision(3)}) than the lowest ${bend.lower} (β ≈ ${bend.lowerShape.toPrecision(3)}), p = ${bend.pValue.toPrecision(2)} — two populations (or a test limit); a single β and η describe neither`,
      );
    }
  }
  if (fit.failures < 10) warnings.push(`only ${fit.failures} failures: the maximum-likelihood shape is biased high for small samples and the bounds are wide`);
  const coarse = coarseGrid(d, fit.shape, fit.scale);
  if (coarse)
    warnings.push(
      `${coarse.tied} of ${fit.failures} failures tie on levels ${show(coarse.step)} apart (a ramp's steps): the fit takes each value as exact, though a ramp says only that the device failed within the step before; the step is ${coarse.ratio.toPrecision(2)} of the scatter in ln x, so β and η carry an error the bounds do not show (a finer step is more faithful)`,
    );
  if (fit.censored > 0 && fit.censored >= fit.failures) warnings.push(`${fit.censored} of ${fit.n} devices survived: the fit rests on the lower tail only`);
  let areaScaling: WeibullReport['areaScaling'] = null;
  if (o.toArea !== undefined) {
    if (o.area === undefined) throw new AnalysisError('MISSING_INPUT', "scaling to another area needs the devices' area", 'area');
    const q = quantityInterval(p, fit, o.area / o.toArea, confidence, method);
    areaScaling = { fromArea: o.area, toArea: o.toArea, scale: { ...q, unit } };
  }
  const onePercent = quantityInterval(p, fit, -Math.log1p(-0.01), confidence, method);
  return {
    n: fit.n,
    failures: fit.failures,
    censored: fit.censored,
    shape,
    scale: { ...scale, unit },
    method: 'maximum-likelihood',
    bounds: { method, confidence },
    points,
    warnings,
    logLikelihood: fit.logLikelihood,
    covariance: fit.covariance,
    goodnessOfFit: gof,
    bend,
    area: o.area ?? null,
    areaScaling,
    onePercent: { ...onePercent, unit },
  };
}
