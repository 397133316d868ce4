/**
 * Weighted fits of any contiguous run of points in O(1), from prefix sums of weighted moments:
 * the straight line y = a + b·x (with its χ² and slope variance) and the quadratic
 * y = c₀ + c₁x + c₂x² (for the curvature test). x and y are centred and scaled once over the whole
 * curve so the raw-moment sums keep their digits; the reported fit of a window is always redone
 * point by point (fitLine or the joint fit), these sums only choose the window.
 *
 * Weights are 1/σ² in y units (absolute: χ² = Σw·r²).
 */
import type { Numbers } from './line-fit.js';

export interface RunLine {
  readonly n: number;
  readonly slope: number;
  readonly intercept: number;
  /** Σw·r² about the line. */
  readonly chi2: number;
  /** Σw(x − x̄_w)²: var(slope) = 1/sxx for absolute weights. */
  readonly sxx: number;
  readonly sumW: number;
  readonly meanX: number;
}

export interface RunCurvature {
  /** Quadratic coefficient and its standard error (absolute weights). */
  readonly c2: number;
  readonly c2StdErr: number;
  /** Σw·r² about the quadratic. */
  readonly chi2: number;
  /** Largest |quadratic − best line| over the run, y units. */
  readonly sag: number;
}

export class WindowMoments {
  readonly length: number;
  private readonly n0: Float64Array;
  private readonly s0: Float64Array;
  private readonly s1: Float64Array;
  private readonly s2: Float64Array;
  private readonly s3: Float64Array;
  private readonly s4: Float64Array;
  private readonly t0: Float64Array;
  private readonly t1: Float64Array;
  private readonly t2: Float64Array;
  private readonly u0: Float64Array;
  private readonly cx: number;
  private readonly kx: number;
  private readonly cy: number;
  private readonly ky: number;
  private readonly xs: Numbers;

  constructor(x: Numbers, y: Numbers, w: Numbers) {
    const n = x.length;
    this.length = n;
    this.xs = x;
    let minX = Infinity;
    let maxX = -Infinity;
    let minY = Infinity;
    let maxY = -Infinity;
    for (let i = 0; i < n; i++) {
      if (x[i] < minX) minX = x[i];
      if (x[i] > maxX) maxX = x[i];
      if (y[i] < minY) minY = y[i];
      if (y[i] > maxY) maxY = y[i];
    }
    this.cx = n ? 0.5 * (minX + maxX) : 0;
    this.kx = maxX > minX ? 0.5 * (maxX - minX) : 1;
    this.cy = n ? 0.5 * (minY + maxY) : 0;
    this.ky = maxY > minY ? 0.5 * (maxY - minY) : 1;
    const mk = () => new Float64Array(n + 1);
    this.n0 = mk();
    this.s0 = mk();
    this.s1 = mk();
    this.s2 = mk();
    this.s3 = mk();
    this.s4 = mk();
    this.t0 = mk();
    this.t1 = mk();
    this.t2 = mk();
    this.u0 = mk();
    let a0 = 0,
      a1 = 0,
      a2 = 0,
      a3 = 0,
      a4 = 0,
      b0 = 0,
      b1 = 0,
      b2 = 0,
      c0 = 0,
      cnt = 0;
    for (let i = 0; i < n; i++) {
      const wi = w[i] > 0 && Number.isFinite(w[i]) ? w[i] : 0;
      const u = (x[i] - this.cx) / this.kx;
      const v = (y[i] - this.cy) / this.ky;
      const u2 = u * u;
      a0 += wi;
      a1 += wi * u;
      a2 += wi * u2;
      a3 += wi * u2 * u;
      a4 += wi * u2 * u2;
      b0 += wi * v;
      b1 += wi * u * v;
      b2 += wi * u2 * v;
      c0 += wi * v * v;
      if (wi > 0) cnt++;
      this.n0[i + 1] = cnt;
      this.s0[i + 1] = a0;
      this.s1[i + 1] = a1;
      this.s2[i + 1] = a2;
      this.s3[i + 1] = a3;
      this.s4[i + 1] = a4;
      this.t0[i + 1] = b0;
      this.t1[i + 1] = b1;
      this.t2[i + 1] = b2;
      this.u0[i + 1] = c0;
    }
  }

  /** Points with positive weight in start..end (inclusive). */
  count(start: number, end: number): number {
    return this.n0[end + 1] - this.n0[start];
  }

  /** Weighted straight line through points start..end inclusive (undefined when degenerate). */
  line(start: number, end: number): RunLine | undefined {
    const out = { n: 0, slope: 0, intercept: 0, chi2: 0, sxx: 0, sumW: 0, meanX: 0 };
    return this.lineInto(start, end, out) ? out : undefined;
  }

