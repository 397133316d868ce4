/**
 * A mechanism fitted together with what bends its straight line at the ends of a whole sweep: a
 * parallel ohmic leakage G·V at low bias and, for a diode, the series-resistance drop I·R_s at high
 * current. On the mechanism's own plot (y = ln J − lnOffset, x its abscissa):
 *   film:  J = e^{a + b·x}·e^{lnOffset} + G·V/A        → ŷ = ln(e^{a + b·x} + G·t),  t = V·e^{−lnOffset}/A
 *   diode: I = e^{a}·(e^{b·V'} − 1) + G·V',  V' = V − I·R_s (Shockley 1949 with series and shunt
 *          resistance; Sze & Ng 2007), with the measured I in the series drop.
 * Levenberg–Marquardt (levenberg-marquardt.ts) on residuals √w·(ŷ − y), w = 1/σ_y² from the noise
 * model; the leakage G is left free of sign (bounding it at 0 would bias the slope whenever the true
 * leakage is small), R_s ≥ 0 by a bound; the covariance is s²(JᵀJ)⁻¹ (scaled by χ²/dof, Bevington).
 * Long runs are fitted on every k-th point (at most `maxPoints`); the covariance is then that of the
 * points used, and `stride` says so.
 */
import { AnalysisError } from './errors.js';
import { levenbergMarquardt } from './levenberg-marquardt.js';

export interface JointData {
  readonly x: Float64Array;
  readonly y: Float64Array;
  readonly w: Float64Array;
  /** Bias magnitude, V. */
  readonly v: Float64Array;
  /** Leakage abscissa t = V·e^{−lnOffset}/A (films); unused for the diode. */
  readonly t: Float64Array;
  /** Measured current magnitude, A (the diode's series drop). */
  readonly current: Float64Array;
  readonly diode: boolean;
}

export interface JointTerms {
  readonly leakage: boolean;
  readonly series: boolean;
}

export interface JointStart {
  readonly a: number;
  readonly b: number;
  readonly g?: number;
  readonly rs?: number;
}

export interface JointResult {
  readonly a: number;
  readonly b: number;
  readonly g: number;
  readonly rs: number;
  /** Parameter order: a, b, then g and rs when fitted. */
  readonly names: string[];
  readonly covariance: number[];
  readonly chi2: number;
  readonly dof: number;
  readonly n: number;
  readonly converged: boolean;
  readonly atBound: string[];
  /** Every stride-th point of the run was fitted (1: all of them). */
  readonly stride: number;
}

/** Default cap on the points of one joint fit. */
export const JOINT_MAX_POINTS = 100000;

/** Model value ŷ at one point (−∞ when the model current is not positive). */
export function jointY(d: JointData, k: number, a: number, b: number, g: number, rs: number): number {
  if (d.diode) {
    const vp = d.v[k] - d.current[k] * rs;
    const m = Math.exp(a) * Math.expm1(b * vp) + g * vp;
    return m > 0 ? Math.log(m) : -Infinity;
  }
  const e = Math.exp(a + b * d.x[k]) + g * d.t[k];
  return e > 0 ? Math.log(e) : -Infinity;
}

