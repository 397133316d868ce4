/**
 * One branch of a sweep through one mechanism: the readings mapped onto the mechanism's plot (each
 * one that cannot enter counted by reason), weights from the noise model, the window (automatic,
 * manual or every usable point), the fit — a weighted straight line, or the mechanism together with
 * a parallel leakage (and a diode's series resistance) where those change the answer — the
 * window-choice uncertainty, the physical parameters, and the checks that keep a wrong answer from
 * being silent.
 *
 * Uncertainties (common practice; Bevington & Robinson 2003 for the weighted fit, JCGM 100:2008
 * (GUM) for combining components): the statistical part is the fit's covariance with the weights
 * 1/σ² of the noise model scaled by χ²/dof (by max(1, χ²/dof) when the user stated the instrument's
 * accuracy); the window part is the spread of the value when the window's ends move by ±5 % and
 * ±10 % of its points (at least one point), less the spread that noise alone gives nested windows
 * (var(θ_w − θ) = |σ_w² − σ²| for nested least-squares fits); the two add in quadrature.
 */
import {
  currentSigma,
  FLOOR_MULTIPLE,
  floorLevel,
  MIN_RELATIVE,
  MIN_RELATIVE_READINGS,
  relativeFromResiduals,
  relativeFromScatter,
  runningMedian,
  TYPICAL_RELATIVE,
  type NoiseModel,
} from './noise-floor.js';
import { AnalysisError } from './errors.js';
import { fitJoint, jointY, type JointData, type JointResult } from './joint-fit.js';
import { fitLine, type LineFit } from './line-fit.js';
import { fmt, type Extraction, type FitPoints, type Mechanism, type ParameterValue, type ResolvedInputs } from './mechanism.js';
import { evalNumber, type compileCustom } from './mechanisms/custom.js';
import { EXCLUDED, REASONS, sortedOrder, type Branch, type SweepClasses, type SweepData } from './sweep-points.js';
import { MIN_WINDOW_POINTS, searchWindow, testRun, type Admissible, type WindowTest } from './window.js';
import { WindowMoments } from './window-moments.js';
import { selectInPlace } from './select.js';
import { REGIME_SEGMENTS, segmentLine } from './segmentation.js';

export type WindowMode = 'all' | 'manual' | 'auto';

export interface BranchRequest {
  readonly mode: WindowMode;
  readonly from?: number;
  readonly to?: number;
  /** True when the noise model came from the user's accuracy statement (σ absolute, not rescaled below 1). */
  readonly absoluteNoise: boolean;
  readonly custom?: ReturnType<typeof compileCustom>;
  readonly columns?: Record<string, ArrayLike<number>>;
  /** Skip the window-choice uncertainty and the refinement search (interim live fits). */
  readonly quick?: boolean;
}

/** The fitted extra terms, in current units: leakage conductance G (A/V) and series resistance (Ω). */
export interface ExtraTerms {
  leakage?: { conductance: number; stdErr: number };
  series?: { resistance: number; stdErr: number };
}

export interface BranchFit {
  readonly sign: 1 | -1 | 0;
  /** Every transformable point, sorted by x. */
  readonly all: FitPoints;
  /** Inclusive index range of the window in `all`. */
  readonly start: number;
  readonly end: number;
  readonly used: FitPoints;
  readonly mode: WindowMode;
  readonly line: LineFit;
  readonly terms: ExtraTerms;
  /** Model value of y at each point of `all` (the line plus the extra terms). */
  readonly model: Float64Array;
  readonly extraction: Extraction;
  readonly parameters: Record<string, ParameterValue>;
  readonly warnings: string[];
  readonly notes: string[];
  readonly plausible: boolean;
  /** The warnings of the checks that made `plausible` false, the deciding one first. */
  readonly failed: readonly string[];
  readonly reasons: Record<string, number>;
  readonly noise: NoiseModel;
  /** The straightness test of the final residuals over the window. */
  readonly test: WindowTest;
}

interface Points {
  x: Float64Array;
  y: Float64Array;
  w: Float64Array;
  v: Float64Array;
  raw: Float64Array;
  current: Float64Array;
  /** Leakage abscissa t = V·e^{−lnOffset}/A (log mechanisms of a bias magnitude). */
  t: Float64Array;
  /** |I| smoothed over neighbouring biases (5-point running median), A: sets the floor's share of σ. */
  ref: Float64Array;
}

