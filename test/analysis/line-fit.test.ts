import { describe, expect, it } from 'vitest';
import { AnalysisError } from '../../daemon/analysis/errors.js';
import { fitLine, fitProportional } from '../../daemon/analysis/line-fit.js';
import { LineAccumulator } from '../../daemon/analysis/line-accumulator.js';
import { HAVE_STRD, loadStrd, lre } from '../helpers/reference.js';

// Source: NIST Statistical Reference Datasets, linear regression (Norris: lower difficulty;
// NoInt1/NoInt2: average difficulty, no-intercept model, uncentred R²). Certified to 15 digits.
describe.skipIf(!HAVE_STRD)('straight-line fit against NIST StRD certified values', () => {
  it('Norris: B0, B1, their SDs, residual SD and R² to at least 12 significant digits', () => {
    const d = loadStrd('Norris');
    const f = fitLine(d.x, d.y);
    const c = d.certified;
    expect(lre(f.intercept, c.params.B0.value)).toBeGreaterThanOrEqual(12);
    expect(lre(f.slope, c.params.B1.value)).toBeGreaterThanOrEqual(12);
    expect(lre(f.interceptStdErr, c.params.B0.sd)).toBeGreaterThanOrEqual(12);
    expect(lre(f.slopeStdErr, c.params.B1.sd)).toBeGreaterThanOrEqual(12);
    expect(lre(f.residualStdDev, c.residualSD)).toBeGreaterThanOrEqual(12);
    expect(lre(f.r2, c.rSquared)).toBeGreaterThanOrEqual(12);
    expect(lre(f.sse, c.residualSumOfSquares)).toBeGreaterThanOrEqual(12);
    expect(f.n).toBe(36);
    expect(f.dof).toBe(34);
  });

  for (const name of ['NoInt1', 'NoInt2']) {
    it(`${name}: B1, its SD, residual SD and uncentred R² through the origin to 12 digits`, () => {
      const d = loadStrd(name);
      const f = fitProportional(d.x, d.y);
      const c = d.certified;
      expect(lre(f.slope, c.params.B1.value)).toBeGreaterThanOrEqual(12);
      expect(lre(f.slopeStdErr, c.params.B1.sd)).toBeGreaterThanOrEqual(12);
      expect(lre(f.residualStdDev, c.residualSD)).toBeGreaterThanOrEqual(12);
      expect(lre(f.r2, c.rSquared)).toBeGreaterThanOrEqual(12);
    });
  }

  it('Norris shifted by 1e6 in x still gives the certified slope to 9 digits (centred sums)', () => {
    const d = loadStrd('Norris');
    const f = fitLine(
      d.x.map((v) => v + 1e6),
      d.y,
    );
    expect(lre(f.slope, d.certified.params.B1.value)).toBeGreaterThanOrEqual(9);
  });
});

describe('weighted least squares', () => {
  it('an integer weight equals repeating the point (identity of the normal equations)', () => {
    const x = [1, 2, 3, 4, 5, 6];
    const y = [2.1, 3.9, 6.2, 7.8, 10.1, 12.2];
    const w = [1, 3, 1, 2, 1, 1];
    const xr: number[] = [];
    const yr: number[] = [];
    w.forEach((k, i) => {
      for (let j = 0; j < k; j++) {
        xr.push(x[i]);
        yr.push(y[i]);
      }
    });
    const fw = fitLine(x, y, { weights: w, absoluteWeights: true });
    const fo = fitLine(xr, yr);
    expect(fw.slope).toBeCloseTo(fo.slope, 12);
    expect(fw.intercept).toBeCloseTo(fo.intercept, 12);
    expect(fw.chi2Reduced).not.toBeNull();
  });

  it('absolute weights give var(slope) = S/Δ (Bevington eq. 6.22)', () => {
    const x = [0, 1, 2, 3, 4];
    const y = [1, 3.1, 4.9, 7.2, 8.8];
    const sig = [0.1, 0.2, 0.1, 0.3, 0.2];
    const w = sig.map((s) => 1 / (s * s));
    const f = fitLine(x, y, { weights: w, absoluteWeights: true });
    let S = 0,
      Sx = 0,
      Sxx = 0;
    for (let i = 0; i < x.length; i++) {
      S += w[i];
      Sx += w[i] * x[i];
      Sxx += w[i] * x[i] * x[i];
    }
    const delta = S * Sxx - Sx * Sx;
    expect(f.slopeStdErr ** 2).toBeCloseTo(S / delta, 12);
    expect(f.interceptStdErr ** 2).toBeCloseTo(Sxx / delta, 12);
    expect(f.covariance).toBeCloseTo(-Sx / delta, 12);
  });
});

