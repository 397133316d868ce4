/**
 * Automatic fit window: the widest contiguous run of points (in the linearized coordinates) that a
 * straight line describes to within the noise, with no systematic trend left.
 *
 * Noise σ comes from the model-free neighbour estimate (noise.ts). A run passes when
 *  1. its χ² = SSE/σ² is below the 99 % point of χ² with n − 2 degrees of freedom, and
 *  2. the slopes fitted to its two halves agree within 3.29 standard errors (a two-sided 0.1 %
 *     test), which catches a gentle bend that χ² alone would forgive.
 * Widest first; among equally wide runs the lowest χ² wins. O(n²) prefix-sum fits at worst.
 */
import { AnalysisError } from './errors.js';
import type { Numbers } from './line-fit.js';
import { chiSquare99, estimateNoise } from './noise.js';
import { PrefixLines } from './prefix-lines.js';

export interface AutoWindow {
  /** Inclusive index range into the sorted points. */
  readonly start: number;
  readonly end: number;
  readonly sigma: number;
  readonly chi2: number;
}

export function autoWindow(x: Numbers, y: Numbers, options: { minPoints?: number; sigma?: number } = {}): AutoWindow {
  const n = x.length;
  const minPoints = Math.max(3, options.minPoints ?? 5);
  if (n < minPoints) {
    throw new AnalysisError('TOO_FEW_POINTS', `an automatic window needs at least ${minPoints} points, got ${n}`);
  }
  let yRange = 0;
  for (let i = 0; i < n; i++) yRange = Math.max(yRange, Math.abs(y[i] - y[0]));
  const sigma = Math.max(options.sigma ?? estimateNoise(x, y), 1e-9 * (yRange || 1));
  const s2 = sigma * sigma;
  const lines = new PrefixLines(x, y);
  const zLimit = 3.2905267314919255;
  for (let width = n; width >= minPoints; width--) {
    const limit = chiSquare99(width - 2);
    let bestStart = -1;
    let bestChi = Infinity;
    for (let s = 0; s + width <= n; s++) {
      const e = s + width - 1;
      const f = lines.fit(s, e);
      const chi = f.sse / s2;
      if (chi > limit || chi >= bestChi) continue;
      const h = width >> 1;
      if (h >= 3 && width - h >= 3) {
        const a = lines.fit(s, s + h - 1);
        const b = lines.fit(s + h, e);
        if (a.sxx > 0 && b.sxx > 0) {
          const z = Math.abs(a.slope - b.slope) / Math.sqrt(s2 / a.sxx + s2 / b.sxx);
          if (z > zLimit) continue;
        }
      }
      bestChi = chi;
      bestStart = s;
    }
    if (bestStart >= 0) return { start: bestStart, end: bestStart + width - 1, sigma, chi2: bestChi };
  }
  // Nothing passes (the curve bends everywhere at this noise): the flattest minimal run.
  let best = 0;
  let bestSse = Infinity;
  for (let s = 0; s + minPoints <= n; s++) {
    const f = lines.fit(s, s + minPoints - 1);
    if (f.sse < bestSse) {
      bestSse = f.sse;
      best = s;
    }
  }
  return { start: best, end: best + minPoints - 1, sigma, chi2: bestSse / s2 };
}