/** Maps a branch's readings (or, for sign 0, every usable reading) onto the mechanism's plot. */
function mapPoints(
  mech: Mechanism,
  inputs: ResolvedInputs,
  data: SweepData,
  classes: SweepClasses,
  branch: Branch | undefined,
  request: BranchRequest,
  reasons: Record<string, number>,
): { p: Points; xRisesWithBias: boolean } {
  const count = (r: string) => (reasons[r] = (reasons[r] ?? 0) + 1);
  const area = mech.usesArea && inputs.area !== undefined ? inputs.area : 1;
  const log = mech.yKind === 'log';
  const level = mech.current ? floorLevel(classes.noise) : 0;
  let order: Int32Array;
  if (branch) order = branch.index;
  else {
    const ex = classes.excluded;
    const zeroToo = mech.bias !== 'magnitude';
    const idx = new Int32Array(ex.length);
    let m = 0;
    for (let k = 0; k < ex.length; k++) {
      const e = ex[k];
      if (e === EXCLUDED.none || (e === EXCLUDED.zeroBias && zeroToo)) idx[m++] = k;
    }
    order = idx.subarray(0, m);
  }
  const n = order.length;
  const x = new Float64Array(n);
  const y = new Float64Array(n);
  const sign = branch?.sign ?? 1;
  // The bias as the mechanism sees it is the reading's own when no flat-band shift or sign flip
  // applies: one array then serves for both.
  const sameBias = !!request.custom || mech.bias !== 'magnitude' || (sign === 1 && inputs.flatBand === 0);
  const raw = new Float64Array(n);
  const v = sameBias ? raw : new Float64Array(n);
  const cur = new Float64Array(n);
  const t = new Float64Array(n);
  const ref = new Float64Array(n);
  // The signed currents and their running median live in `ref` and `t` until the loop below
  // overwrites them: it writes position m ≤ j after reading position j, and reads only ahead.
  const signed = ref;
  const rawSign = mech.bias === 'raw';
  const bs = branch?.sign ?? 1;
  for (let j = 0; j < n; j++) {
    const i = data.y[order[j]];
    signed[j] = i * bs * (rawSign ? Math.sign(i) || 1 : 1);
  }
  const smooth = runningMedian(signed, t);
  let m = 0;
  const cols = request.columns ?? {};
  for (let j = 0; j < n; j++) {
    const k = order[j];
    const rawX = data.x[k];
    const rawY = data.y[k];
    const sm = smooth[j];
    let xx: number;
    let yy: number;
    let bias = rawX;
    let tt = 0;
    if (request.custom) {
      const scope: Record<string, number> = {};
      for (const c of Object.keys(cols)) scope[c] = cols[c][k];
      const cx = evalNumber(request.custom.x, scope);
      const cy = evalNumber(request.custom.y, scope);
      if (cx === undefined || cy === undefined) {
        count(REASONS.expression);
        continue;
      }
      if (log && !(cy > 0)) {
        count(REASONS.nonPositiveLog);
        continue;
      }
      xx = cx;
      yy = log ? Math.log(cy) : cy;
    } else {
      let j0 = rawY;
      if (mech.bias === 'magnitude') {
        bias = (rawX - inputs.flatBand) * sign;
        j0 = rawY * sign;
        if (log && (sm <= level || Math.abs(rawY) <= 0.5 * level)) {
          count(REASONS.floor);
          continue;
        }
        if (log && j0 < 0) {
          count(REASONS.againstBias);
          continue;
        }
      } else if (mech.bias === 'temperature') {
        if (!(rawX > 0)) {
          count(REASONS.nonPositiveTemperature);
          continue;
        }
      } else if (log && mech.current && (Math.abs(sm) <= level || Math.abs(rawY) <= 0.5 * level)) {
        count(REASONS.floor);
        continue;
      }
      const jj = j0 / area;
      xx = mech.x(bias, inputs);
      if (log) {
        const mag = mech.bias === 'raw' ? Math.abs(jj) : jj;
        if (!(mag > 0)) {
          count(REASONS.nonPositiveLog);
          continue;
        }
        const off = mech.lnOffset ? mech.lnOffset(bias, inputs) : 0;
        yy = Math.log(mag) - off;
        tt = (bias * Math.exp(-off)) / area;
      } else {
        yy = jj / (mech.linearScale ? mech.linearScale(bias, inputs) : 1);
      }
    }
    if (!Number.isFinite(xx) || !Number.isFinite(yy)) {
      count(REASONS.notFinite);
      continue;
    }
    x[m] = xx;
    y[m] = yy;
    v[m] = bias;
    raw[m] = rawX;
    cur[m] = rawY;
    t[m] = tt;
    ref[m] = Math.max(Math.abs(sm), Math.abs(rawY) * 0.5, Number.MIN_VALUE);
    m++;
  }
  const cut = (a: Float64Array) => a.subarray(0, m);
  const rawCut = cut(raw);
  let p: Points = { x: cut(x), y: cut(y), w: new Float64Array(m), v: v === raw ? rawCut : cut(v), raw: rawCut, current: cut(cur), t: cut(t), ref: cut(ref) };
  // Sort by x ascending (a branch in |bias| order is monotone in x: reversed when x falls with bias).
  const xRisesWithBias = m < 2 || p.x[m - 1] >= p.x[0];
  let descending = true;
  let ascending = true;
  for (let k = 1; k < m && (descending || ascending); k++) {
    if (p.x[k] > p.x[k - 1]) descending = false;
    else if (p.x[k] < p.x[k - 1]) ascending = false;
  }
  if (descending && m > 1) {
    for (const a of new Set([p.x, p.y, p.v, p.raw, p.current, p.t, p.ref])) a.reverse();
  } else if (!ascending) {
    const ident = new Int32Array(m);
    for (let k = 0; k < m; k++) ident[k] = k;
    const ord = sortedOrder(p.x, ident);
    let identity = true;
    for (let k = 0; k < m && identity; k++) if (ord[k] !== k) identity = false;
    if (!identity) {
      // Plain loops: Float64Array.from with a mapping function is several times slower in V8.
      const take = (a: Float64Array) => {
        const out = new Float64Array(m);
        for (let k = 0; k < m; k++) out[k] = a[ord[k]];
        return out;
      };
      p = { x: take(p.x), y: take(p.y), w: p.w, v: take(p.v), raw: take(p.raw), current: take(p.current), t: take(p.t), ref: take(p.ref) };
    }
  }
  return { p, xRisesWithBias };
}

/** Relative noise g for this mechanism's plot, and the weights 1/σ_y² of every point. */
function weigh(mech: Mechanism, inputs: ResolvedInputs, p: Points, base: NoiseModel): NoiseModel {
  const n = p.x.length;
  if (!mech.current) {
    // No current noise model (raw columns, temperatures, custom transforms): unit weights.
    p.w.fill(1);
    return base;
  }
  let g = base.relative;
  let source = base.relativeSource;
  if (base.relativeSource !== 'accuracy') {
    // Every k-th point (at most ~8,000) is plenty to measure a scatter.
    const stride = Math.max(1, Math.floor(n / 8000));
    const m = Math.ceil(n / stride);
    const xs = new Float64Array(m);
    const ly = new Float64Array(m);
    const q = new Float64Array(m);
    for (let j = 0, k = 0; j < m; j++, k += stride) {
      const a = p.ref[k];
      xs[j] = p.x[k];
      ly[j] = mech.yKind === 'log' ? p.y[k] : Math.log(Math.max(Math.abs(p.y[k]), 1e-300));
      q[j] = a > 0 ? base.floor / a : 1e3;
    }
    // The relative part is measured where it dominates: the half of the points with the smallest
    // floor share (a floor estimated a little high would otherwise pull g down through the median).
    const cutQ = selectInPlace(q.slice(), Math.min(m - 1, Math.max(4, m >> 1)));
    let c = 0;
    for (let j = 0; j < m; j++) if (q[j] <= cutQ) c++;
    const kx = new Float64Array(c);
    const ky = new Float64Array(c);
    const kq = new Float64Array(c);
    for (let j = 0, i = 0; j < m; j++) {
      if (q[j] <= cutQ) {
        kx[i] = xs[j];
        ky[i] = ly[j];
        kq[i++] = q[j];
      }
    }
    g = (c >= 5 ? relativeFromScatter(kx, ky, kq) : undefined) ?? relativeFromScatter(xs, ly, q) ?? 0.01;
    g = Math.max(g, MIN_RELATIVE);
    // Readings where a typical relative noise would stand above the floor: with too few of them
    // the scatter is the floor's and says nothing about the relative part, so a small figure read
    // from it is not evidence of a quiet instrument.
    let above = 0;
    for (let j = 0; j < m; j++) if (q[j] < TYPICAL_RELATIVE) above++;
    if (above < MIN_RELATIVE_READINGS && g < TYPICAL_RELATIVE) {
      g = TYPICAL_RELATIVE;
      source = 'typical';
    }
  }
  const noise: NoiseModel = { ...base, relative: g, relativeSource: source };
  setWeights(mech, inputs, p, noise);
  if (mech.yKind === 'log') {
    // ln of a noisy reading is biased low by σ²/(2I²) (second-order delta method): near the floor
    // that bends the low end of the line down and tilts the slope. Taken out here.
    for (let k = 0; k < n; k++) if (p.w[k] > 0) p.y[k] += 0.5 / p.w[k];
  }
  return noise;
}