describe('degenerate input is a coded error, never a silent NaN', () => {
  it('two points', () => {
    expect(() => fitLine([1, 2], [1, 2])).toThrowError(AnalysisError);
    try {
      fitLine([1, 2], [1, 2]);
    } catch (e) {
      expect((e as AnalysisError).code).toBe('TOO_FEW_POINTS');
    }
  });
  it('all x equal', () => {
    try {
      fitLine([3, 3, 3, 3], [1, 2, 3, 4]);
      expect.unreachable();
    } catch (e) {
      expect((e as AnalysisError).code).toBe('DEGENERATE_X');
    }
  });
  it('mismatched lengths and non-finite values', () => {
    expect(() => fitLine([1, 2, 3], [1, 2])).toThrowError(/differ in length/);
    expect(() => fitLine([1, 2, 3, 4], [1, NaN, 3, 4])).toThrowError(/not finite/);
  });
  it('inputs are not mutated and the result is frozen', () => {
    const x = new Float64Array([1, 2, 3, 4]);
    const y = new Float64Array([2, 4.1, 5.9, 8.2]);
    const f = fitLine(x, y);
    expect(Array.from(x)).toEqual([1, 2, 3, 4]);
    expect(Object.isFrozen(f)).toBe(true);
  });
});

describe('incremental accumulator', () => {
  it.skipIf(!HAVE_STRD)('agrees with the batch fit on Norris to 1e-10 relative', () => {
    const d = loadStrd('Norris');
    const acc = new LineAccumulator();
    d.x.forEach((x, i) => acc.add(x, d.y[i]));
    const a = acc.fit();
    const b = fitLine(d.x, d.y);
    for (const k of ['slope', 'intercept', 'slopeStdErr', 'interceptStdErr', 'residualStdDev', 'r2'] as const) {
      expect(Math.abs(a[k] - b[k]) / Math.abs(b[k])).toBeLessThan(1e-10);
    }
  });

  it('a sliding window (add one, remove the oldest) tracks the batch fit of the window', () => {
    const n = 2000;
    const win = 50;
    const x = Array.from({ length: n }, (_, i) => i * 0.01);
    const y = x.map((v, i) => 3 - 2 * v + 0.01 * Math.sin(i * 1.7));
    const w = x.map((_, i) => 1 + (i % 7));
    const acc = new LineAccumulator({ weighted: true });
    let worst = 0;
    let worstI = 0;
    for (let i = 0; i < n; i++) {
      acc.add(x[i], y[i], w[i]);
      if (i >= win) acc.remove(x[i - win], y[i - win], w[i - win]);
      if (i >= win && i % 97 === 0) {
        const a = acc.fit();
        const b = fitLine(x.slice(i - win + 1, i + 1), y.slice(i - win + 1, i + 1), { weights: w.slice(i - win + 1, i + 1) });
        worst = Math.max(worst, Math.abs(a.slope - b.slope) / Math.abs(b.slope));
        // The intercept is extrapolated far outside the window; judge it on the scale of its terms.
        worstI = Math.max(worstI, Math.abs(a.intercept - b.intercept) / (Math.abs(b.intercept) + Math.abs(b.slope * b.meanX)));
        expect(Math.abs(a.slopeStdErr - b.slopeStdErr) / b.slopeStdErr).toBeLessThan(1e-6);
      }
    }
    expect(worst).toBeLessThan(1e-10);
    expect(worstI).toBeLessThan(1e-10);
    expect(acc.n).toBe(win);
  });
});