/** Fits points start..end inclusive. */
export function fitJoint(d: JointData, start: number, end: number, terms: JointTerms, p0: JointStart, maxPoints = JOINT_MAX_POINTS): JointResult {
  const total = end - start + 1;
  const stride = Math.max(1, Math.ceil(total / maxPoints));
  const idx: number[] = [];
  for (let k = start; k <= end; k += stride) if (d.w[k] > 0) idx.push(k);
  const names = ['a', 'b'];
  if (terms.leakage) names.push('g');
  if (terms.series && d.diode) names.push('rs');
  const m = names.length;
  const n = idx.length;
  if (n <= m) throw new AnalysisError('TOO_FEW_POINTS', `${n} points cannot determine ${m} parameters`);
  const sq = Float64Array.from(idx, (k) => Math.sqrt(d.w[k]));
  const gi = names.indexOf('g');
  const ri = names.indexOf('rs');
  const par = (p: ArrayLike<number>) => ({ a: p[0], b: p[1], g: gi >= 0 ? p[gi] : 0, rs: ri >= 0 ? p[ri] : 0 });
  // Typical sizes: G from the largest current over its abscissa, R_s from the largest V/I.
  let gScale = 0;
  let rScale = 0;
  for (const k of idx) {
    const tk = d.diode ? d.v[k] : d.t[k];
    if (tk > 0) gScale = Math.max(gScale, Math.exp(d.y[k]) / tk);
    if (d.current[k] > 0) rScale = Math.max(rScale, d.v[k] / d.current[k]);
  }
  const start0 = [p0.a, p0.b];
  const typical = [1, Math.max(Math.abs(p0.b), 1e-300)];
  const lower = [-Infinity, -Infinity];
  const upper = [Infinity, Infinity];
  if (gi >= 0) {
    start0.push(p0.g ?? 0);
    typical.push(Math.max(Math.abs(p0.g ?? 0), 1e-3 * gScale, 1e-300));
    lower.push(-Infinity);
    upper.push(Infinity);
  }
  if (ri >= 0) {
    start0.push(Math.max(p0.rs ?? 0, 0));
    typical.push(Math.max(p0.rs ?? 0, 1e-4 * rScale, 1e-12));
    lower.push(0);
    upper.push(Infinity);
  }
  const FLOOR_Y = -745;
  const res = levenbergMarquardt(
    {
      n,
      p0: start0,
      lower,
      upper,
      typical,
      residuals: (p, r) => {
        const { a, b, g, rs } = par(p);
        for (let j = 0; j < n; j++) {
          const k = idx[j];
          let yh = jointY(d, k, a, b, g, rs);
          if (!Number.isFinite(yh)) yh = FLOOR_Y;
          r[j] = sq[j] * (yh - d.y[k]);
        }
      },
      jacobian: (p, J) => {
        const { a, b, g, rs } = par(p);
        for (let j = 0; j < n; j++) {
          const k = idx[j];
          const row = j * m;
          if (d.diode) {
            const vp = d.v[k] - d.current[k] * rs;
            const e = Math.exp(a + b * vp);
            const mm = Math.exp(a) * Math.expm1(b * vp);
            const D = mm + g * vp;
            if (!(D > 0)) {
              for (let c = 0; c < m; c++) J[row + c] = 0;
              continue;
            }
            J[row] = (sq[j] * mm) / D;
            J[row + 1] = (sq[j] * e * vp) / D;
            if (gi >= 0) J[row + gi] = (sq[j] * vp) / D;
            if (ri >= 0) J[row + ri] = (sq[j] * (e * b + g) * -d.current[k]) / D;
          } else {
            const e = Math.exp(a + b * d.x[k]);
            const D = e + g * d.t[k];
            if (!(D > 0)) {
              for (let c = 0; c < m; c++) J[row + c] = 0;
              continue;
            }
            J[row] = (sq[j] * e) / D;
            J[row + 1] = (sq[j] * e * d.x[k]) / D;
            if (gi >= 0) J[row + gi] = (sq[j] * d.t[k]) / D;
          }
        }
      },
    },
    { maxIterations: 60, xtol: 1e-12, ftol: 1e-15 },
  );
  const { a, b, g, rs } = par(res.p);
  // χ² over the points used.
  let chi2 = 0;
  for (let j = 0; j < n; j++) {
    const k = idx[j];
    let yh = jointY(d, k, a, b, g, rs);
    if (!Number.isFinite(yh)) yh = FLOOR_Y;
    chi2 += d.w[k] * (yh - d.y[k]) ** 2;
  }
  return {
    a,
    b,
    g,
    rs,
    names,
    covariance: res.covariance,
    chi2,
    dof: n - m,
    n,
    converged: res.converged,
    atBound: res.atBound.map((k) => names[k]),
    stride,
  };
}