function setWeights(mech: Mechanism, inputs: ResolvedInputs, p: Points, noise: NoiseModel): void {
  const area = mech.usesArea && inputs.area !== undefined ? inputs.area : 1;
  for (let k = 0; k < p.x.length; k++) {
    const s = currentSigma(noise, p.ref[k]);
    let sy: number;
    if (mech.yKind === 'log') sy = s / p.ref[k];
    else sy = s / area / (mech.linearScale ? mech.linearScale(p.v[k], inputs) : 1);
    p.w[k] = sy > 0 && Number.isFinite(sy) ? 1 / (sy * sy) : 0;
  }
}

/**
 * The relative noise re-measured from the residuals of a straight window (χ²/dof = 1 there), when the
 * scatter estimate was off by more than its own uncertainty allows.
 */
function refineRelative(mech: Mechanism, inputs: ResolvedInputs, p: Points, noise: NoiseModel, s: number, e: number): NoiseModel | undefined {
  const n = e - s + 1;
  if (noise.relativeSource === 'accuracy' || n < 12 || mech.yKind !== 'log') return undefined;
  const f = fitLine(p.x.subarray(s, e + 1), p.y.subarray(s, e + 1), { weights: p.w.subarray(s, e + 1), absoluteWeights: true });
  const chiNu = f.chi2Reduced ?? 1;
  if (Math.abs(chiNu - 1) < 3 * Math.sqrt(2 / f.dof)) return undefined;
  const r = new Float64Array(n);
  const q = new Float64Array(n);
  for (let k = 0; k < n; k++) {
    r[k] = p.y[s + k] - (f.intercept + f.slope * p.x[s + k]);
    q[k] = noise.floor / p.ref[s + k];
  }
  const g = Math.max(MIN_RELATIVE, relativeFromResiduals(r, q, f.dof));
  const out: NoiseModel = { ...noise, relative: g, relativeSource: 'scatter' };
  setWeights(mech, inputs, p, out);
  return out;
}

function pointsOf(p: Points, s: number, e: number): FitPoints {
  const cut = (a: Float64Array) => a.subarray(s, e + 1);
  return { x: cut(p.x), y: cut(p.y), w: cut(p.w), v: cut(p.v), raw: cut(p.raw), current: cut(p.current) };
}

/**
 * An automatic window spanning fewer decades of current than SHORT_WINDOW_DECADES, or less than
 * SHORT_WINDOW_SHARE of the decades the branch's readings above the floor span, with
 * UNEXPLAINED_DECADES or more left outside it, is not a plausible description of the branch.
 */
const SHORT_WINDOW_DECADES = 1.5;
const SHORT_WINDOW_SHARE = 0.3;
const UNEXPLAINED_DECADES = 3;

/** Windows are chosen on at most this many points (every k-th of a longer curve). */
const SELECT_MAX = 20000;
/** Joint fits made while choosing the window use at most this many points. */
const SELECT_JOINT = 5000;

/** Every k-th point (k = ⌈n/max⌉), always with the last; the same arrays when n ≤ max. */
function decimate(p: Points, max: number): { q: Points; index: Int32Array } {
  const n = p.x.length;
  if (n <= max) return { q: p, index: Int32Array.from({ length: n }, (_, k) => k) };
  const k = Math.ceil(n / max);
  const idx: number[] = [];
  for (let j = 0; j < n; j += k) idx.push(j);
  if (idx[idx.length - 1] !== n - 1) idx.push(n - 1);
  const index = Int32Array.from(idx);
  const take = (a: Float64Array) => {
    const out = new Float64Array(index.length);
    for (let j = 0; j < index.length; j++) out[j] = a[index[j]];
    return out;
  };
  return { q: { x: take(p.x), y: take(p.y), w: take(p.w), v: take(p.v), raw: take(p.raw), current: take(p.current), t: take(p.t), ref: take(p.ref) }, index };
}

/** First position in the ascending index list at or after full index k. */
function lowerIndex(idx: Int32Array, k: number): number {
  let lo = 0;
  let hi = idx.length - 1;
  while (lo < hi) {
    const mid = (lo + hi) >> 1;
    if (idx[mid] < k) lo = mid + 1;
    else hi = mid;
  }
  return lo;
}

/** Last position in the ascending index list at or before full index k. */
function upperIndex(idx: Int32Array, k: number): number {
  let lo = 0;
  let hi = idx.length - 1;
  while (lo < hi) {
    const mid = (lo + hi + 1) >> 1;
    if (idx[mid] > k) hi = mid - 1;
    else lo = mid;
  }
  return lo;
}

/** A line's covariance as it would be on 1/f as many points (for the window variants on a decimated curve). */
function scaleLine(l: LineFit, f: number): LineFit {
  return lineOf(
    l.intercept,
    l.slope,
    l.interceptStdErr ** 2 * f,
    l.slopeStdErr ** 2 * f,
    l.covariance * f,
    Math.round(l.n / f),
    Math.max(1, Math.round(l.n / f) - 2),
    l.sse / f,
    l.meanX,
    l.meanY,
    l.sxx / f,
    l.r2,
  );
}

/** A LineFit from a slope, an intercept and their covariance. */
function lineOf(
  a: number,
  b: number,
  va: number,
  vb: number,
  cab: number,
  n: number,
  dof: number,
  chi2: number,
  meanX: number,
  meanY: number,
  sxx: number,
  r2: number,
): LineFit {
  return Object.freeze({
    n,
    dof,
    slope: b,
    intercept: a,
    slopeStdErr: Math.sqrt(Math.max(vb, 0)),
    interceptStdErr: Math.sqrt(Math.max(va, 0)),
    covariance: cab,
    r2,
    residualStdDev: Math.sqrt(chi2 / Math.max(1, dof)),
    sse: chi2,
    chi2Reduced: chi2 / Math.max(1, dof),
    weighted: true,
    meanX,
    meanY,
    sxx,
  });
}

/**
 * Below this many degrees of freedom a window's own χ²/dof is too uncertain to shrink the errors
 * below what the noise model (estimated from the whole branch) gives: the scale is max(1, χ²/dof).
 */
const SMALL_DOF = 20;

/** Weighted line over s..e with the covariance scaled as the noise model demands. */
function plainLine(p: Points, s: number, e: number, absolute: boolean, weighted: boolean): LineFit {
  const xs = p.x.subarray(s, e + 1);
  const ys = p.y.subarray(s, e + 1);
  if (!weighted) return fitLine(xs, ys);
  const f = fitLine(xs, ys, { weights: p.w.subarray(s, e + 1), absoluteWeights: true });
  const c = f.chi2Reduced ?? 1;
  const k = absolute || f.dof < SMALL_DOF ? Math.max(1, c) : c;
  return lineOf(f.intercept, f.slope, f.interceptStdErr ** 2 * k, f.slopeStdErr ** 2 * k, f.covariance * k, f.n, f.dof, f.sse, f.meanX, f.meanY, f.sxx, f.r2);
}

