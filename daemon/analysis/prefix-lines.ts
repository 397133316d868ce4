/**
 * Straight-line fits of any contiguous run of points in O(1), from prefix sums. Used by the
 * automatic window search and the regime segmentation, which try O(n²) runs. The data are centred
 * and scaled once so the raw-moment sums lose few digits; results are for tests and ranking of
 * candidate runs, and the final reported fit is always redone with the two-pass fitLine.
 *
 * The sums are stored at every BLOCK-th point only (a million points would otherwise hold 40 MB of
 * them); a sum in between is carried on from the block's start, or from a cursor left by a recent
 * query nearby, adding the same terms in the same order as the running sum: every value is the one
 * a full table would hold. Queries that walk along the points (the segmentation's refinement) cost
 * one step each.
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

/** Points between stored sums. */
const BLOCK = 64;
/** Cursors kept: the segmentation's refinement queries three moving or fixed ends at once. */
const CURSORS = 4;
/** Per cursor: the point index it stands at, its five sums and when it was last used. */
const STRIDE = 7;

export class PrefixLines {
  private readonly x: Numbers;
  private readonly y: Numbers;
  /** Sums of u, v, u², uv and v² of the scaled data over the first k·BLOCK points, at 5k. */
  private readonly blocks: Float64Array;
  private readonly cursors = new Float64Array(CURSORS * STRIDE).fill(-1);
  /** The sums at the two ends of the current query (5 each). */
  private readonly ends = new Float64Array(10);
  private clock = 0;
  private readonly cx: number;
  private readonly cy: number;
  private readonly kx: number;
  private readonly ky: number;
  readonly length: number;

  /** `x` and `y` are read again by later queries: they must not change while this is in use. */
  constructor(x: Numbers, y: Numbers) {
    const n = x.length;
    this.length = n;
    this.x = x;
    this.y = y;
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
    const s = new Float64Array(5 * (Math.floor(n / BLOCK) + 1));
    this.blocks = s;
    let su = 0;
    let sv = 0;
    let suu = 0;
    let suv = 0;
    let svv = 0;
    for (let i = 0; i < n; i++) {
      if (i % BLOCK === 0) {
        const o = 5 * (i / BLOCK);
        s[o] = su;
        s[o + 1] = sv;
        s[o + 2] = suu;
        s[o + 3] = suv;
        s[o + 4] = svv;
      }
      const u = (x[i] - cx) / kx;
      const v = (y[i] - cy) / ky;
      su += u;
      sv += v;
      suu += u * u;
      suv += u * v;
      svv += v * v;
    }
    if (n % BLOCK === 0) {
      const o = 5 * (n / BLOCK);
      s[o] = su;
      s[o + 1] = sv;
      s[o + 2] = suu;
      s[o + 3] = suv;
      s[o + 4] = svv;
    }
  }

  /** The five sums over the first i points (0 ≤ i ≤ n) into ends[at…at+4]. */
  private sumsTo(i: number, at: number): void {
    const c = this.cursors;
    const e = this.ends;
    const base = i - (i % BLOCK);
    // A cursor at i, or the nearest one before it in the same block; else the block's start.
    let use = -1;
    let from = base;
    let lru = 0;
    for (let k = 0; k < CURSORS; k++) {
      const ck = c[k * STRIDE];
      if (ck <= i && ck >= from && ck >= 0) {
        use = k;
        from = ck;
      }
      if (c[k * STRIDE + 6] < c[lru * STRIDE + 6]) lru = k;
    }
    let su: number;
    let sv: number;
    let suu: number;
    let suv: number;
    let svv: number;
    if (use >= 0) {
      const o = use * STRIDE;
      su = c[o + 1];
      sv = c[o + 2];
      suu = c[o + 3];
      suv = c[o + 4];
      svv = c[o + 5];
      // Exactly there: the cursor stays, its sums are the answer.
      if (from === i) lru = use;
    } else {
      const o = 5 * (base / BLOCK);
      const s = this.blocks;
      su = s[o];
      sv = s[o + 1];
      suu = s[o + 2];
      suv = s[o + 3];
      svv = s[o + 4];
    }
    const x = this.x;
    const y = this.y;
    for (let j = from; j < i; j++) {
      const u = (x[j] - this.cx) / this.kx;
      const v = (y[j] - this.cy) / this.ky;
      su += u;
      sv += v;
      suu += u * u;
      suv += u * v;
      svv += v * v;
    }
    // The new position goes to the least recently used cursor (the one it started from may still serve).
    const o = lru * STRIDE;
    c[o] = i;
    c[o + 1] = su;
    c[o + 2] = sv;
    c[o + 3] = suu;
    c[o + 4] = suv;
    c[o + 5] = svv;
    c[o + 6] = ++this.clock;
    e[at] = su;
    e[at + 1] = sv;
    e[at + 2] = suu;
    e[at + 3] = suv;
    e[at + 4] = svv;
  }

  /** Residual sum of squares of the fit of points start..end inclusive, without allocating. */
  sse(start: number, end: number): number {
    this.sumsTo(start, 0);
    this.sumsTo(end + 1, 5);
    const s = this.ends;
    const n = end + 1 - start;
    const su = s[5] - s[0];
    const sv = s[6] - s[1];
    const cuu = Math.max(0, s[7] - s[2] - (su * su) / n);
    const cuv = s[8] - s[3] - (su * sv) / n;
    const cvv = Math.max(0, s[9] - s[4] - (sv * sv) / n);
    const sseUV = cuu > 0 ? Math.max(0, cvv - (cuv * cuv) / cuu) : cvv;
    return sseUV * this.ky * this.ky;
  }

  /** Fit of points start..end inclusive (end − start ≥ 1). */
  fit(start: number, end: number): RunFit {
    this.sumsTo(start, 0);
    this.sumsTo(end + 1, 5);
    const s = this.ends;
    const n = end + 1 - start;
    const su = s[5] - s[0];
    const sv = s[6] - s[1];
    const mu = su / n;
    const mv = sv / n;
    const cuu = Math.max(0, s[7] - s[2] - su * mu);
    const cuv = s[8] - s[3] - su * mv;
    const cvv = Math.max(0, s[9] - s[4] - sv * mv);
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
