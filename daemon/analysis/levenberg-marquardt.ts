/**
 * Levenberg–Marquardt nonlinear least squares: minimise Σ rᵢ(p)² (Levenberg 1944, Marquardt 1963),
 * with Marquardt's diagonal scaling kept monotone as in Moré's implementation (1978), Nielsen's
 * gain-ratio update of the damping (1999), optional box bounds by projection, an analytic
 * Jacobian when the caller has one and central differences otherwise. At the optimum the
 * covariance is s²(JᵀJ)⁻¹ with s² = SSE/(n − m), the usual asymptotic estimate.
 *
 * The normal equations are solved by Cholesky on the column-scaled system; the fixed point
 * (Jᵀr = 0) does not depend on that solve, so the result keeps the digits the residuals carry.
 */
import { AnalysisError } from './errors.js';

export interface LmProblem {
  /** Number of residuals. */
  readonly n: number;
  readonly p0: readonly number[];
  /** Fills r (length n) at p. */
  residuals(p: Float64Array, r: Float64Array): void;
  /** Fills J (n × m, row-major: J[i·m + j] = ∂rᵢ/∂pⱼ) at p; r holds the residuals at p. */
  jacobian?(p: Float64Array, J: Float64Array, r: Float64Array): void;
  readonly lower?: readonly number[];
  readonly upper?: readonly number[];
  /** Typical magnitude of each parameter (sets the difference steps; default max(|p0|, 1e-8)). */
  readonly typical?: readonly number[];
}

export interface LmOptions {
  readonly maxIterations?: number;
  /** Stop when every accepted step changes each parameter by less than xtol relative. */
  readonly xtol?: number;
  /** Stop when the relative SSE reduction of an accepted step is below ftol. */
  readonly ftol?: number;
  /** Stop when max |(Jᵀr)ⱼ|·scaleⱼ / SSE is below gtol. */
  readonly gtol?: number;
  /**
   * Geodesic acceleration (Transtrum & Sethna 2012): a second-order correction along the step from
   * one extra residual evaluation, kept when its size is below 3/4 of the step's. Helps in long
   * curved valleys (strongly correlated parameters).
   */
  readonly geodesic?: boolean;
  /**
   * Stop when the SSE has fallen by less than `fraction` of the residual variance s² = SSE/(n − m)
   * over the last `iterations` accepted steps: a crawl along a shallow valley (parameters the data
   * hardly determine) advancing far slower than the noise can resolve. What such a crawl would still
   * gain is small in χ² but not bounded by `fraction`; the result is reported as converged. Off by
   * default.
   */
  readonly stall?: { readonly iterations: number; readonly fraction: number };
}

export interface LmResult {
  readonly p: number[];
  readonly sse: number;
  readonly iterations: number;
  readonly converged: boolean;
  readonly reason: string;
  /** Asymptotic standard errors s·√((JᵀJ)⁻¹)ⱼⱼ (NaN when JᵀJ is singular or n ≤ m). */
  readonly stdErr: number[];
  /** Covariance s²(JᵀJ)⁻¹, row-major m × m. */
  readonly covariance: number[];
  /** Parameters that ended on a bound. */
  readonly atBound: number[];
}

const EPS = 2.220446049250313e-16;

/** In-place Cholesky of a symmetric positive-definite m × m matrix (lower triangle); false if not SPD. */
function cholesky(a: Float64Array, m: number): boolean {
  for (let j = 0; j < m; j++) {
    let d = a[j * m + j];
    for (let k = 0; k < j; k++) d -= a[j * m + k] * a[j * m + k];
    if (!(d > 0)) return false;
    const l = Math.sqrt(d);
    a[j * m + j] = l;
    for (let i = j + 1; i < m; i++) {
      let s = a[i * m + j];
      for (let k = 0; k < j; k++) s -= a[i * m + k] * a[j * m + k];
      a[i * m + j] = s / l;
    }
  }
  return true;
}

