/**
 * Straight-line least squares, y = intercept + slope·x, ordinary or weighted (weights are 1/σ²).
 *
 * Follows the layout of GSL's fit_linear/fit_wlinear: running means first, then centred sums, then
 * an explicit residual sum (so near-perfect fits keep their digits), and a frozen result with every
 * output named. Inputs are never mutated. Too few points or all-equal x raise a coded error.
 */
import { AnalysisError } from './errors.js';

export type Numbers = ArrayLike<number>;

/** Result of a straight-line fit. All uncertainties are one standard error. */
export interface LineFit {
  readonly n: number;
  /** Degrees of freedom, n − 2. */
  readonly dof: number;
  readonly slope: number;
  readonly intercept: number;
  readonly slopeStdErr: number;
  readonly interceptStdErr: number;
  /** cov(intercept, slope). */
  readonly covariance: number;
  /** Coefficient of determination 1 − SSE/SST (centred, weighted when weights are given). */
  readonly r2: number;
  /** √(SSE/dof): the residual standard deviation (weighted residuals when weighted). */
  readonly residualStdDev: number;
  /** Sum of squared (weighted) residuals. */
  readonly sse: number;
  /** χ²/dof for a weighted fit; null for an unweighted one. */
  readonly chi2Reduced: number | null;
  readonly weighted: boolean;
  /** (Weighted) means of x and y: the line passes through them. */
  readonly meanX: number;
  readonly meanY: number;
  /** Σw(x − x̄)², the spread the slope is measured over. */
  readonly sxx: number;
}

export interface LineFitOptions {
  /** Weights 1/σ² per point; omit for ordinary least squares. Points with w ≤ 0 are skipped. */
  readonly weights?: Numbers;
  /**
   * Treat the weights as absolute (σ known): standard errors are not rescaled by χ²/dof.
   * Default false: the σ are taken as relative and the covariance is scaled by χ²/dof (Bevington).
   */
  readonly absoluteWeights?: boolean;
}

/** Builds the named result from centred moments; shared by the batch fit and the accumulator. */
export function lineFromMoments(m: {
  n: number;
  sumW: number;
  meanX: number;
  meanY: number;
  sxx: number;
  sxy: number;
  syy: number;
  sse: number;
  weighted: boolean;
  absoluteWeights: boolean;
}): LineFit {
  if (m.n < 3) {
    throw new AnalysisError('TOO_FEW_POINTS', `a line fit needs at least 3 points, got ${m.n}`);
  }
  if (!(m.sxx > 0)) {
    throw new AnalysisError('DEGENERATE_X', 'all x values are equal: the slope is undefined');
  }
  const dof = m.n - 2;
  const slope = m.sxy / m.sxx;
  const intercept = m.meanY - slope * m.meanX;
  const sse = Math.max(0, m.sse);
  const s2 = sse / dof;
  // Unscaled covariance terms (weights as 1/σ²). Unweighted: the σ² is estimated by s².
  const scale = m.weighted && m.absoluteWeights ? 1 : s2;
  const varSlope = scale / m.sxx;
  const varIntercept = scale * (1 / m.sumW + (m.meanX * m.meanX) / m.sxx);
  const covariance = (-scale * m.meanX) / m.sxx;
  const r2 = m.syy > 0 ? 1 - sse / m.syy : 1;
  return Object.freeze({
    n: m.n,
    dof,
    slope,
    intercept,
    slopeStdErr: Math.sqrt(varSlope),
    interceptStdErr: Math.sqrt(varIntercept),
    covariance,
    r2,
    residualStdDev: Math.sqrt(s2),
    sse,
    chi2Reduced: m.weighted ? s2 : null,
    weighted: m.weighted,
    meanX: m.meanX,
    meanY: m.meanY,
    sxx: m.sxx,
  });
}

function checkLengths(x: Numbers, y: Numbers, w?: Numbers): void {
  if (x.length !== y.length || (w !== undefined && w.length !== x.length)) {
    throw new AnalysisError('BAD_INPUT', `x, y${w ? ' and weights' : ''} differ in length (${x.length}, ${y.length}${w ? `, ${w.length}` : ''})`);
  }
}

