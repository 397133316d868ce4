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
  /**
   * Prefix sums of u, v, u², uv and v² of the scaled data, interleaved: the sums over the first i
   * points start at 5i. (The count of a run is end − start + 1 itself.)
   */
  private readonly s: Float64Array;
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
    const cx = n ? mx / n : 0;
    const cy = n ? my / n : 0;
    const kx = maxX > minX ? (maxX - minX) / 2 : 1;
    const ky = maxY > minY ? (maxY - minY) / 2 : 1;
    this.cx = cx;
    this.cy = cy;
    this.kx = kx;
    this.ky = ky;
    const s = new Float64Array(5 * (n + 1));
    this.s = s;
    let su = 0;
    let sv = 0;
    let suu = 0;
    let suv = 0;
    let svv = 0;
    for (let i = 0, o = 5; i < n; i++, o += 5) {
      const u = (x[i] - cx) / kx;
      const v = (y[i] - cy) / ky;
      su += u;
      sv += v;
      suu += u * u;
      suv += u * v;
      svv += v * v;
      s[o] = su;
      s[o + 1] = sv;
      s[o + 2] = suu;
      s[o + 3] = suv;
      s[o + 4] = svv;
    }
  }

  /** Residual sum of squares of the fit of points start..end inclusive, without allocating. */
  sse(start: number, end: number): number {
    const s = this.s;
    const a = 5 * start;
    const b = 5 * (end + 1);
    const n = end + 1 - start;
    const su = s[b] - s[a];
    const sv = s[b + 1] - s[a + 1];
    const cuu = Math.max(0, s[b + 2] - s[a + 2] - (su * su) / n);
    const cuv = s[b + 3] - s[a + 3] - (su * sv) / n;
    const cvv = Math.max(0, s[b + 4] - s[a + 4] - (sv * sv) / n);
    const sseUV = cuu > 0 ? Math.max(0, cvv - (cuv * cuv) / cuu) : cvv;
    return sseUV * this.ky * this.ky;
  }

  /** Fit of points start..end inclusive (end − start ≥ 1). */
  fit(start: number, end: number): RunFit {
    const s = this.s;
    const a = 5 * start;
    const b = 5 * (end + 1);
    const n = end + 1 - start;
    const su = s[b] - s[a];
    const sv = s[b + 1] - s[a + 1];
    const mu = su / n;
    const mv = sv / n;
    const cuu = Math.max(0, s[b + 2] - s[a + 2] - su * mu);
    const cuv = s[b + 3] - s[a + 3] - su * mv;
    const cvv = Math.max(0, s[b + 4] - s[a + 4] - sv * mv);
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