function cholSolve(l: Float64Array, m: number, b: Float64Array, x: Float64Array): void {
  for (let i = 0; i < m; i++) {
    let s = b[i];
    for (let k = 0; k < i; k++) s -= l[i * m + k] * x[k];
    x[i] = s / l[i * m + i];
  }
  for (let i = m - 1; i >= 0; i--) {
    let s = x[i];
    for (let k = i + 1; k < m; k++) s -= l[k * m + i] * x[k];
    x[i] = s / l[i * m + i];
  }
}

/** Central-difference Jacobian. */
function numericJacobian(problem: LmProblem, p: Float64Array, J: Float64Array, typical: Float64Array): void {
  const n = problem.n;
  const m = p.length;
  const rp = new Float64Array(n);
  const rm = new Float64Array(n);
  const q = Float64Array.from(p);
  for (let j = 0; j < m; j++) {
    const h = 6.055454452393343e-6 * Math.max(Math.abs(p[j]), typical[j]); // eps^(1/3)
    q[j] = p[j] + h;
    problem.residuals(q, rp);
    q[j] = p[j] - h;
    problem.residuals(q, rm);
    q[j] = p[j];
    const inv = 1 / (2 * h);
    for (let i = 0; i < n; i++) J[i * m + j] = (rp[i] - rm[i]) * inv;
  }
}

