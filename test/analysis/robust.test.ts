/**
 * Robust statistics against outside references: numpy's percentile (its default 'linear' method is
 * Hyndman & Fan's type 7) and scipy.stats.median_abs_deviation (scale 1), run by Debian's python3;
 * modified z-scores as Iglewicz & Hoaglin (1993) define them, M = 0.6745 (x − median)/MAD, with
 * their cut-off |M| > 3.5. The grid floor on the MAD is our own rule, tested for what it promises:
 * devices that tie on a ramp's levels are not all outliers, one far off still is.
 */
import { describe, expect, it } from 'vitest';
import { boxSummary, gridResolution, mad, median, modifiedZ, OUTLIER_Z, quantile } from '../../daemon/analysis/robust.js';
import { runScipy } from '../helpers/scipy.js';

const REF = `
import sys, json, numpy as np
from scipy import stats
d = json.load(sys.stdin)
x = np.array(d['x'])
med = float(np.median(x))
m = float(stats.median_abs_deviation(x, scale=1.0))
print(json.dumps({
  'q': [float(np.percentile(x, p * 100)) for p in d['p']],
  'median': med,
  'mad': m,
  'z': [float(0.6745 * (v - med) / m) for v in x],
}))
`;

describe('robust statistics', () => {
  // A lot of breakdown fields (V/m) with one early failure; invented numbers, any would do.
  const x = [1.21e9, 1.18e9, 1.25e9, 1.22e9, 0.41e9, 1.19e9, 1.24e9, 1.2e9, 1.23e9, 1.17e9, 1.26e9];
  const ps = [0, 0.1, 0.25, 0.5, 0.75, 0.9, 1];

  it('quantiles, median, MAD and modified z agree with numpy and scipy', () => {
    const ref = runScipy<{ q: number[]; median: number; mad: number; z: number[] }>(REF, { x, p: ps });
    const sorted = Float64Array.from(x).sort();
    ps.forEach((p, k) => expect(quantile(sorted, p)).toBeCloseTo(ref.q[k], -1));
    expect(median(x)).toBe(ref.median);
    expect(Math.abs(mad(x) - ref.mad) / ref.mad).toBeLessThan(1e-12);
    const z = modifiedZ(x);
    z.forEach((v, k) => expect(Math.abs(v - ref.z[k])).toBeLessThan(1e-9));
    // Only the early failure passes Iglewicz & Hoaglin's cut-off.
    expect(z.map((v, k) => (Math.abs(v) > OUTLIER_Z ? k : -1)).filter((k) => k >= 0)).toEqual([4]);
    const b = boxSummary(x);
    expect(b.median).toBe(ref.median);
    expect(b.lowWhisker).toBe(1.17e9); // Tukey's whisker stops short of the 0.41e9 failure
  });

  it("finds the grid of a ramp's levels, and no grid in continuous values", () => {
    // Breakdown voltages read on a ramp of 0.1 V steps: sums of 0.1 carry float error.
    const levels = [9.6, 9.6, 9.700000000000001, 9.6, 9.5, 9.799999999999999, 9.6, 9.6];
    const q = gridResolution(levels);
    expect(q).toBeDefined();
    expect(q as number).toBeCloseTo(0.1, 9);
    expect(gridResolution(x)).toBeUndefined(); // no ties
    expect(gridResolution([1, 1, 1.3, 2.05])).toBeUndefined(); // ties, but 0.3 and 0.75 share no step
    expect(gridResolution([5, 5, 5])).toBeUndefined();
  });

  it('devices tied on a grid are not all flagged; one far off is', () => {
    // Twelve devices broke down at 9.6 V, three one step either side, one at 12.0 V.
    const v = [...Array(12).fill(9.6), 9.5, 9.7, 9.7, 12.0];
    expect(mad(v)).toBe(0);
    const bare = modifiedZ(v); // the mean absolute deviation stands in for the zero MAD
    const q = gridResolution(v) as number;
    const z = modifiedZ(v, q);
    const flagged = z.map((s, k) => (Math.abs(s) > OUTLIER_Z ? v[k] : null)).filter((s) => s !== null);
    expect(flagged).toEqual([12.0]);
    expect(bare.every(Number.isFinite)).toBe(true);
    // Twenty devices on one level and one a single step above: without the grid the lone
    // neighbour scores |M| ≈ 17 (the MAD is 0, the mean absolute deviation tiny); one step is all
    // the grid can tell apart, so with it the score is 0.6745.
    const tied = [...Array(20).fill(9.6), 9.7];
    expect(Math.abs(modifiedZ(tied)[20])).toBeGreaterThan(OUTLIER_Z);
    expect(modifiedZ(tied, gridResolution(tied))[20]).toBeCloseTo(0.6745, 6);
    expect(modifiedZ([3, 3, 3, 3])).toEqual([0, 0, 0, 0]);
  });
});
