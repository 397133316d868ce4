/**
 * Selection against sorting (the definition of an order statistic): for random arrays, arrays
 * full of ties, sorted and reversed ones, every k gives the value a sorted copy holds at k, with
 * everything before it no larger and everything after no smaller.
 */
import { describe, expect, it } from 'vitest';
import { seededUniform } from '../../daemon/analysis/random.js';
import { medianInPlace, selectInPlace } from '../../daemon/analysis/select.js';

function cases(): Float64Array[] {
  const u = seededUniform(7);
  const out: Float64Array[] = [];
  for (const n of [1, 2, 3, 5, 10, 101, 1000]) {
    out.push(Float64Array.from({ length: n }, () => u()));
    out.push(Float64Array.from({ length: n }, () => Math.floor(u() * 3))); // ties
    out.push(Float64Array.from({ length: n }, (_, k) => k)); // sorted
    out.push(Float64Array.from({ length: n }, (_, k) => n - k)); // reversed
  }
  return out;
}

describe('selection', () => {
  it('every k of every case matches a full sort and partitions around it', () => {
    for (const c of cases()) {
      const sorted = c.slice().sort();
      for (let k = 0; k < c.length; k += Math.max(1, Math.floor(c.length / 17))) {
        const a = c.slice();
        const v = selectInPlace(a, k);
        expect(v).toBe(sorted[k]);
        for (let j = 0; j < k; j++) expect(a[j]).toBeLessThanOrEqual(v);
        for (let j = k + 1; j < a.length; j++) expect(a[j]).toBeGreaterThanOrEqual(v);
        expect(a.slice().sort()).toEqual(sorted); // a permutation: nothing lost or duplicated
      }
    }
  });

  it('the median of odd and even counts is the sorted definition; NaN falls back to the sort', () => {
    for (const c of cases()) {
      const s = c.slice().sort();
      const m = s.length >> 1;
      expect(medianInPlace(c.slice())).toBe(s.length % 2 ? s[m] : 0.5 * (s[m - 1] + s[m]));
    }
    expect(medianInPlace(new Float64Array(0))).toBeNaN();
    expect(selectInPlace(Float64Array.from([3, Number.NaN, 1, 2]), 1)).toBe(2);
    expect(() => selectInPlace(new Float64Array(3), 3)).toThrow(RangeError);
  });
});