export function levenbergMarquardt(problem: LmProblem, options: LmOptions = {}): LmResult {
  const m = problem.p0.length;
  const n = problem.n;
  if (n < m) throw new AnalysisError('TOO_FEW_POINTS', `${n} points cannot determine ${m} parameters`);
  const maxIter = options.maxIterations ?? 1000;
  const xtol = options.xtol ?? 1e-13;
  const ftol = options.ftol ?? 1e-16;
  const gtol = options.gtol ?? 1e-16;
  const lo = problem.lower ?? new Array<number>(m).fill(-Infinity);
  const hi = problem.upper ?? new Array<number>(m).fill(Infinity);
  const project = (v: Float64Array) => {
    for (let j = 0; j < m; j++) v[j] = Math.min(hi[j], Math.max(lo[j], v[j]));
  };
  const typical = Float64Array.from(problem.typical ?? problem.p0.map((x) => Math.max(Math.abs(x), 1e-8)));
  const p = Float64Array.from(problem.p0);
  project(p);
  const r = new Float64Array(n);
  const rNew = new Float64Array(n);
  const J = new Float64Array(n * m);
  const A = new Float64Array(m * m);
  const L = new Float64Array(m * m);
  const g = new Float64Array(m);
  const d = new Float64Array(m); // Marquardt scaling: running max of diag(JᵀJ)
  const delta = new Float64Array(m);
  const pNew = new Float64Array(m);
  const rhs = new Float64Array(m);
  const held = new Uint8Array(m);
  const pTry = new Float64Array(m);
  const rTry = new Float64Array(n);
  const accel = new Float64Array(m);

  const sumsq = (v: Float64Array) => {
    let s = 0;
    for (let i = 0; i < v.length; i++) s += v[i] * v[i];
    return s;
  };
  const jac = (at: Float64Array, res: Float64Array) => {
    if (problem.jacobian) problem.jacobian(at, J, res);
    else numericJacobian(problem, at, J, typical);
  };
  const normal = () => {
    // JᵀJ and Jᵀr column pair by column pair: the sums stay in registers (row-major J, m ≪ n).
    for (let j = 0; j < m; j++) {
      let gj = 0;
      for (let i = 0, o = j; i < n; i++, o += m) gj += J[o] * r[i];
      g[j] = gj;
      for (let k = 0; k <= j; k++) {
        let s = 0;
        for (let i = 0, oj = j, ok = k; i < n; i++, oj += m, ok += m) s += J[oj] * J[ok];
        A[j * m + k] = s;
        A[k * m + j] = s;
      }
    }
  };

  problem.residuals(p, r);
  let sse = sumsq(r);
  if (!Number.isFinite(sse)) throw new AnalysisError('BAD_INPUT', 'the model is not finite at the starting values');
  jac(p, r);
  normal();
  for (let j = 0; j < m; j++) d[j] = Math.max(A[j * m + j], 1e-300);
  let lambda = 1e-3;
  let nu = 2;
  let iter = 0;
  // SSE after each of the last stall.iterations accepted steps (a ring).
  const stallRing = options.stall ? new Float64Array(options.stall.iterations).fill(Number.POSITIVE_INFINITY) : undefined;
  let accepted = 0;
  let reason = 'iteration limit reached';
  let converged = false;
  while (iter < maxIter) {
    iter++;
    // Gradient test (scaled).
    let gmax = 0;
    for (let j = 0; j < m; j++) {
      const outward = (p[j] <= lo[j] && g[j] > 0) || (p[j] >= hi[j] && g[j] < 0);
      if (!outward) gmax = Math.max(gmax, Math.abs(g[j]) / Math.sqrt(d[j]));
    }
    if (sse === 0 || gmax <= gtol * Math.sqrt(sse)) {
      converged = true;
      reason = 'gradient vanished';
      break;
    }
    // Active bounds: a parameter on a bound whose descent direction (−g) points outward is held
    // (δⱼ = 0), so the projected step is the step the model predicted.
    for (let j = 0; j < m; j++) held[j] = (p[j] <= lo[j] && g[j] > 0) || (p[j] >= hi[j] && g[j] < 0) ? 1 : 0;
    // Solve (A + λ D) δ = −g on the scaled system (columns scaled by 1/√d).
    for (let j = 0; j < m; j++) {
      for (let k = 0; k < m; k++) L[j * m + k] = held[j] || held[k] ? (j === k ? 1 : 0) : A[j * m + k] / Math.sqrt(d[j] * d[k]);
      if (!held[j]) L[j * m + j] += lambda;
      rhs[j] = held[j] ? 0 : -g[j] / Math.sqrt(d[j]);
    }
    if (!cholesky(L, m)) {
      lambda *= nu;
      nu *= 2;
      if (lambda > 1e300) {
        reason = 'damping overflow';
        break;
      }
      continue;
    }
    cholSolve(L, m, rhs, delta);
    for (let j = 0; j < m; j++) {
      delta[j] /= Math.sqrt(d[j]);
      pNew[j] = p[j] + delta[j];
    }
    // The probe point of the acceleration must lie inside the bounds (the model may not exist
    // outside them); when it does not, this step goes without.
    let feasible = options.geodesic === true;
    for (let j = 0; j < m && feasible; j++) {
      pTry[j] = p[j] + 0.1 * delta[j];
      if (pTry[j] < lo[j] || pTry[j] > hi[j]) feasible = false;
    }
    if (feasible) {
      // Directional second derivative r'' ≈ (2/h)·[(r(p + hδ) − r(p))/h − Jδ], then solve for the
      // acceleration a with the same damped matrix; step = δ + a/2 when |a| ≤ 0.75·|δ| (scaled).
      const h = 0.1;
      problem.residuals(pTry, rTry);
      rhs.fill(0);
      for (let i = 0; i < n; i++) {
        let jd = 0;
        const row = i * m;
        for (let j = 0; j < m; j++) jd += J[row + j] * delta[j];
        const r2 = (2 / h) * ((rTry[i] - r[i]) / h - jd);
        if (!Number.isFinite(r2)) continue;
        for (let j = 0; j < m; j++) rhs[j] -= J[row + j] * r2;
      }
      for (let j = 0; j < m; j++) rhs[j] = held[j] ? 0 : rhs[j] / Math.sqrt(d[j]);
      cholSolve(L, m, rhs, accel);
      let na = 0;
      let nd = 0;
      for (let j = 0; j < m; j++) {
        accel[j] /= Math.sqrt(d[j]);
        na += d[j] * accel[j] * accel[j];
        nd += d[j] * delta[j] * delta[j];
      }
      if (Number.isFinite(na) && Math.sqrt(na) <= 0.75 * Math.sqrt(nd)) {
        for (let j = 0; j < m; j++) pNew[j] = p[j] + delta[j] + 0.5 * accel[j];
      }
    }
    project(pNew);
    for (let j = 0; j < m; j++) delta[j] = pNew[j] - p[j];
    problem.residuals(pNew, rNew);
    const sseNew = sumsq(rNew);
    // Predicted reduction: δᵀ(λDδ − g) (for the unprojected step; fine as a gain scale).
    let pred = 0;
    for (let j = 0; j < m; j++) if (!held[j]) pred += delta[j] * (lambda * d[j] * delta[j] - g[j]);
    const rho = Number.isFinite(sseNew) && pred > 0 ? (sse - sseNew) / pred : -1;
    if (rho > 0) {
      let small = true;
      for (let j = 0; j < m; j++) if (Math.abs(delta[j]) > xtol * (Math.abs(p[j]) + xtol * typical[j])) small = false;
      const reduction = (sse - sseNew) / sse;
      p.set(pNew);
      r.set(rNew);
      sse = sseNew;
      lambda *= Math.max(1 / 3, 1 - (2 * rho - 1) ** 3);
      nu = 2;
      jac(p, r);
      normal();
      for (let j = 0; j < m; j++) d[j] = Math.max(d[j], A[j * m + j]);
      if (small) {
        converged = true;
        reason = 'step below tolerance';
        break;
      }
      if (reduction < ftol) {
        converged = true;
        reason = 'SSE reduction below tolerance';
        break;
      }
      if (stallRing && options.stall) {
        const slot = accepted % stallRing.length;
        const before = stallRing[slot];
        stallRing[slot] = sse;
        accepted++;
        if (before - sse < options.stall.fraction * (sse / Math.max(1, n - m))) {
          converged = true;
          reason = 'SSE reduction below the noise';
          break;
        }
      }
    } else {
      // A step the linear model itself expected to gain less than ftol of the SSE: nothing worth
      // having is left (the rejection is rounding at the optimum, not a bad direction).
      if (pred > 0 && pred < ftol * sse) {
        converged = true;
        reason = 'predicted reduction below tolerance';
        break;
      }
      lambda *= nu;
      nu *= 2;
      if (lambda > 1e16) {
        // No downhill step at any damping: at a minimum to working precision.
        converged = true;
        reason = 'no further reduction possible';
        break;
      }
    }
  }
  // Covariance at the optimum: s² (JᵀJ)⁻¹ via Cholesky of the scaled matrix.
  const dof = n - m;
  const s2 = dof > 0 ? sse / dof : Number.NaN;
  const cov = new Array<number>(m * m).fill(Number.NaN);
  const sc = new Float64Array(m);
  for (let j = 0; j < m; j++) sc[j] = Math.sqrt(Math.max(A[j * m + j], 1e-300));
  for (let j = 0; j < m; j++) for (let k = 0; k < m; k++) L[j * m + k] = A[j * m + k] / (sc[j] * sc[k]);
  if (cholesky(L, m)) {
    const e = new Float64Array(m);
    const col = new Float64Array(m);
    for (let k = 0; k < m; k++) {
      e.fill(0);
      e[k] = 1;
      cholSolve(L, m, e, col);
      for (let j = 0; j < m; j++) cov[j * m + k] = (s2 * col[j]) / (sc[j] * sc[k]);
    }
  }
  const stdErr = Array.from({ length: m }, (_, j) => Math.sqrt(cov[j * m + j]));
  const atBound: number[] = [];
  for (let j = 0; j < m; j++) if (p[j] <= lo[j] + EPS * Math.abs(lo[j]) || p[j] >= hi[j] - EPS * Math.abs(hi[j])) atBound.push(j);
  return { p: Array.from(p), sse, iterations: iter, converged, reason, stdErr, covariance: cov, atBound };
}
