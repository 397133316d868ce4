/**
 * Weibull analysis against outside references: scipy.stats.weibull_min (Debian's scipy, run by
 * /usr/bin/python3), a published worked example (NIST/SEMATECH e-Handbook of Statistical Methods,
 * §8.4.1.3), a coverage study on simulated lots, Bernard's and Johnson's rank formulas, the
 * weakest-link construction of area scaling, and D'Agostino & Stephens' Anderson–Darling table.
 */
import { describe, expect, it } from 'vitest';
import {
  analyzeWeibull,
  andersonDarling,
  areaScaledScale,
  coarseGrid,
  bendTest,
  bernardRank,
  chiSquare1Quantile,
  fitWeibull,
  medianRankPoints,
  normalQuantile,
  scaledScale,
  weibullBounds,
  weibullLogLikelihood,
  weibullQuantile,
  type WeibullData,
} from '../../daemon/analysis/weibull.js';
import { seededUniform } from '../../daemon/analysis/random.js';
import { runScipy } from '../helpers/scipy.js';

const rel = (a: number, b: number) => Math.abs(a - b) / Math.abs(b);

/** A simulated lot: inverse-CDF draws, optionally censored at `censorAt` (the ramp's end). */
function lot(n: number, shape: number, scale: number, seed: number, censorAt = Infinity, areaFactor = 1): { values: number[]; censored: boolean[] } {
  const u = seededUniform(seed);
  const values: number[] = [];
  const censored: boolean[] = [];
  for (let i = 0; i < n; i++) {
    const x = scale * (-Math.log(u()) / areaFactor) ** (1 / shape);
    values.push(Math.min(x, censorAt));
    censored.push(x > censorAt);
  }
  return { values, censored };
}

// Reference fit. Debian 12's scipy is 1.10.1, whose weibull_min.fit takes no censored data
// (scipy.stats.CensoredData arrived in 1.11): for censored lots the snippet maximises the censored
// log-likelihood, Σ logpdf(failures) + Σ logsf(survivors), with scipy.optimize; where CensoredData
// exists it also fits with it and reports both.
const FIT_PY = `
import json, sys, numpy as np
from scipy import stats, optimize
d = json.load(sys.stdin)
out = []
for lot in d['lots']:
    x = np.array(lot['values'], float); c = np.array(lot['censored'], bool)
    f, s = x[~c], x[c]
    def ll(b, e):
        return stats.weibull_min.logpdf(f, b, scale=e).sum() + stats.weibull_min.logsf(s, b, scale=e).sum()
    b0, _, e0 = stats.weibull_min.fit(f if len(f) > 1 else x, floc=0)
    if not c.any():
        b, e, how = b0, e0, 'weibull_min.fit(floc=0)'
    else:
        r = optimize.minimize(lambda p: -ll(*np.exp(p)), [np.log(b0), np.log(e0)], method='Nelder-Mead',
                              options={'xatol': 1e-12, 'fatol': 1e-13, 'maxiter': 40000})
        b, e = np.exp(r.x); how = 'scipy.optimize on the censored log-likelihood'
    res = {'shape': float(b), 'scale': float(e), 'logLik': float(ll(b, e)), 'how': how}
    if c.any() and hasattr(stats, 'CensoredData'):
        bc, _, ec = stats.weibull_min.fit(stats.CensoredData(uncensored=f, right=s), floc=0)
        res['censoredData'] = [float(bc), float(ec)]
    out.append(res)
print(json.dumps(out))
`;

