/**
 * Straight-line fits of any contiguous run of points in O(1), from prefix sums. Used by the
 * automatic window search and the regime segmentation, which try O(n²) runs. The data are centred
 * and scaled once so the raw-moment sums lose few digits; results are for tests and ranking of
 * candidate runs, and the final reported fit is always redone with the two-pass fitLine.
 */
import type { Numbers } from './line-fit.js';

export interface RunFit {
  readonly n: number;
  readonly slope: number;
  readonly intercept: number;
  /** Residual sum of squares in y units². */
  readonly sse: number;
  /** Σ(x − x̄)² of the run, x units². */
  readonly sxx: number;
}

export class PrefixLines {
  private readonly s1: Float64Array;
  private readonly sx: Float64Array;
  private readonly sy: Float64Array;
  private readonly sxx: Float64Array;
  private readonly sxy: Float64Array;
  private readonly syy: Float64Array;
  private readonly cx: number;
  private readonly cy: number;
  private readonly kx: number;
  private readonly ky: number;
  readonly length: number;

  constructor(x: Numbers, y: Numbers) {
    const n = x.length;
    this.length = n;
    let mx = 0;
    let my = 0;
    let minX = Infinity;
    let maxX = -Infinity;
    let minY = Infinity;
    let maxY = -Infinity;
    for (let i = 0; i < n; i++) {
      mx += x[i];
      my += y[i];
      if (x[i] < minX) minX = x[i];
      if (x[i] > maxX) maxX = x[i];
      if (y[i] < minY) minY = y[i];
      if (y[i] > maxY) maxY = y[i];
    }
    this.cx = n ? mx / n : 0;
    this.cy = n ? my / n : 0;
    this.kx = maxX > minX ? (maxX - minX) / 2 : 1;
    this.ky = maxY > minY ? (maxY - minY) / 2 : 1;
    const mk = () => new Float64Array(n + 1);
    this.s1 = mk();
    this.sx = mk();
    this.sy = mk();
    this.sxx = mk();
    this.sxy = mk();
    this.syy = mk();
    for (let i = 0; i < n; i++) {
      const u = (x[i] - this.cx) / this.kx;
      const v = (y[i] - this.cy) / this.ky;
      this.s1[i + 1] = this.s1[i] + 1;
      this.sx[i + 1] = this.sx[i] + u;
      this.sy[i + 1] = this.sy[i] + v;
      this.sxx[i + 1] = this.sxx[i] + u * u;
      this.sxy[i + 1] = this.sxy[i] + u * v;
      this.syy[i + 1] = this.syy[i] + v * v;
    }
  }

  /** Residual sum of squares of the fit of points start..end inclusive, without allocating. */
  sse(start: number, end: number): number {
    const a = start;
    const b = end + 1;
    const n = b - a;
    const su = this.sx[b] - this.sx[a];
    const sv = this.sy[b] - this.sy[a];
    const cuu = Math.max(0, this.sxx[b] - this.sxx[a] - (su * su) / n);
    const cuv = this.sxy[b] - this.sxy[a] - (su * sv) / n;
    const cvv = Math.max(0, this.syy[b] - this.syy[a] - (sv * sv) / n);
    const sseUV = cuu > 0 ? Math.max(0, cvv - (cuv * cuv) / cuu) : cvv;
    return sseUV * this.ky * this.ky;
  }

  /** Fit of points start..end inclusive (end − start ≥ 1). */
  fit(start: number, end: number): RunFit {
    const a = start;
    const b = end + 1;
    const n = this.s1[b] - this.s1[a];
    const su = this.sx[b] - this.sx[a];
    const sv = this.sy[b] - this.sy[a];
    const mu = su / n;
    const mv = sv / n;
    const cuu = Math.max(0, this.sxx[b] - this.sxx[a] - su * mu);
    const cuv = this.sxy[b] - this.sxy[a] - su * mv;
    const cvv = Math.max(0, this.syy[b] - this.syy[a] - sv * mv);
    const slopeUV = cuu > 0 ? cuv / cuu : 0;
    const sseUV = Math.max(0, cvv - slopeUV * cuv);
    const slope = (slopeUV * this.ky) / this.kx;
    const meanX = this.cx + mu * this.kx;
    const meanY = this.cy + mv * this.ky;
    return {
      n,
      slope,
      intercept: meanY - slope * meanX,
      sse: sseUV * this.ky * this.ky,
      sxx: cuu * this.kx * this.kx,
    };
  }
}