function jointLine(j: JointResult, absolute: boolean, p: Points, s: number, e: number): LineFit {
  const m = j.names.length;
  const chiNu = j.chi2 / Math.max(1, j.dof);
  // fitJoint's covariance is scaled by χ²/dof; with an absolute noise model scale by max(1, χ²/dof).
  const k = absolute || j.dof < SMALL_DOF ? Math.max(1, chiNu) / (chiNu || 1) : 1;
  const cov = (a: number, b: number) => j.covariance[a * m + b] * k;
  let sw = 0;
  let mx = 0;
  let my = 0;
  for (let q = s; q <= e; q++) {
    sw += p.w[q];
    mx += p.w[q] * p.x[q];
    my += p.w[q] * p.y[q];
  }
  mx /= sw || 1;
  my /= sw || 1;
  let syy = 0;
  let sxx = 0;
  for (let q = s; q <= e; q++) {
    syy += p.w[q] * (p.y[q] - my) ** 2;
    sxx += p.w[q] * (p.x[q] - mx) ** 2;
  }
  return lineOf(j.a, j.b, cov(0, 0), cov(1, 1), cov(0, 1), j.n, j.dof, j.chi2, mx, my, sxx, syy > 0 ? 1 - j.chi2 / syy : 1);
}

function jointData(p: Points, diode: boolean): JointData {
  const c = p.current;
  const current = new Float64Array(c.length);
  for (let k = 0; k < c.length; k++) current[k] = Math.abs(c[k]);
  return { x: p.x, y: p.y, w: p.w, v: p.v, t: p.t, current, diode };
}

/** Starting leakage from the low-bias points' excess over the line, and series resistance from the top. */
function startTerms(p: Points, s: number, e: number, a: number, b: number, diode: boolean, lowFirst: boolean): { g: number; rs: number } {
  const n = p.x.length;
  // Up to 200 points on the low-bias side of the window, nearest it.
  const low = lowFirst ? [Math.max(0, s - 200), Math.min(n - 1, Math.max(2, s))] : [Math.max(0, Math.min(e, n - 3)), Math.min(n - 1, e + 200)];
  const ex: number[] = [];
  for (let k = low[0]; k <= low[1]; k++) {
    const line = diode ? Math.exp(a) * Math.expm1(b * p.v[k]) : Math.exp(a + b * p.x[k]);
    const tk = diode ? p.v[k] : p.t[k];
    const d = Math.exp(p.y[k]) - line;
    if (d > 0 && tk > 0) ex.push(d / tk);
  }
  ex.sort((u, v) => u - v);
  const g = ex.length ? ex[ex.length >> 1] : 0;
  let rs = 0;
  if (diode && b > 0) {
    const top = lowFirst ? n - 1 : 0;
    const i = Math.abs(p.current[top]);
    const vj = Math.log(i / Math.exp(a) + 1) / b;
    if (i > 0 && p.v[top] > vj) rs = (p.v[top] - vj) / i;
  }
  return { g, rs };
}

/** Straightness of the residuals y − model over s..e. */
function residualTest(p: Points, model: Float64Array, s: number, e: number): WindowTest {
  const r = new Float64Array(e - s + 1);
  for (let k = s; k <= e; k++) r[k - s] = p.y[k] - model[k];
  const m = new WindowMoments(p.x.subarray(s, e + 1), r, p.w.subarray(s, e + 1));
  return testRun(m, 0, e - s);
}

interface Candidate {
  s: number;
  e: number;
  joint?: JointResult;
}

/** Model values of y for every point, from a plain line or a joint fit. */
function modelValues(p: Points, c: { a: number; b: number; joint?: JointResult }, diode: boolean): Float64Array {
  const out = new Float64Array(p.x.length);
  const j = c.joint;
  if (j) {
    const d = jointData(p, diode);
    for (let k = 0; k < p.x.length; k++) out[k] = jointY(d, k, j.a, j.b, j.g, j.rs);
  } else for (let k = 0; k < p.x.length; k++) out[k] = c.a + c.b * p.x[k];
  return out;
}

/** y with the fitted extra terms taken out (so a straight line is what remains), for window variants. */
function corrected(p: Points, j: JointResult | undefined, diode: boolean): { x: Float64Array; y: Float64Array; w: Float64Array } {
  if (!j) return { x: p.x, y: p.y, w: p.w };
  const n = p.x.length;
  const x = new Float64Array(n);
  const y = new Float64Array(n);
  const w = new Float64Array(n);
  for (let k = 0; k < n; k++) {
    if (diode) {
      const vp = p.v[k] - Math.abs(p.current[k]) * j.rs;
      const id = Math.exp(p.y[k]) - j.g * vp;
      x[k] = vp;
      // ln(e^{a}(e^{b·V'} − 1)) = a + b·V' + ln(1 − e^{−b·V'}): move the last term to the left.
      const corr = j.b * vp > 0 ? Math.log(-Math.expm1(-j.b * vp)) : -Infinity;
      y[k] = id > 0 ? Math.log(id) - corr : Number.NaN;
      w[k] = id > 0 && Number.isFinite(y[k]) ? p.w[k] * (Math.exp(p.y[k]) / id) ** -2 : 0;
    } else {
      const e = Math.exp(p.y[k]);
      const m = e - j.g * p.t[k];
      x[k] = p.x[k];
      y[k] = m > 0 ? Math.log(m) : Number.NaN;
      w[k] = m > 0 ? p.w[k] * (m / e) ** 2 : 0;
    }
    if (!Number.isFinite(y[k])) {
      y[k] = 0;
      w[k] = 0;
    }
  }
  return { x, y, w };
}

/**
 * Fits one branch. `base` is the sweep's noise model (floor, and the relative part when stated by
 * the user); `reasons` arrives with the sweep-wide exclusions and gets this branch's own.
 */