// Reference bounds, computed independently of our profile formulas: the profile likelihoods are
// maximised numerically (minimize_scalar), the crossings found with brentq, χ² from scipy.stats.chi2;
// Fisher bounds from a central-difference Hessian of scipy's log-likelihood.
const BOUNDS_PY = `
import json, sys, numpy as np
from scipy import stats, optimize
d = json.load(sys.stdin)
C = d['confidence']
out = []
for lot in d['lots']:
    x = np.array(lot['values'], float); c = np.array(lot['censored'], bool)
    f, s = x[~c], x[c]
    def ll(b, e):
        return stats.weibull_min.logpdf(f, b, scale=e).sum() + stats.weibull_min.logsf(s, b, scale=e).sum()
    b, e = lot['shape'], lot['scale']
    lhat = ll(b, e)
    q = stats.chi2.ppf(C, 1)
    def prof_b(bb):
        r = optimize.minimize_scalar(lambda le: -ll(bb, np.exp(le)), bracket=(np.log(e) - 0.1, np.log(e) + 0.1), tol=1e-13)
        return -r.fun
    def prof_e(ee):
        r = optimize.minimize_scalar(lambda lb: -ll(np.exp(lb), ee), bracket=(np.log(b) - 0.1, np.log(b) + 0.1), tol=1e-13)
        return -r.fun
    g = lambda p, v: 2 * (lhat - p(v)) - q
    bl = optimize.brentq(lambda v: g(prof_b, v), b / 20, b, xtol=1e-12)
    bh = optimize.brentq(lambda v: g(prof_b, v), b, b * 20, xtol=1e-12)
    el = optimize.brentq(lambda v: g(prof_e, v), e / 20, e, xtol=1e-12 * e)
    eh = optimize.brentq(lambda v: g(prof_e, v), e, e * 20, xtol=1e-12 * e)
    h = [1e-4 * b, 1e-4 * e]
    p0 = np.array([b, e])
    H = np.zeros((2, 2))
    for i in range(2):
        for j in range(2):
            ei = np.eye(2)[i] * h[i]; ej = np.eye(2)[j] * h[j]
            H[i, j] = (ll(*(p0 + ei + ej)) - ll(*(p0 + ei - ej)) - ll(*(p0 - ei + ej)) + ll(*(p0 - ei - ej))) / (4 * h[i] * h[j])
    cov = np.linalg.inv(-H)
    z = stats.norm.ppf((1 + C) / 2)
    sb, se = np.sqrt(cov[0, 0]), np.sqrt(cov[1, 1])
    out.append({'lr': [bl, bh, el, eh], 'fisher': [b * np.exp(-z * sb / b), b * np.exp(z * sb / b), e * np.exp(-z * se / e), e * np.exp(z * se / e)],
                'se': [sb, se], 'z': z, 'chi2': q})
print(json.dumps(out))
`;

// Lots of the kinds a breakdown test gives: fields in V/m (η ~ 1e9, β 5–30), charges in C/m²,
// times in s with β near 1; complete and censored (devices that survived the ramp or the stress).
const LOTS: (WeibullData & { name: string; values: number[]; censored: boolean[] })[] = [
  { name: 'field, steep', ...lot(30, 12, 1.15e9, 1) },
  { name: 'field, very steep, small lot', ...lot(8, 25, 1.3e9, 2) },
  { name: 'charge to breakdown', ...lot(40, 1.6, 4.2e3, 3) },
  { name: 'time, near-exponential', ...lot(15, 0.9, 350, 4) },
  { name: 'field, censored at the ramp end', ...lot(30, 10, 1.0e9, 5, 1.05e9) },
  { name: 'time, heavily censored', ...lot(50, 2.2, 1e4, 6, 4e3) },
  {
    name: 'NIST e-Handbook 8.4.1.3',
    values: [54, 187, 216, 240, 244, 335, 361, 373, 375, 386, ...Array(10).fill(500)],
    censored: [...Array(10).fill(false), ...Array(10).fill(true)],
  },
];

