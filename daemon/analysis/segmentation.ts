/**
 * Regime segmentation: the best piecewise-straight description of a linearized curve.
 *
 * Optimal partitioning by dynamic programming (Jackson et al., IEEE Signal Process. Lett. 12, 105,
 * 2005): minimise Σ SSE_k/σ² + β per extra segment over all partitions into runs of at least
 * `minPoints`. β defaults to 3·ln n (a BIC charge for the slope, intercept and breakpoint each new
 * segment adds); σ is the model-free noise estimate unless given. Prefix-sum fits make each
 * candidate run O(1); long curves search a grid of candidate breakpoints, then refine each exactly.
 */
import { AnalysisError } from './errors.js';
import type { Numbers } from './line-fit.js';
import { estimateNoise } from './noise.js';
import { PrefixLines } from './prefix-lines.js';

export interface Segment {
  /** First and last index (inclusive) in the sorted input. */
  readonly start: number;
  readonly end: number;
  /** x range covered. */
  readonly from: number;
  readonly to: number;
  readonly slope: number;
  readonly intercept: number;
  readonly n: number;
  /** Standard errors from the run's own scatter. */
  readonly slopeStdErr: number;
  readonly interceptStdErr: number;
  readonly covariance: number;
}

export interface Segmentation {
  readonly segments: Segment[];
  /** x positions between segments (midway between the neighbouring points). */
  readonly breakpoints: number[];
  /** Noise level the penalty was scaled by. */
  readonly sigma: number;
}

export interface SegmentOptions {
  readonly minPoints?: number;
  readonly penalty?: number;
  readonly sigma?: number;
  /** Upper bound on segments (default 6): regimes, not wiggles. */
  readonly maxSegments?: number;
}

/** How a whole linearized curve is cut into the regimes a report lists (and the fit's checks consult). */
export const REGIME_SEGMENTS: SegmentOptions = { minPoints: 5, maxSegments: 5 };

/** x must be sorted ascending. */
export function segmentLine(x: Numbers, y: Numbers, options: SegmentOptions = {}): Segmentation {
  const n = x.length;
  const minPoints = Math.max(3, options.minPoints ?? 4);
  if (n < minPoints) {
    throw new AnalysisError('TOO_FEW_POINTS', `segmentation needs at least ${minPoints} points, got ${n}`);
  }
  const lines = new PrefixLines(x, y);
  let sigma = options.sigma ?? estimateNoise(x, y);
  let yRange = 0;
  for (let i = 0; i < n; i++) yRange = Math.max(yRange, Math.abs(y[i] - y[0]));
  // A noise-free curve would make every deviation infinitely costly; floor σ at a tiny fraction.
  sigma = Math.max(sigma, 1e-9 * (yRange || 1));
  const inv = 1 / (sigma * sigma);
  const beta = options.penalty ?? 3 * Math.log(n);
  const maxSeg = Math.max(1, options.maxSegments ?? 6);

  // Long curves: breakpoints are first sought on a grid of candidate positions (stride s), then
  // each is refined exactly within ±s. Keeps the cost near O(K·(n/s)²) instead of O(K·n²).
  const stride = Math.max(1, Math.ceil(n / 100));
  const cand: number[] = [];
  for (let p = 0; p < n; p += stride) cand.push(p);
  cand.push(n);
  const m = cand.length;
  const INF = Number.POSITIVE_INFINITY;
  const best: Float64Array[] = [];
  const from: Int32Array[] = [];
  for (let k = 0; k < maxSeg; k++) {
    best.push(new Float64Array(m).fill(INF));
    from.push(new Int32Array(m).fill(-1));
  }
  const cost = (a: number, b: number) => (b - a >= minPoints ? lines.sse(a, b - 1) * inv : INF);
  // The cost of a run between two candidates is the same at every segment count: compute it once.
  const runCost = new Float64Array(m * m);
  for (let i = 0; i < m; i++) for (let j = i + 1; j < m; j++) runCost[i * m + j] = cost(cand[i], cand[j]);
  for (let j = 1; j < m; j++) best[0][j] = runCost[j];
  for (let k = 1; k < maxSeg; k++) {
    const prev = best[k - 1];
    for (let j = 1; j < m; j++) {
      let b = INF;
      let a = -1;
      for (let i = 1; i < j; i++) {
        if (prev[i] === INF) continue;
        const c = prev[i] + runCost[i * m + j];
        if (c < b) {
          b = c;
          a = i;
        }
      }
      best[k][j] = b + beta;
      from[k][j] = a;
    }
  }
  let bestK = 0;
  for (let k = 1; k < maxSeg; k++) if (best[k][m - 1] < best[bestK][m - 1]) bestK = k;
  const bounds: number[] = [n];
  for (let k = bestK, j = m - 1; k > 0; k--) {
    j = from[k][j];
    bounds.unshift(cand[j]);
  }
  bounds.unshift(0);
  if (stride > 1) {
    // Refine each breakpoint exactly within ±stride, then drop any breakpoint whose removal costs
    // less than its penalty (a grid can force an extra short segment); repeat until stable.
    for (let pass = 0; pass < 4; pass++) {
      for (let s = 1; s + 1 < bounds.length; s++) {
        const a = bounds[s - 1];
        const c = bounds[s + 1];
        let bestB = bounds[s];
        let bestC = cost(a, bestB) + cost(bestB, c);
        for (let b = Math.max(a + minPoints, bounds[s] - stride); b <= Math.min(c - minPoints, bounds[s] + stride); b++) {
          const t = cost(a, b) + cost(b, c);
          if (t < bestC) {
            bestC = t;
            bestB = b;
          }
        }
        bounds[s] = bestB;
      }
      let removed = false;
      for (let s = 1; s + 1 < bounds.length; s++) {
        const a = bounds[s - 1];
        const c = bounds[s + 1];
        if (cost(a, c) - cost(a, bounds[s]) - cost(bounds[s], c) < beta) {
          bounds.splice(s, 1);
          removed = true;
          s--;
        }
      }
      if (!removed) break;
    }
  }
  const segments: Segment[] = [];
  for (let s = 0; s + 1 < bounds.length; s++) {
    const start = bounds[s];
    const end = bounds[s + 1] - 1;
    const f = lines.fit(start, end);
    const dof = Math.max(1, f.n - 2);
    const s2 = f.sse / dof;
    let meanX = 0;
    for (let i = start; i <= end; i++) meanX += x[i];
    meanX /= f.n;
    segments.push({
      start,
      end,
      from: x[start],
      to: x[end],
      slope: f.slope,
      intercept: f.intercept,
      n: f.n,
      slopeStdErr: Math.sqrt(s2 / f.sxx),
      interceptStdErr: Math.sqrt(s2 * (1 / f.n + (meanX * meanX) / f.sxx)),
      covariance: (-s2 * meanX) / f.sxx,
    });
  }
  const breakpoints = segments.slice(1).map((s) => 0.5 * (x[s.start - 1] + x[s.start]));
  return { segments, breakpoints, sigma };
}