export function fitBranch(
  mech: Mechanism,
  inputs: ResolvedInputs,
  data: SweepData,
  classes: SweepClasses,
  branch: Branch | undefined,
  request: BranchRequest,
  reasons: Record<string, number>,
): BranchFit {
  const { p, xRisesWithBias } = mapPoints(mech, inputs, data, classes, branch, request, reasons);
  const n = p.x.length;
  if (n < 3) {
    throw new AnalysisError(
      'TOO_FEW_POINTS',
      `model '${mech.id}' has ${n} usable point${n === 1 ? '' : 's'} of ${data.x.length}; excluded: ${describe(reasons)}`,
    );
  }
  let xmin = Infinity;
  let xmax = -Infinity;
  for (let k = 0; k < n; k++) {
    if (p.x[k] < xmin) xmin = p.x[k];
    if (p.x[k] > xmax) xmax = p.x[k];
  }
  if (!(xmax > xmin)) {
    throw new AnalysisError(
      'DEGENERATE_X',
      `all ${n} usable readings sit at one bias (${fmt(p.raw[0])}): a constant-stress series, not a sweep; there is no slope to fit`,
    );
  }
  let noise = weigh(mech, inputs, p, classes.noise);
  const weighted = !!mech.current;
  const absolute = request.absoluteNoise;
  const diode = !!mech.series;
  const warnings: string[] = [];
  const notes: string[] = [];
  if (noise.relativeSource === 'typical') {
    notes.push(
      `too few readings stand far enough above the noise floor to show the instrument's relative noise: ${100 * TYPICAL_RELATIVE} % of reading assumed, a typical figure (give the instrument's own, the --accuracy option of fit and rank, or take more readings above ${fmt(noise.floor / TYPICAL_RELATIVE)} A)`,
    );
  }

  // ---- window -------------------------------------------------------------------------------
  // Long curves choose their window on every k-th point (at most SELECT_MAX); the fit itself then
  // uses every point of the window. Indices below are into `q`, the selection points.
  const { q, index: qi } = decimate(p, SELECT_MAX);
  const nq = q.x.length;
  let s = 0;
  let e = nq - 1;
  let joint: JointResult | undefined;
  let searchPassed = true;
  let searchFailure: string | undefined;
  let fullRange: [number, number] = [0, n - 1];
  if (request.mode === 'manual') {
    const lo = Math.min(request.from ?? -Infinity, request.to ?? Infinity);
    const hi = Math.max(request.from ?? -Infinity, request.to ?? Infinity);
    let first = -1;
    let last = -1;
    for (let k = 0; k < n; k++) {
      if (p.raw[k] >= lo && p.raw[k] <= hi) {
        if (first < 0) first = k;
        last = k;
      }
    }
    if (first < 0 || last - first + 1 < 3) {
      throw new AnalysisError(
        'TOO_FEW_POINTS',
        `the fit window ${fmt(lo)} to ${fmt(hi)} holds ${first < 0 ? 0 : last - first + 1} usable point${first >= 0 && last === first ? '' : 's'} of this ${branch ? `${branch.sign > 0 ? 'positive' : 'negative'} branch` : 'curve'}; a line needs at least 3 (excluded: ${describe(reasons)})`,
        'window',
      );
    }
    fullRange = [first, last];
    s = lowerIndex(qi, first);
    e = Math.max(s, upperIndex(qi, last));
  } else if (request.mode === 'auto') {
    let yw = q.w;
    if (!weighted) {
      // No noise model: unit weights scaled by the model-free scatter so the χ² test means something.
      const sigma = modelFreeSigma(q.x, q.y);
      yw = new Float64Array(nq).fill(1 / (sigma * sigma));
    }
    if (nq < MIN_WINDOW_POINTS) {
      searchPassed = false;
      searchFailure = `only ${nq} usable point${nq === 1 ? '' : 's'}`;
    } else {
      const search = { slopeSign: mech.slopeSign, admissible: superOhmicTest(mech, inputs, q) };
      // A current that outgrows ohmic leakage dominates at the top of the branch: the window is
      // first sought among runs that reach the highest bias, then anywhere.
      const anchored = mech.superOhmic && !mech.series ? { ...search, anchor: (xRisesWithBias ? 'end' : 'start') as 'start' | 'end' } : undefined;
      let w0 = anchored ? searchWindow(q.x, q.y, yw, anchored) : searchWindow(q.x, q.y, yw, search);
      if (anchored && !w0.passed) w0 = searchWindow(q.x, q.y, yw, search);
      if (weighted && w0.passed && !request.quick) {
        // One refinement: the relative noise from the window's own residuals, then the search again.
        const better = refineRelative(mech, inputs, q, noise, w0.start, w0.end);
        if (better) {
          noise = better;
          if (q !== p) setWeights(mech, inputs, p, noise);
          const w1 = searchWindow(q.x, q.y, q.w, anchored ?? search);
          if (w1.passed) w0 = w1;
        }
      }
      s = w0.start;
      e = w0.end;
      searchPassed = w0.passed;
      searchFailure = w0.test.failure;
      if (weighted && mech.yKind === 'log' && (mech.leakage || mech.series) && w0.passed) {
        const c = extendWithTerms(q, w0, diode, xRisesWithBias, !!mech.leakage, !!mech.series, search);
        if (c) {
          s = c.s;
          e = c.e;
          joint = c.joint;
        }
      }
    }
    fullRange = [qi[s], e === nq - 1 ? n - 1 : qi[e]];
  }
  const [fs, fe] = fullRange;
  const outsideWindow = n - (fe - fs + 1);
  if (outsideWindow > 0) reasons[REASONS.outsideWindow] = (reasons[REASONS.outsideWindow] ?? 0) + outsideWindow;

  // ---- fit --------------------------------------------------------------------------------
  let line = plainLine(p, fs, fe, absolute, weighted);
  const terms0 = { leakage: !!mech.leakage, series: !!mech.series };
  if (joint && q !== p) {
    // The terms were chosen on the selection points: the fit itself runs on every point.
    try {
      joint = fitJoint(jointData(p, diode), fs, fe, terms0, { a: joint.a, b: joint.b, g: joint.g, rs: joint.rs });
    } catch {
      joint = undefined;
    }
  }
  if (!joint && weighted && mech.yKind === 'log' && (mech.leakage || mech.series) && request.mode !== 'auto' && fe - fs + 1 >= 6) {
    // Manual or whole windows: the leakage (and a diode's series resistance) fitted with the line
    // over the same points; it bends the line's ends, so leaving it out would tilt the slope.
    try {
      const st = startTerms(p, fs, fe, line.intercept, line.slope, diode, xRisesWithBias);
      const j = fitJoint(jointData(p, diode), fs, fe, terms0, { a: line.intercept, b: line.slope, g: st.g, rs: st.rs });
      if (j.converged) joint = j;
    } catch {
      /* the plain line stands */
    }
  }
  if (joint) line = jointLine(joint, absolute, p, fs, fe);
  const model = modelValues(p, { a: line.intercept, b: line.slope, joint }, diode);
  const used = pointsOf(p, fs, fe);
  const all = pointsOf(p, 0, n - 1);
  const extraction = mech.extract({
    line,
    used,
    all,
    inputs,
    terms: joint ? { leakage: joint.names.includes('g'), series: joint.names.includes('rs') } : undefined,
  });

  // ---- window-choice uncertainty --------------------------------------------------------------
  const qLine = q === p ? line : scaleLine(line, n / nq);
  const spread = request.mode === 'all' || request.quick ? undefined : windowSpread(mech, inputs, q, s, e, joint, diode, qLine, absolute, weighted, all);
  const windowErr = spread?.parameters ?? {};
  const parameters: Record<string, ParameterValue> = {};
  for (const [k, v] of Object.entries(extraction.parameters)) {
    const u = windowErr[k] ?? 0;
    parameters[k] = { value: v.value, stdErr: Math.hypot(v.stdErr, u), unit: v.unit, statStdErr: v.stdErr, windowStdErr: u };
  }
  const terms: ExtraTerms = {};
  if (joint) {
    const m = joint.names.length;
    const gi = joint.names.indexOf('g');
    const ri = joint.names.indexOf('rs');
    if (gi >= 0 && joint.g > 2 * Math.sqrt(Math.max(0, joint.covariance[gi * m + gi]))) {
      // G multiplies t = V·e^{−lnOffset}/A on the mechanism's plot: it is the conductance itself, A/V.
      const gA = joint.g;
      const se = Math.sqrt(Math.max(0, joint.covariance[gi * m + gi]));
      terms.leakage = { conductance: gA, stdErr: se };
      parameters.leakageResistance = { value: 1 / gA, stdErr: se / (gA * gA), unit: 'ohm', statStdErr: se / (gA * gA), windowStdErr: 0 };
    }
    if (ri >= 0 && joint.rs > 2 * Math.sqrt(Math.max(0, joint.covariance[ri * m + ri]))) {
      const se = Math.sqrt(Math.max(0, joint.covariance[ri * m + ri]));
      terms.series = { resistance: joint.rs, stdErr: se };
      parameters.seriesResistance = { value: joint.rs, stdErr: se, unit: 'ohm', statStdErr: se, windowStdErr: 0 };
    }
    if (joint.stride > 1)
      notes.push(`the joint fit used every ${joint.stride}th point of the window (${joint.n} points); its errors are those of the points used`);
    const what = [
      terms.leakage ? `a parallel leakage of ${fmt(1 / terms.leakage.conductance)} Ω` : '',
      terms.series ? `a series resistance of ${fmt(terms.series.resistance)} Ω` : '',
    ]
      .filter(Boolean)
      .join(' and ');
    if (what) notes.push(`fitted together with ${what} (they bend the straight line at the ends of the window)`);
  }

  // ---- checks -------------------------------------------------------------------------------
  const test = q === p ? residualTest(p, model, fs, fe) : residualTest(q, modelValues(q, { a: line.intercept, b: line.slope, joint }, diode), s, e);
  let plausible = extraction.plausible;
  // The checks that failed, each warning once more, the deciding one first: the extraction's, then these.
  const failed: string[] = [...(extraction.failed ?? (extraction.plausible ? [] : extraction.warnings))];
  const fail = (text: string) => {
    warnings.push(text);
    failed.push(text);
    plausible = false;
  };
  if (request.mode === 'auto' && !searchPassed) {
    fail(
      `no range of this branch follows the mechanism's straight line within the noise (${searchFailure ?? 'none passes'}); the window shown is the least bad`,
    );
  } else if (!test.passed && request.mode !== 'auto') {
    fail(`the window spans a regime change or the mechanism does not describe it: ${test.failure}`);
  } else if (!test.passed && request.mode === 'auto') {
    // The search judged the window on its selection points; the fit made on every point of it must
    // pass the same test (on a diode, an ohmic line through 0.48–0.58 V passed the search and then
    // missed its own readings by χ²/dof 476).
    fail(`the automatic window does not follow the mechanism's line within the noise: ${test.failure}`);
  }
  if (mech.current && request.mode === 'manual' && classes.noise.floor > 0 && branch) {
    // Readings of this branch inside the window that sit at the floor.
    const lo = Math.min(request.from ?? -Infinity, request.to ?? Infinity);
    const hi = Math.max(request.from ?? -Infinity, request.to ?? Infinity);
    let atFloor = 0;
    for (const k of branch.index) {
      if (data.x[k] >= lo && data.x[k] <= hi && Math.abs(data.y[k]) < floorLevel(classes.noise)) atFloor++;
    }
    if (atFloor > 0 && mech.yKind === 'log') {
      fail(
        `the window reaches the noise floor: ${atFloor} readings in it are within ${FLOOR_MULTIPLE} σ of zero (σ = ${fmt(classes.noise.floor)} A) and were left out`,
      );
    }
  }
  const superOhmic = superOhmicTest(mech, inputs, p);
  const so = superOhmic && !superOhmic.ok(fs, fe, line.intercept, line.slope) ? superOhmic.why(fs, fe, line.intercept, line.slope) : undefined;
  if (so) {
    fail(`${so}: the window holds leakage or another regime, not ${mech.title.split(',')[0]}`);
  }
  if (!so && terms.leakage && used.raw.length > 0) {
    // A mechanism is measured where it carries the current (common practice): a fitted leakage
    // that carries most of it even at the window's highest bias leaves the mechanism's line a small
    // correction to an ohmic film, and its parameter whatever the noise makes of it.
    let top = 0;
    for (let k = 1; k < used.raw.length; k++) if (Math.abs(used.raw[k]) > Math.abs(used.raw[top])) top = k;
    const share = (terms.leakage.conductance * Math.abs(used.raw[top])) / Math.abs(used.current[top]);
    if (share >= 0.5) {
      fail(
        `the fitted leakage (${fmt(1 / terms.leakage.conductance)} Ω) carries ${Math.round(100 * Math.min(1, share))} % of the current even at the top of the window (${fmt(used.raw[top])} V): the window holds leakage, not ${mech.title.split(',')[0]}`,
      );
    }
  }
  let zeroCurrent = false;
  if (mech.current && mech.yKind === 'linear' && !mech.linearScale && used.raw.length > 0) {
    // A line through the current itself (ohmic): its slope is the conductance, and an estimate
    // less than twice its uncertainty is not distinguishable from zero (a 95 % test, common
    // practice). The resistance, its reciprocal, hides that: its first-order error stays finite as
    // the slope nears zero. Such a window holds the noise floor, not a resistance.
    // A slope just past 2σ can still be the floor: the window search keeps the best-looking of many
    // stretches. So the line must also rise across its window by at least three times the floor's σ,
    // the limit of detection of analytical practice (IUPAC; Long & Winefordner 1983).
    const se = Math.hypot(line.slopeStdErr, spread?.slope ?? 0);
    let lo = Infinity;
    let hi = -Infinity;
    for (let k = 0; k < used.raw.length; k++) {
      lo = Math.min(lo, used.raw[k]);
      hi = Math.max(hi, used.raw[k]);
    }
    const rise = Math.abs(line.slope) * (hi - lo);
    const floorSigma = classes.noise.floor;
    if (Math.abs(line.slope) >= 2 * se && floorSigma > 0 && rise < 3 * floorSigma) {
      fail(
        `the current from ${fmt(lo)} to ${fmt(hi)} V changes by only ${fmt(rise)} A, under three times the noise floor (σ = ${fmt(floorSigma)} A, the limit of detection): no resistance is measured there; give a window where the current rises above the floor (--from/--to, or the window on the page), or compare mechanisms (plumbline rank)`,
      );
      zeroCurrent = true;
    } else if (!(Math.abs(line.slope) >= 2 * se)) {
      const offset = Math.abs(line.intercept) >= 2 * line.interceptStdErr;
      const floor = classes.noise.floor > 0 ? ` (the noise floor: σ = ${fmt(classes.noise.floor)} A)` : ' (the noise floor)';
      fail(
        `${
          offset
            ? `the current from ${fmt(lo)} to ${fmt(hi)} V does not change with the bias distinguishably from zero: it is an offset of ${fmt(line.intercept)} A`
            : `the current from ${fmt(lo)} to ${fmt(hi)} V is indistinguishable from zero${floor}`
        }: the slope ${fmt(line.slope)} ± ${fmt(se)} A/V is less than twice its uncertainty, so no resistance is measured there; give a window where the current rises above the floor (--from/--to, or the window on the page), or compare mechanisms (plumbline rank)`,
      );
      zeroCurrent = true;
    }
  }
  const mainKey = Object.keys(extraction.parameters)[0];
  const main = mainKey !== undefined ? parameters[mainKey] : undefined;
  // An estimate under twice its uncertainty is not distinguishable from zero (a 95 % test, common
  // practice); said above already when it is the current itself.
  if (main && !zeroCurrent && !(main.stdErr <= 0.5 * Math.abs(main.value))) {
    fail(`${mainKey} is not determined by these data (${fmt(main.value)} ± ${fmt(main.stdErr)}${main.unit && main.unit !== '1' ? ` ${main.unit}` : ''})`);
  }
  if (used.x.length < 5) warnings.push(`only ${used.x.length} points in the window; at least 5 are advised`);
  if (mech.yKind === 'log' && mech.current) {
    const inWindow = decadesOf(used.current);
    if (inWindow < 1 && request.mode === 'auto') {
      // Less than a decade tells one smooth mechanism from another no better than the noise does
      // (on the simulated trap-assisted film, Schottky and hopping lines each found 0.77 decades).
      // Common practice asks a mechanism to hold over a decade or more; a window the user chose is
      // the user's call.
      fail(
        `the automatic window spans only ${inWindow.toFixed(2)} decades of current: too little to tell this mechanism from another; at least one decade is needed (give the window to fit it anyway)`,
      );
    } else if (inWindow < 1) warnings.push(`the window spans ${inWindow.toFixed(2)} decades of current; one decade or more is advised`);
    // An automatic window that holds a short piece of a long curve: the mechanism describes a
    // decade or so where the branch shows many above its floor, so most of the curve is something
    // else. A wrong mechanism finds such a piece on almost any smooth curve (Poole–Frenkel on a
    // Fowler–Nordheim oxide: about 1 of 8 decades, with a plausible-looking ε_r; hopping: 2.4 of 9);
    // the right one, on the built-in devices, holds a third to all of them (3–8.6 decades). Common
    // practice asks a conduction mechanism to hold over several decades before it is believed.
    const sd = decadesOf(p.current);
    const short = (d: number) => (d < SHORT_WINDOW_DECADES || d < SHORT_WINDOW_SHARE * sd) && sd - d >= UNEXPLAINED_DECADES;
    let wd = inWindow;
    // A short pick inside a longer straight regime of the same plot (a diode's recombination
    // region, say, where the search settled on part of it) is the search's choice, not a sign of the
    // wrong mechanism: the regime the window lies in counts.
    if (request.mode === 'auto' && short(wd)) wd = Math.max(wd, regimeDecades(all, fs, fe));
    if (request.mode === 'auto' && short(wd)) {
      fail(
        `the ${mech.title.split(',')[0]} line holds over ${wd.toFixed(2)} decades of current of the ${sd.toFixed(1)} this branch shows above its noise floor: most of the curve is something else (another mechanism, a leakage, several regimes); compare mechanisms (plumbline rank) or give the window`,
      );
    }
  }
  return {
    sign: branch?.sign ?? 0,
    all,
    start: fs,
    end: fe,
    used,
    mode: request.mode,
    line,
    terms,
    model,
    extraction,
    parameters,
    warnings: [...extraction.warnings, ...warnings],
    notes: [...extraction.notes, ...notes],
    plausible,
    failed,
    reasons,
    noise,
    test,
  };
}