describe('maximum likelihood against scipy.stats.weibull_min (floc = 0)', () => {
  const ref = runScipy<{ shape: number; scale: number; logLik: number; how: string; censoredData?: [number, number] }[]>(FIT_PY, { lots: LOTS });
  it.each(LOTS.map((l, k) => [l.name, k] as const))('%s: β and η to 1e-4 relative', (_name, k) => {
    const f = fitWeibull(LOTS[k]);
    const r = ref[k];
    expect(rel(f.shape, r.shape), `β ${f.shape} vs scipy ${r.shape} (${r.how})`).toBeLessThan(1e-4);
    expect(rel(f.scale, r.scale), `η ${f.scale} vs scipy ${r.scale}`).toBeLessThan(1e-4);
    // Our optimum is at least as high as the reference's (it is the maximum), and equal to 1e-8.
    expect(f.logLikelihood).toBeGreaterThanOrEqual(r.logLik - 1e-8 * Math.abs(r.logLik));
    expect(rel(weibullLogLikelihood(LOTS[k], r.shape, r.scale), r.logLik)).toBeLessThan(1e-10);
    if (r.censoredData) {
      expect(rel(f.shape, r.censoredData[0])).toBeLessThan(1e-4);
      expect(rel(f.scale, r.censoredData[1])).toBeLessThan(1e-4);
    }
    expect(f.failures + f.censored).toBe(LOTS[k].values.length);
  });

  it('the published worked example: NIST/SEMATECH e-Handbook §8.4.1.3 (20 units, 10 failures, 10 removed at 500 h)', () => {
    // Published: η = 606.5280, β = 1.7208, log-likelihood −75.135.
    const f = fitWeibull(LOTS[6]);
    expect(f.failures).toBe(10);
    expect(f.censored).toBe(10);
    expect(Math.abs(f.scale - 606.528)).toBeLessThan(0.0006);
    expect(Math.abs(f.shape - 1.7208)).toBeLessThan(0.00006);
    expect(Math.abs(f.logLikelihood - -75.135)).toBeLessThan(0.0006);
  });

  it('Lieblein & Zelen (1956) ball bearings: the ML estimates Lawless quotes (û = 4.405, b̂ = 0.476; from memory)', () => {
    const x = [
      17.88, 28.92, 33.0, 41.52, 42.12, 45.6, 48.48, 51.84, 51.96, 54.12, 55.56, 67.8, 68.64, 68.64, 68.88, 84.12, 93.12, 98.64, 105.12, 105.84, 127.92, 128.04,
      173.4,
    ];
    const f = fitWeibull({ values: x });
    // Extreme-value parameters of ln x: u = ln η, b = 1/β.
    expect(Math.log(f.scale)).toBeCloseTo(4.405, 3);
    expect(1 / f.shape).toBeCloseTo(0.476, 3);
  });
});

describe('confidence bounds', () => {
  const fits = LOTS.map((l) => fitWeibull(l));
  const ref = runScipy<{ lr: number[]; fisher: number[]; se: number[]; z: number; chi2: number }[]>(BOUNDS_PY, {
    confidence: 0.9,
    lots: LOTS.map((l, k) => ({ ...l, shape: fits[k].shape, scale: fits[k].scale })),
  });

  it('normal and χ² quantiles against scipy.stats.norm.ppf and chi2.ppf', () => {
    expect(rel(normalQuantile(0.95), ref[0].z)).toBeLessThan(1e-8);
    expect(rel(chiSquare1Quantile(0.9), ref[0].chi2)).toBeLessThan(1e-8);
    // Tails and centre (Acklam's approximation, relative error < 1.2e-9).
    expect(normalQuantile(0.5)).toBe(0);
    expect(rel(normalQuantile(1e-6), -4.753424308822899)).toBeLessThan(2e-9);
    expect(rel(normalQuantile(0.999), 3.090232306167813)).toBeLessThan(2e-9);
  });

  it.each(LOTS.map((l, k) => [l.name, k] as const))('%s: likelihood-ratio and Fisher bounds match an independent scipy computation', (_name, k) => {
    const lr = weibullBounds(LOTS[k], 0.9, 'likelihood-ratio');
    const fi = weibullBounds(LOTS[k], 0.9, 'fisher');
    const r = ref[k];
    const ours = [lr.shape.low, lr.shape.high, lr.scale.low, lr.scale.high];
    ours.forEach((v, j) => expect(rel(v, r.lr[j]), `LR bound ${j}: ${v} vs ${r.lr[j]}`).toBeLessThan(1e-5));
    const oursF = [fi.shape.low, fi.shape.high, fi.scale.low, fi.scale.high];
    // The reference Hessian is a finite difference: agreement to 1e-5.
    oursF.forEach((v, j) => expect(rel(v, r.fisher[j]), `Fisher bound ${j}: ${v} vs ${r.fisher[j]}`).toBeLessThan(1e-5));
    expect(lr.shape.low).toBeLessThan(fits[k].shape);
    expect(lr.shape.high).toBeGreaterThan(fits[k].shape);
  });

  it('coverage: 90 % bounds contain the true β and η in about 90 % of simulated lots (1,000 lots of 20 devices; 500 censored lots)', () => {
    const count = (n: number, lots: number, censorAt: number, seed0: number, method: 'likelihood-ratio' | 'fisher') => {
      let b = 0;
      let e = 0;
      for (let s = 0; s < lots; s++) {
        const l = lot(n, 8, 1.2e9, seed0 + s, censorAt);
        const bd = weibullBounds(l, 0.9, method);
        if (bd.shape.low <= 8 && 8 <= bd.shape.high) b++;
        if (bd.scale.low <= 1.2e9 && 1.2e9 <= bd.scale.high) e++;
      }
      return { shape: b / lots, scale: e / lots };
    };
    const lr = count(20, 1000, Infinity, 1000, 'likelihood-ratio');
    const lrCens = count(20, 500, 1.2e9, 5000, 'likelihood-ratio');
    const fisher = count(20, 1000, Infinity, 1000, 'fisher');
    console.log(
      `coverage of 90 % bounds, 20 devices: LR β ${lr.shape} η ${lr.scale}; LR censored at η (≈37 % survive) β ${lrCens.shape} η ${lrCens.scale}; Fisher β ${fisher.shape} η ${fisher.scale}`,
    );
    // Binomial SD of a 1,000-lot proportion at 0.9 is 0.0095: ±3 SD, plus the known small-sample
    // shortfall of asymptotic bounds (Meeker & Escobar 1998, §8.4).
    for (const v of [lr.shape, lr.scale]) {
      expect(v).toBeGreaterThan(0.87);
      expect(v).toBeLessThan(0.93);
    }
    for (const v of [lrCens.shape, lrCens.scale]) {
      expect(v).toBeGreaterThan(0.86);
      expect(v).toBeLessThan(0.94);
    }
    // Fisher bounds on β undercover at n = 20; the likelihood-ratio ones are closer to nominal.
    expect(Math.abs(lr.shape - 0.9)).toBeLessThanOrEqual(Math.abs(fisher.shape - 0.9) + 0.01);
  });
});