/** Fits y = intercept + slope·x by (weighted) least squares. */
export function fitLine(x: Numbers, y: Numbers, options: LineFitOptions = {}): LineFit {
  const w = options.weights;
  checkLengths(x, y, w);
  if (w === undefined) return fitLineUnweighted(x, y);
  // Pass 1: weighted means (running form, as GSL does, to avoid a large intermediate sum).
  let sumW = 0;
  let meanX = 0;
  let meanY = 0;
  let n = 0;
  for (let i = 0; i < x.length; i++) {
    const wi = w[i];
    if (!(wi > 0)) continue;
    const xi = x[i];
    const yi = y[i];
    if (!Number.isFinite(xi) || !Number.isFinite(yi) || !Number.isFinite(wi)) {
      throw new AnalysisError('BAD_INPUT', `point ${i} is not finite (x=${xi}, y=${yi})`);
    }
    n++;
    sumW += wi;
    meanX += (wi * (xi - meanX)) / sumW;
    meanY += (wi * (yi - meanY)) / sumW;
  }
  // Pass 2: centred second moments.
  let sxx = 0;
  let sxy = 0;
  let syy = 0;
  for (let i = 0; i < x.length; i++) {
    const wi = w[i];
    if (!(wi > 0)) continue;
    const dx = x[i] - meanX;
    const dy = y[i] - meanY;
    sxx += wi * dx * dx;
    sxy += wi * dx * dy;
    syy += wi * dy * dy;
  }
  // Pass 3: explicit residuals; SSE = Syy − Sxy²/Sxx would cancel digits on near-perfect fits.
  const slope = sxx > 0 ? sxy / sxx : 0;
  let sse = 0;
  for (let i = 0; i < x.length; i++) {
    const wi = w[i];
    if (!(wi > 0)) continue;
    const r = y[i] - meanY - slope * (x[i] - meanX);
    sse += wi * r * r;
  }
  return lineFromMoments({
    n,
    sumW,
    meanX,
    meanY,
    sxx,
    sxy,
    syy,
    sse,
    weighted: true,
    absoluteWeights: options.absoluteWeights ?? false,
  });
}

/**
 * Unweighted fast path: plain sums for the means, then a corrected two-pass (the mean is refined by
 * the mean of the deviations, Chan, Golub & LeVeque 1983), then the explicit residual pass.
 */
function fitLineUnweighted(x: Numbers, y: Numbers): LineFit {
  const n = x.length;
  let sx = 0;
  let sy = 0;
  for (let i = 0; i < n; i++) {
    sx += x[i];
    sy += y[i];
  }
  if (!Number.isFinite(sx) || !Number.isFinite(sy)) {
    for (let i = 0; i < n; i++) {
      if (!Number.isFinite(x[i]) || !Number.isFinite(y[i])) {
        throw new AnalysisError('BAD_INPUT', `point ${i} is not finite (x=${x[i]}, y=${y[i]})`);
      }
    }
  }
  let meanX = sx / n;
  let meanY = sy / n;
  let cx = 0;
  let cy = 0;
  let sxx = 0;
  let sxy = 0;
  let syy = 0;
  for (let i = 0; i < n; i++) {
    const dx = x[i] - meanX;
    const dy = y[i] - meanY;
    cx += dx;
    cy += dy;
    sxx += dx * dx;
    sxy += dx * dy;
    syy += dy * dy;
  }
  // Correction terms for the rounding in the first-pass means.
  sxx -= (cx * cx) / n;
  sxy -= (cx * cy) / n;
  syy -= (cy * cy) / n;
  meanX += cx / n;
  meanY += cy / n;
  const slope = sxx > 0 ? sxy / sxx : 0;
  let sse = 0;
  for (let i = 0; i < n; i++) {
    const r = y[i] - meanY - slope * (x[i] - meanX);
    sse += r * r;
  }
  return lineFromMoments({ n, sumW: n, meanX, meanY, sxx, sxy, syy, sse, weighted: false, absoluteWeights: false });
}

/** Result of a fit through the origin, y = slope·x. R² is the uncentred one, 1 − SSE/Σwy². */
export interface ProportionalFit {
  readonly n: number;
  readonly dof: number;
  readonly slope: number;
  readonly slopeStdErr: number;
  readonly r2: number;
  readonly residualStdDev: number;
  readonly sse: number;
}

/** Fits y = slope·x (no intercept) by (weighted) least squares. */
export function fitProportional(x: Numbers, y: Numbers, options: LineFitOptions = {}): ProportionalFit {
  const w = options.weights;
  checkLengths(x, y, w);
  let sxx = 0;
  let sxy = 0;
  let syy = 0;
  let n = 0;
  for (let i = 0; i < x.length; i++) {
    const wi = w ? w[i] : 1;
    if (!(wi > 0)) continue;
    n++;
    sxx += wi * x[i] * x[i];
    sxy += wi * x[i] * y[i];
    syy += wi * y[i] * y[i];
  }
  if (n < 2) throw new AnalysisError('TOO_FEW_POINTS', `a fit through the origin needs at least 2 points, got ${n}`);
  if (!(sxx > 0)) throw new AnalysisError('DEGENERATE_X', 'all x values are zero: the slope is undefined');
  const slope = sxy / sxx;
  let sse = 0;
  for (let i = 0; i < x.length; i++) {
    const wi = w ? w[i] : 1;
    if (!(wi > 0)) continue;
    const r = y[i] - slope * x[i];
    sse += wi * r * r;
  }
  const dof = n - 1;
  const s2 = sse / dof;
  const scale = w !== undefined && options.absoluteWeights ? 1 : s2;
  return Object.freeze({
    n,
    dof,
    slope,
    slopeStdErr: Math.sqrt(scale / sxx),
    r2: syy > 0 ? 1 - sse / syy : 1,
    residualStdDev: Math.sqrt(s2),
    sse,
  });
}