/** Decades of current the nonzero |I| span (0 for fewer than two distinct ones). */
export function decadesOf(current: ArrayLike<number>): number {
  let lo = Infinity;
  let hi = -Infinity;
  for (let k = 0; k < current.length; k++) {
    const a = Math.abs(current[k]);
    if (!(a > 0)) continue;
    lo = Math.min(lo, a);
    hi = Math.max(hi, a);
  }
  return hi > lo ? Math.log10(hi / lo) : 0;
}

/**
 * Decades of current spanned by the regime (REGIME_SEGMENTS, the cut the report's regimes use) that
 * shares the most points with the window fs..fe (0 when the curve is too short to cut).
 */
function regimeDecades(all: FitPoints, fs: number, fe: number): number {
  if (all.x.length < 12) return 0;
  let best = 0;
  let decades = 0;
  for (const s of segmentLine(all.x, all.y, REGIME_SEGMENTS).segments) {
    const shared = Math.min(fe, s.end) - Math.max(fs, s.start) + 1;
    if (shared <= best) continue;
    best = shared;
    decades = decadesOf(all.current.subarray(s.start, s.end + 1));
  }
  return decades;
}

/**
 * For mechanisms whose current rises faster than ohmic: a run is admissible only if the mechanism's
 * own line over it (without the extra terms) rises faster than an ohmic leakage, log–log slope
 * above 1.2 between the run's lowest and highest bias — a stretch of leakage read on the
 * mechanism's plot gives a line of log–log slope near 1 and a nonsense parameter.
 */