describe('median ranks', () => {
  it("complete samples: Bernard's closed form (i − 0.3)/(n + 0.4), in increasing x", () => {
    const l = lot(12, 3, 10, 42);
    const pts = medianRankPoints(l);
    const sorted = [...l.values].sort((a, b) => a - b);
    pts.forEach((p, k) => {
      expect(p.x).toBe(sorted[k]);
      expect(p.F).toBe((k + 1 - 0.3) / (12 + 0.4));
    });
  });

  it("Bernard's approximation is within 0.4 % (absolute) of the exact median rank (the median of Beta(i, n − i + 1), scipy)", () => {
    const exact = runScipy<number[][]>(
      'import json,sys\nfrom scipy import stats\nd=json.load(sys.stdin)\nprint(json.dumps([[float(stats.beta.ppf(0.5,i,n-i+1)) for i in range(1,n+1)] for n in d]))',
      [5, 10, 20, 50],
    );
    [5, 10, 20, 50].forEach((n, k) => exact[k].forEach((m, i) => expect(Math.abs(bernardRank(i + 1, n) - m)).toBeLessThan(0.004)));
  });

  it("with survivors: Johnson's adjusted order numbers (increment = (n + 1 − previous)/(1 + units beyond))", () => {
    // 10 F, 20 S, 30 F, 40 S, 50 F (n = 5). By Johnson's increment form: 1; 1 + 5/4 = 2.25;
    // 2.25 + 3.75/2 = 4.125.
    const pts = medianRankPoints({ values: [30, 10, 50, 20, 40], censored: [0, 0, 0, 1, 1] });
    expect(pts.map((p) => p.x)).toEqual([10, 30, 50]);
    const orders = [1, 2.25, 4.125];
    pts.forEach((p, k) => expect(p.F).toBeCloseTo(bernardRank(orders[k], 5), 14));
  });
});

