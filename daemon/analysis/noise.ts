/**
 * Estimates the point-to-point noise σ of y along a smooth curve, without a model: each interior
 * point is compared with the straight interpolation of its two neighbours. For independent noise
 * σ the interpolation residual has variance σ²(1 + α² + (1−α)²), α the point's fractional position
 * between the neighbours; the estimate is a median-based (robust) scale of the normalised residuals.
 */
import type { Numbers } from './line-fit.js';
import { medianInPlace } from './select.js';

/** x must be sorted ascending. Returns 0 for fewer than 3 points or a perfectly smooth curve. */
export function estimateNoise(x: Numbers, y: Numbers): number {
  const n = x.length;
  if (n < 3) return 0;
  const scaled = new Float64Array(Math.max(0, n - 2));
  let count = 0;
  for (let i = 1; i < n - 1; i++) {
    const span = x[i + 1] - x[i - 1];
    if (!(span > 0)) continue;
    const a = (x[i] - x[i - 1]) / span;
    const interp = y[i - 1] + a * (y[i + 1] - y[i - 1]);
    const factor = Math.sqrt(1 + a * a + (1 - a) * (1 - a));
    scaled[count++] = Math.abs(y[i] - interp) / factor;
  }
  if (count === 0) return 0;
  // The median by selection (linear time), not by sorting a million residuals.
  const median = medianInPlace(scaled.subarray(0, count));
  // For a normal variable, median(|e|) = 0.6745σ.
  return median / 0.6744897501960817;
}