function superOhmicTest(mech: Mechanism, inputs: ResolvedInputs, p: Points): Admissible | undefined {
  if (!mech.superOhmic || mech.yKind !== 'log') return undefined;
  // Only the run's two ends enter: computed there, not for every point of a long curve.
  const off = (k: number) => (mech.lnOffset ? mech.lnOffset(p.v[k], inputs) : 0);
  const slope = (s: number, e: number, b: number) => {
    // Ends of the run in bias (x is monotone in bias, so they are the run's ends).
    const lo = p.v[s] < p.v[e] ? s : e;
    const hi = lo === s ? e : s;
    const dl = Math.log(p.v[hi]) - Math.log(p.v[lo]);
    return dl > 0 ? (b * (p.x[hi] - p.x[lo]) + off(hi) - off(lo)) / dl : Infinity;
  };
  return {
    ok: (s, e, _a, b) => slope(s, e, b) >= 1.2,
    why: (s, e, _a, b) => `the fitted current rises no faster than an ohmic leakage (log–log slope ${fmt(slope(s, e, b))})`,
  };
}

/**
 * Automatic windows of log mechanisms: with the straight window found, the mechanism is fitted
 * together with a leakage (and a diode's series resistance) from the window down to the floor (and,
 * for a diode, up to the top); that longer range is kept when the joint model describes it within
 * the noise. Otherwise the window is searched again on the data with the terms taken out, and the
 * joint fit redone there; failing that, the joint fit is made on the straight window itself. The
 * terms are always fitted, never chosen by a significance test: a leakage too small to detect still
 * tilts the slope, and choosing the model by significance would bias the parameters.
 */