describe('area scaling', () => {
  it('η₂ = η₁ (A₁/A₂)^(1/β) with β unchanged: the closed form and the bounded estimate agree', () => {
    const l = lot(30, 10, 1e9, 77);
    const f = fitWeibull(l);
    const s = scaledScale(l, 1e-8, 1e-6, 0.9);
    expect(s.value).toBeCloseTo(areaScaledScale(f.scale, f.shape, 1e-8, 1e-6), -1);
    expect(rel(s.value, f.scale * 0.01 ** (1 / f.shape))).toBeLessThan(1e-13);
    expect(s.low).toBeLessThan(s.value);
    expect(s.high).toBeGreaterThan(s.value);
    // Scaling to the same area changes nothing.
    const same = scaledScale(l, 1e-8, 1e-8, 0.9);
    const b = weibullBounds(l, 0.9);
    expect(rel(same.low, b.scale.low)).toBeLessThan(1e-9);
    expect(rel(same.high, b.scale.high)).toBeLessThan(1e-9);
  });

  it('the weakest-link construction: devices 10× larger, each the weakest of 10 small patches, fit to the scaled η within the bounds', () => {
    const u = seededUniform(99);
    const big: number[] = [];
    for (let i = 0; i < 60; i++) {
      let m = Infinity;
      for (let j = 0; j < 10; j++) m = Math.min(m, 1.2e9 * (-Math.log(u())) ** (1 / 9));
      big.push(m);
    }
    const predicted = areaScaledScale(1.2e9, 9, 1, 10);
    const b = weibullBounds({ values: big }, 0.99);
    expect(b.scale.low).toBeLessThan(predicted);
    expect(b.scale.high).toBeGreaterThan(predicted);
    expect(b.shape.low).toBeLessThan(9);
    expect(b.shape.high).toBeGreaterThan(9);
  });

  it('devices of different areas: per-device area factors put them on one reference area', () => {
    // Half the lot at the reference area, half at 4× (drawn with 4× the cumulative hazard).
    const a = lot(40, 7, 1e9, 11);
    const b = lot(40, 7, 1e9, 12, Infinity, 4);
    const f = fitWeibull({ values: [...a.values, ...b.values], areaFactor: [...a.values.map(() => 1), ...b.values.map(() => 4)] });
    const bd = weibullBounds({ values: [...a.values, ...b.values], areaFactor: [...a.values.map(() => 1), ...b.values.map(() => 4)] }, 0.99);
    expect(bd.scale.low).toBeLessThan(1e9);
    expect(bd.scale.high).toBeGreaterThan(1e9);
    expect(Math.abs(f.shape - 7)).toBeLessThan(3 * Math.sqrt(f.covariance.shapeShape));
    // Fitting the 4× devices alone with factor 4 equals fitting them plainly and scaling η by 4^(1/β).
    const alone = fitWeibull({ values: b.values });
    const weighted = fitWeibull({ values: b.values, areaFactor: b.values.map(() => 4) });
    expect(rel(weighted.shape, alone.shape)).toBeLessThan(1e-10);
    expect(rel(weighted.scale, areaScaledScale(alone.scale, alone.shape, 4, 1))).toBeLessThan(1e-10);
  });

  it('quantiles: the 1 % point is η (−ln 0.99)^(1/β)', () => {
    const l = lot(25, 6, 2e9, 5);
    const f = fitWeibull(l);
    const q = weibullQuantile(l, 0.01, 0.9);
    expect(rel(q.value, f.scale * (-Math.log(0.99)) ** (1 / f.shape))).toBeLessThan(1e-12);
    expect(q.low).toBeLessThan(q.value);
    expect(q.high).toBeGreaterThan(q.value);
  });
});