  /** As line(), written into `out` (no allocation, for the window search's inner loop); false when degenerate. */
  lineInto(start: number, end: number, out: { -readonly [K in keyof RunLine]: RunLine[K] }): boolean {
    const a = start;
    const b = end + 1;
    const S = this.s0[b] - this.s0[a];
    if (!(S > 0)) return false;
    const Su = this.s1[b] - this.s1[a];
    const Suu = this.s2[b] - this.s2[a];
    const Sv = this.t0[b] - this.t0[a];
    const Suv = this.t1[b] - this.t1[a];
    const Svv = this.u0[b] - this.u0[a];
    const mu = Su / S;
    const mv = Sv / S;
    const cuu = Suu - Su * mu;
    if (!(cuu > 1e-14 * Math.max(Suu, 1e-300))) return false;
    const cuv = Suv - Su * mv;
    const cvv = Math.max(0, Svv - Sv * mv);
    const slopeUV = cuv / cuu;
    const chiUV = Math.max(0, cvv - slopeUV * cuv);
    const slope = (slopeUV * this.ky) / this.kx;
    const meanX = this.cx + mu * this.kx;
    const meanY = this.cy + mv * this.ky;
    out.n = this.count(start, end);
    out.slope = slope;
    out.intercept = meanY - slope * meanX;
    out.chi2 = chiUV * this.ky * this.ky;
    out.sxx = cuu * this.kx * this.kx;
    out.sumW = S;
    out.meanX = meanX;
    return true;
  }

  /** Weighted quadratic through start..end (undefined when degenerate or fewer than 4 points). */
  curvature(start: number, end: number): RunCurvature | undefined {
    const out = { c2: 0, c2StdErr: 0, chi2: 0, sag: 0 };
    return this.curvatureInto(start, end, out) ? out : undefined;
  }

  /** As curvature(), written into `out`; false when degenerate. */
  curvatureInto(start: number, end: number, out: { -readonly [K in keyof RunCurvature]: RunCurvature[K] }): boolean {
    if (this.count(start, end) < 4) return false;
    const a = start;
    const b = end + 1;
    // Centre on the run's weighted mean of u to keep the 3×3 system well conditioned.
    const S = this.s0[b] - this.s0[a];
    if (!(S > 0)) return false;
    const m1 = (this.s1[b] - this.s1[a]) / S;
    const m2 = (this.s2[b] - this.s2[a]) / S;
    const m3 = (this.s3[b] - this.s3[a]) / S;
    const m4 = (this.s4[b] - this.s4[a]) / S;
    const mv = (this.t0[b] - this.t0[a]) / S;
    const muv = (this.t1[b] - this.t1[a]) / S;
    const mu2v = (this.t2[b] - this.t2[a]) / S;
    const mvv = (this.u0[b] - this.u0[a]) / S;
    // Central moments about c = m1 (per unit weight).
    const c = m1;
    const k2 = m2 - c * c;
    const k3 = m3 - 3 * c * m2 + 2 * c * c * c;
    const k4 = m4 - 4 * c * m3 + 6 * c * c * m2 - 3 * c * c * c * c;
    const kv = muv - c * mv; // E[(u−c)(v−v̄)] with v centred below
    const k2v = mu2v - 2 * c * muv + c * c * mv - k2 * mv; // E[((u−c)² − k2)(v − v̄)]
    const kvv = mvv - mv * mv;
    if (!(k2 > 1e-12)) return false;
    // Orthogonal basis: 1, p1 = u − c, p2 = (u − c)² − (k3/k2)(u − c) − k2.
    const p2p2 = k4 - (k3 * k3) / k2 - k2 * k2;
    if (!(p2p2 > 1e-14 * Math.max(k4, 1e-300))) return false;
    const vp2 = k2v - (k3 / k2) * kv;
    const g2 = vp2 / p2p2; // coefficient of p2 (= c2 in u units)
    const g1 = kv / k2;
    const chiUV = Math.max(0, kvv - g1 * kv - g2 * vp2) * S;
    const c2 = (g2 * this.ky) / (this.kx * this.kx);
    // Var(coefficient of p2) = 1/(S·E[p2²]) in y units for absolute weights (w = 1/σ_y²).
    const c2StdErr = Math.sqrt(1 / (p2p2 * S)) / (this.kx * this.kx);
    // The quadratic part about the best line is g2·p2(u); its largest size over the run's u range.
    const uLo = (this.xs[start] - this.cx) / this.kx;
    const uHi = (this.xs[end] - this.cx) / this.kx;
    const p2at = (u: number) => (u - c) * (u - c) - (k3 / k2) * (u - c) - k2;
    const uMin = c + k3 / (2 * k2);
    let sag = Math.max(Math.abs(p2at(uLo)), Math.abs(p2at(uHi)));
    if (uMin > Math.min(uLo, uHi) && uMin < Math.max(uLo, uHi)) sag = Math.max(sag, Math.abs(p2at(uMin)));
    out.c2 = c2;
    out.c2StdErr = c2StdErr;
    out.chi2 = chiUV * this.ky * this.ky;
    out.sag = Math.abs(g2) * sag * this.ky;
    return true;
  }
}
