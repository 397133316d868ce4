/**
 * Regime segmentation: the best piecewise-straight description of a linearized curve.
 *
 * Optimal partitioning by dynamic programming (Jackson et al., IEEE Signal Process. Lett. 12, 105,
 * 2005): minimise Σ SSE_k/σ² + β per extra segment over all partitions into runs of at least
 * `minPoints`. β defaults to 3·ln n (a BIC charge for the slope, intercept and breakpoint each new
 * segment adds); σ is the model-free noise estimate unless given. O(n²) with prefix-sum fits.
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

  // best[k][j]: cost of the first j points split into k+1 segments; bounded k keeps it O(K n²).
  const INF = Number.POSITIVE_INFINITY;
  const best: Float64Array[] = [];
  const from: Int32Array[] = [];
  for (let k = 0; k < maxSeg; k++) {
    best.push(new Float64Array(n + 1).fill(INF));
    from.push(new Int32Array(n + 1).fill(-1));
  }
  for (let j = minPoints; j <= n; j++) best[0][j] = lines.fit(0, j - 1).sse * inv;
  for (let k = 1; k < maxSeg; k++) {
    const prev = best[k - 1];
    const cur = best[k];
    const arg = from[k];
    for (let j = (k + 1) * minPoints; j <= n; j++) {
      let b = INF;
      let a = -1;
      for (let i = k * minPoints; i <= j - minPoints; i++) {
        if (prev[i] === INF) continue;
        const c = prev[i] + lines.fit(i, j - 1).sse * inv;
        if (c < b) {
          b = c;
          a = i;
        }
      }
      cur[j] = b + beta;
      arg[j] = a;
    }
  }
  let bestK = 0;
  for (let k = 1; k < maxSeg; k++) if (best[k][n] < best[bestK][n]) bestK = k;

  const bounds: number[] = [n];
  for (let k = bestK, j = n; k > 0; k--) {
    j = from[k][j];
    bounds.unshift(j);
  }
  bounds.unshift(0);
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