describe('goodness of fit and bent plots', () => {
  it("the modified Anderson–Darling statistic's 95th percentile under a fitted Weibull matches D'Agostino & Stephens (1986) Table 4.17: 0.757 (value from memory; checked here by simulation)", () => {
    const stats: number[] = [];
    for (let s = 0; s < 2000; s++) {
      const l = lot(20, 4, 10, 9000 + s);
      const f = fitWeibull(l);
      stats.push(andersonDarling(l.values, f.shape, f.scale).modified);
    }
    stats.sort((a, b) => a - b);
    const p95 = stats[Math.floor(0.95 * stats.length)];
    const p90 = stats[Math.floor(0.9 * stats.length)];
    console.log(`simulated modified A²: 90 % ${p90.toFixed(3)} (table 0.637), 95 % ${p95.toFixed(3)} (table 0.757)`);
    expect(Math.abs(p95 - 0.757)).toBeLessThan(0.06);
    expect(Math.abs(p90 - 0.637)).toBeLessThan(0.05);
  });

  it('an early-failure branch (20 % defect-related devices at low field) is reported as a bend; single-population lots rarely are', () => {
    const u = seededUniform(31);
    const values: number[] = [];
    for (let i = 0; i < 40; i++) values.push(i < 8 ? 5e8 * (-Math.log(u())) ** (1 / 1.5) : 1.2e9 * (-Math.log(u())) ** (1 / 12));
    const r = analyzeWeibull({ values }, { unit: 'V/m' });
    expect(r.bend).not.toBeNull();
    expect(r.bend!.pValue).toBeLessThan(0.01);
    expect(r.bend!.lowerShape).toBeLessThan(r.bend!.upperShape);
    expect(r.warnings.some((w) => /early-failure/.test(w))).toBe(true);
    let alarms = 0;
    for (let s = 0; s < 100; s++) {
      const l = lot(40, 12, 1.2e9, 400 + s);
      const b = bendTest(l, fitWeibull(l), 99, s);
      if (b && b.pValue < 0.01) alarms++;
    }
    console.log(`bend false alarms on 100 single-population lots: ${alarms}`);
    expect(alarms).toBeLessThanOrEqual(5);
  });

  it('the report: the fixed JSON shape, points for every failure, warnings for small lots', () => {
    const l = lot(6, 10, 1e9, 3);
    const r = analyzeWeibull(l, { unit: 'V/m', area: 1e-8, toArea: 1e-6 });
    expect(Object.keys(r)).toEqual(expect.arrayContaining(['n', 'failures', 'censored', 'shape', 'scale', 'method', 'points', 'warnings']));
    expect(Object.keys(r.shape).sort()).toEqual(['high', 'low', 'value']);
    expect(Object.keys(r.scale).sort()).toEqual(['high', 'low', 'unit', 'value']);
    expect(r.points).toHaveLength(6);
    expect(r.warnings.some((w) => /only 6 failures/.test(w))).toBe(true);
    expect(r.areaScaling!.scale.value).toBeCloseTo(areaScaledScale(r.scale.value, r.shape.value, 1e-8, 1e-6), -1);
  });

  it('failures read on a coarse ramp grid are called out; a fine grid is not', () => {
    // Breakdown voltages of a β = 10, η = 10 V lot as a ramp reports them: the level at which the
    // current jumped (rounded up to the step). The scatter in ln V is π/(β√6) ≈ 0.128 (the
    // smallest-extreme-value distribution's standard deviation), so a 0.5 V step is 0.39 of it.
    const l = lot(40, 10, 10, 17);
    const onGrid = (step: number) => l.values.map((v) => Math.ceil(v / step) * step);
    const coarse = analyzeWeibull({ values: onGrid(0.5) }, { unit: 'V' });
    const w = coarse.warnings.find((x) => /tie on levels/.test(x));
    expect(w).toMatch(/failures tie on levels 0\.5\d* V apart/);
    expect(coarseGrid({ values: onGrid(0.5) }, 10, 10)?.ratio).toBeCloseTo(0.05 / (Math.PI / (10 * Math.sqrt(6))), 6);
    expect(analyzeWeibull({ values: onGrid(0.02) }, { unit: 'V' }).warnings.some((x) => /tie on levels/.test(x))).toBe(false);
    expect(analyzeWeibull(l, { unit: 'V' }).warnings.some((x) => /tie on levels/.test(x))).toBe(false);
  });

  it('bad input is named', () => {
    expect(() => fitWeibull({ values: [1e9] })).toThrow(/at least two devices that broke down; got 1/);
    expect(() => fitWeibull({ values: [1e9, 2e9, 3e9], censored: [1, 1, 0] })).toThrow(/got 1 of 3/);
    expect(() => fitWeibull({ values: [1e9, -2, 3e9] })).toThrow(/value 2 is -2/);
    expect(() => fitWeibull({ values: [5, 5, 5] })).toThrow(/all breakdown values are equal/);
    expect(() => weibullBounds({ values: [1, 2, 3] }, 1.5)).toThrow(/confidence 1.5/);
  });
});