function extendWithTerms(
  p: Points,
  w0: { start: number; end: number },
  diode: boolean,
  lowFirst: boolean,
  leakage: boolean,
  series: boolean,
  search: { slopeSign?: 1 | -1; admissible?: Admissible },
): Candidate | undefined {
  const slopeSign = search.slopeSign;
  const n = p.x.length;
  const base = plainLine(p, w0.start, w0.end, false, true);
  const range = diode ? [0, n - 1] : lowFirst ? [0, w0.end] : [w0.start, n - 1];
  const st = startTerms(p, w0.start, w0.end, base.intercept, base.slope, diode, lowFirst);
  const d = jointData(p, diode);
  const terms = { leakage, series: series && diode };
  let j: JointResult;
  try {
    j = fitJoint(d, range[0], range[1], terms, { a: base.intercept, b: base.slope, g: st.g, rs: st.rs }, SELECT_JOINT);
  } catch {
    return undefined;
  }
  const ok = (c: JointResult, s: number, e: number) => {
    if (slopeSign !== undefined && Math.sign(c.b) !== slopeSign) return false;
    const model = modelValues(p, { a: c.a, b: c.b, joint: c }, diode);
    return residualTest(p, model, s, e).passed;
  };
  if (ok(j, range[0], range[1])) return { s: range[0], e: range[1], joint: j };
  // The joint model does not hold over all of it: search again with the terms taken out.
  const c = corrected(p, j, diode);
  try {
    const w1 = searchWindow(c.x, c.y, c.w, search);
    if (w1.passed && !(w1.start >= w0.start && w1.end <= w0.end)) {
      const j1 = fitJoint(d, w1.start, w1.end, terms, { a: j.a, b: j.b, g: j.g, rs: j.rs }, SELECT_JOINT);
      if (ok(j1, w1.start, w1.end)) return { s: w1.start, e: w1.end, joint: j1 };
    }
  } catch {
    /* fall through */
  }
  // The straight window itself, with the terms (a leakage below the detection of a bend still biases the slope).
  try {
    const j0 = fitJoint(d, w0.start, w0.end, terms, { a: base.intercept, b: base.slope, g: st.g, rs: st.rs }, SELECT_JOINT);
    if (ok(j0, w0.start, w0.end)) return { s: w0.start, e: w0.end, joint: j0 };
  } catch {
    /* keep the straight window */
  }
  return undefined;
}

/**
 * Window-choice uncertainty of each parameter: ends moved by ±δ and ±2δ (δ = 5 % of the window's
 * points, at least one), each variant admissible (at least 5 points, straight within the noise),
 * fitted as a line on the data with the extra terms held at their fitted values; and the same of
 * the line's slope.
 */
function windowSpread(
  mech: Mechanism,
  inputs: ResolvedInputs,
  p: Points,
  s: number,
  e: number,
  joint: JointResult | undefined,
  diode: boolean,
  main: LineFit,
  absolute: boolean,
  weighted: boolean,
  all: FitPoints,
): { parameters: Record<string, number>; slope: number } {
  const n = p.x.length;
  const len = e - s + 1;
  const delta = Math.max(1, Math.round(0.05 * len));
  const c = corrected(p, joint, diode);
  const w = weighted ? c.w : new Float64Array(n).fill(1 / Math.max(1e-300, main.residualStdDev) ** 2);
  const mom = new WindowMoments(c.x, c.y, w);
  const scale = weighted ? (absolute || main.dof < SMALL_DOF ? Math.max(1, main.chi2Reduced ?? 1) : (main.chi2Reduced ?? 1)) : 1;
  const lineAt = (a: number, b: number): LineFit | undefined => {
    const l = mom.line(a, b);
    if (!l) return undefined;
    const va = scale * (1 / l.sumW + (l.meanX * l.meanX) / l.sxx);
    const vb = scale / l.sxx;
    const cab = (-scale * l.meanX) / l.sxx;
    return lineOf(l.intercept, l.slope, va, vb, cab, l.n, l.n - 2, l.chi2, l.meanX, l.intercept + l.slope * l.meanX, l.sxx, 1);
  };
  const ref = lineAt(s, e);
  if (!ref) return { parameters: {}, slope: 0 };
  const quiet = (line: LineFit, a: number, b: number): Extraction | undefined => {
    try {
      return mech.extract({ line, used: pointsOf(p, a, b), all, inputs });
    } catch {
      return undefined;
    }
  };
  const ex0 = quiet(ref, s, e);
  if (!ex0) return { parameters: {}, slope: 0 };
  const sums: Record<string, { d2: number; v: number; k: number }> = {};
  // The line's own slope too (the same spread, before any parameter is made of it).
  const slope = { d2: 0, v: 0, k: 0 };
  for (const [ds, de] of [
    [-delta, 0],
    [delta, 0],
    [0, -delta],
    [0, delta],
    [-2 * delta, 0],
    [2 * delta, 0],
    [0, -2 * delta],
    [0, 2 * delta],
  ]) {
    const a = s + ds;
    const b = e + de;
    if (a < 0 || b > n - 1 || b - a + 1 < MIN_WINDOW_POINTS) continue;
    if (!testRun(mom, a, b, mech.slopeSign, undefined, false).passed) continue;
    const l = lineAt(a, b);
    if (!l) continue;
    const ex = quiet(l, a, b);
    if (!ex) continue;
    slope.d2 += (l.slope - ref.slope) ** 2;
    slope.v += Math.abs(l.slopeStdErr ** 2 - ref.slopeStdErr ** 2);
    slope.k++;
    for (const [k, v] of Object.entries(ex.parameters)) {
      const r = ex0.parameters[k];
      if (!r || !Number.isFinite(v.value) || !Number.isFinite(r.value)) continue;
      const acc = (sums[k] ??= { d2: 0, v: 0, k: 0 });
      acc.d2 += (v.value - r.value) ** 2;
      acc.v += Math.abs(v.stdErr ** 2 - r.stdErr ** 2);
      acc.k++;
    }
  }
  const out: Record<string, number> = {};
  for (const [k, acc] of Object.entries(sums)) {
    if (acc.k === 0) continue;
    out[k] = Math.sqrt(Math.max(0, (acc.d2 - acc.v) / acc.k));
  }
  return { parameters: out, slope: slope.k ? Math.sqrt(Math.max(0, (slope.d2 - slope.v) / slope.k)) : 0 };
}

/** Median-based point-to-point scatter of y (model-free; x ascending). */
function modelFreeSigma(x: Float64Array, y: Float64Array): number {
  const n = x.length;
  const r: number[] = [];
  for (let k = 1; k < n - 1; k++) {
    const span = x[k + 1] - x[k - 1];
    if (!(span > 0)) continue;
    const a = (x[k] - x[k - 1]) / span;
    r.push(Math.abs(y[k] - (y[k - 1] + a * (y[k + 1] - y[k - 1]))) / Math.sqrt(1 + a * a + (1 - a) * (1 - a)));
  }
  if (r.length === 0) return 1;
  r.sort((a, b) => a - b);
  let yr = 0;
  for (let k = 0; k < n; k++) yr = Math.max(yr, Math.abs(y[k] - y[0]));
  return Math.max(r[r.length >> 1] / 0.6744897501960817, 1e-9 * (yr || 1));
}

export function describe(reasons: Record<string, number>): string {
  const parts = Object.entries(reasons).map(([r, c]) => `${c} ${r}`);
  return parts.length ? parts.join(', ') : 'none';
}
