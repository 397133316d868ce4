/**
 * Control charts and the breakdown watch.
 * Sources: NIST/SEMATECH e-Handbook of Statistical Methods §6.3.2.4 (EWMA: recursion, the σ of z,
 * limits μ0 ± Lσ_z) and §6.3.2.3 (tabular CUSUM); steady-state σ_z factors 0.3333 (λ = 0.2) and
 * 0.4201 (λ = 0.3) computed from √(λ/(2−λ)); d2 = 1.128 for moving ranges of two
 * (common practice, control-chart constant tables). The EWMA example series is the handbook's
 * §6.3.2.4 example as recalled from memory (target 50, λ = 0.3); the expected z values follow from
 * the recursion itself, so the check does not depend on the memory being exact.
 */
import { describe, expect, it } from 'vitest';
import { BreakdownWatch, DEFAULT_BREAKDOWN } from '../../daemon/analysis/breakdown.js';
import { DEFAULT_DRIFT, DriftChart, ewmaSigma, ewmaStep, movingRangeSigma } from '../../daemon/analysis/drift.js';
import { fowlerNordheimMechanism as fowlerNordheim } from '../../daemon/analysis/mechanisms/fowler-nordheim.js';
import { resolveInputs, transformPoint } from '../../daemon/analysis/analyze.js';
import { seededNormal } from '../../daemon/analysis/random.js';
import { studentTQuantile, studentTTwoSided } from '../../daemon/analysis/student-t.js';
import { runScipy } from '../helpers/scipy.js';

describe('EWMA (NIST/SEMATECH §6.3.2.4)', () => {
  it('reproduces the recursion on the handbook example series (values from memory; z by hand)', () => {
    const x = [52.0, 47.0, 53.0, 49.3, 50.1, 47.0, 51.0, 50.1, 51.2, 50.5, 49.6, 47.6, 49.9, 51.3, 47.8, 51.2, 52.6, 52.4, 53.6, 52.1];
    // Worked by hand: z1 = 0.3·52 + 0.7·50 = 50.6; z2 = 0.3·47 + 0.7·50.6 = 49.52; z3 = 0.3·53 + 0.7·49.52 = 50.564.
    let z = 50;
    const zs = x.map((v) => (z = ewmaStep(z, v, 0.3)));
    expect(zs[0]).toBeCloseTo(50.6, 12);
    expect(zs[1]).toBeCloseTo(49.52, 12);
    expect(zs[2]).toBeCloseTo(50.564, 12);
    // The handbook's table ends near 51.99 (two decimals; from memory).
    expect(zs[19]).toBeCloseTo(51.99, 1);
  });

  it('σ_z tends to 0.3333σ (λ = 0.2) and 0.4201σ (λ = 0.3); after one update it is λσ', () => {
    expect(ewmaSigma(1, 0.2, 1000)).toBeCloseTo(0.3333, 4);
    expect(ewmaSigma(1, 0.3, 1000)).toBeCloseTo(0.4201, 4);
    expect(ewmaSigma(2, 0.25, 1)).toBeCloseTo(0.5, 12);
  });

  it('moving-range σ divides the mean range by d2 = 1.128', () => {
    expect(movingRangeSigma([1, 3, 2, 2])).toBeCloseTo(1 / 1.128, 12);
  });

  it('a chart stays in control on a stable series and signals a sustained 2σ shift within a few points', () => {
    const chart = new DriftChart({ ...DEFAULT_DRIFT, baseline: 4 });
    const base = [10.0, 10.1, 9.9, 10.0];
    for (const b of base) expect(chart.add(b, 0.01).state).toBe('baseline');
    const sigma = movingRangeSigma(base);
    let firstOut = -1;
    for (let t = 1; t <= 20; t++) {
      const p = chart.add(t <= 5 ? 10.0 : 10 + 2 * sigma, 0.01);
      if (t <= 5) expect(p.state).toBe('in-control');
      if (p.state === 'out-of-control' && firstOut < 0) firstOut = t;
    }
    // Hand check: the shift is 2σ; with λ = 0.2, L = 3 and the centre estimated from 4 values the
    // limit is 3σ·√(λ/(2−λ)·(1 − 0.8^{2t}) + 1/4) → 3σ·√(0.1111 + 0.25) = 1.80σ late in the run, so the
    // EWMA needs 2σ(1 − 0.8^m) > 1.80σ, i.e. 0.8^m < 0.1 → m = 11 points after the shift (t = 16);
    // at m = 10, 2σ·0.893 = 1.79σ is still inside.
    expect(firstOut).toBe(16);
  });

  it('tabular CUSUM accumulates (x − μ0 − kσ) and signals above hσ (NIST/SEMATECH §6.3.2.3)', () => {
    const chart = new DriftChart({ ...DEFAULT_DRIFT, method: 'cusum', baseline: 2, minRelativeSigma: 0 });
    chart.add(0, 0);
    chart.add(1, 0); // μ0 = 0.5, σ = |1 − 0| / 1.128
    const s = 1 / 1.128;
    // With the centre from two values, σ_eff = σ·√(1 + 1/2) = 1.2247σ: K = 0.6124σ, H = 4.899σ.
    // Each x = 0.5 + 1.4σ adds 0.7876σ to C+: 4.73σ after six, 5.51σ after seven.
    const states = [1, 2, 3, 4, 5, 6, 7].map(() => chart.add(0.5 + 1.4 * s).state);
    expect(states.slice(0, 6)).not.toContain('out-of-control');
    expect(states[6]).toBe('out-of-control');
  });
});

describe("breakdown watch: each reading against the sweep's own trend (signatures: common practice)", () => {
  const inputs = resolveInputs(fowlerNordheim, { thickness: 7e-9, area: 1e-8, massRatio: 0.42 });
  const fn = (v: number) => fowlerNordheim.forward(v, { barrierHeight: 3.1 }, inputs) * 1e-8;
  // The trend plot of Fowler–Nordheim: ln(J/E²) against 1/E (Lenzlinger & Snow 1969).
  const at = (v: number, i: number) => {
    const out = { x: 0, y: 0, bias: 0 };
    return transformPoint(fowlerNordheim, inputs, v, i, 1, 1e-8, out) === undefined ? { x: out.x, y: out.y } : undefined;
  };

  it('a Fowler–Nordheim current climbing smoothly into compliance is not breakdown, fine or coarse steps', () => {
    for (const step of [0.05, 0.5, 1]) {
      const limit = fn(9.2);
      const w = new BreakdownWatch(DEFAULT_BREAKDOWN, limit);
      w.setNoiseFloor(1e-13);
      for (let v = step; v <= 10; v += step) {
        const i = Math.min(fn(v) + 1e-13 * Math.sin(37 * v), limit);
        const verdict = w.add(v, i, i >= limit, at(v, i));
        expect(verdict?.state, `step ${step} V at ${v.toFixed(2)} V`).not.toBe('confirmed');
        if (step === 0.05) expect(verdict, `at ${v.toFixed(2)} V`).toBeUndefined();
      }
    }
  });

  it('a current leaving the noise floor (an ohmic layer turning on in one step) raises nothing', () => {
    const w = new BreakdownWatch({ ...DEFAULT_BREAKDOWN, floor: 1e-14 }, 1e-2);
    w.setNoiseFloor(2e-13);
    const readings: [number, number][] = [
      [0, 1e-13],
      [0.1, 3e-9],
      [0.2, 6.1e-9],
      [0.3, 9e-9],
      [0.4, 1.21e-8],
    ];
    for (const [v, i] of readings) expect(w.add(v, i, false, v > 0 ? { x: Math.log(v), y: Math.log(i) } : undefined)).toBeUndefined();
  });

  it('a jump of decades above the trend is confirmed at once; compliance with the bias collapsing too', () => {
    const w = new BreakdownWatch(DEFAULT_BREAKDOWN, 1e-3);
    for (let v = 5; v < 8.7; v += 0.1) expect(w.add(v, fn(v), false, at(v, fn(v)))).toBeUndefined();
    const i = fn(8.7) * 3000; // 3.5 decades above the current the trend predicts
    const verdict = w.add(8.7, i, false, at(8.7, i));
    expect(verdict?.state).toBe('confirmed');
    expect(verdict?.numbers.decadesAboveTrend).toBeGreaterThan(3);
    const w2 = new BreakdownWatch(DEFAULT_BREAKDOWN, 1e-3);
    for (let v = 5; v < 8.7; v += 0.1) w2.add(v, fn(v), false, at(v, fn(v)));
    const collapse = w2.add(0.2, 1e-3, true, at(0.2, 1e-3));
    expect(collapse?.state).toBe('confirmed');
    expect(collapse?.numbers.previousBias).toBeGreaterThan(8.5);
  });

  it('compliance where the trend predicts decades less is confirmed; where it predicts the limit, nothing', () => {
    const w = new BreakdownWatch(DEFAULT_BREAKDOWN, 1e-3);
    for (let v = 5; v < 7; v += 0.1) w.add(v, fn(v), false, at(v, fn(v)));
    // fn(7) ≈ 5e-8 A: compliance at 1 mA there is 4 decades above the trend, the bias held.
    expect(w.add(7, 1e-3, true, at(7, 1e-3))?.state).toBe('confirmed');
    const limit = fn(9.25);
    const w2 = new BreakdownWatch(DEFAULT_BREAKDOWN, limit);
    for (let v = 5; v < 9.25; v += 0.25) w2.add(v, fn(v), false, at(v, fn(v)));
    expect(w2.add(9.25, limit, true, at(9.25, limit))).toBeUndefined();
  });

  it('without a trend yet, a jump from a measured level is only suspected; noise below the floor never counts', () => {
    const w = new BreakdownWatch(DEFAULT_BREAKDOWN, 1e-3);
    w.add(6, 1e-9, false);
    w.add(6.1, 1.2e-9, false);
    expect(w.add(6.2, 5e-6, false)).toBeUndefined(); // 3.6 decades: a steep mechanism can do that in a step
    expect(w.add(6.3, 5e-4, false)?.state).toBe('suspected'); // 5.4 decades above 1.2e-9 within three steps
    const w2 = new BreakdownWatch(DEFAULT_BREAKDOWN, 1e-3);
    for (const i of [1e-15, 3e-13, 2e-15, 8e-14, 1e-15, 9e-11]) expect(w2.add(1, i, false)).toBeUndefined();
  });
});

describe("Student's t and the baseline's trend", () => {
  it('P(|T| < t) and its quantile agree with scipy.stats.t (a general-purpose reference library) for 1–40 degrees of freedom', () => {
    const cases: [number, number][] = [];
    for (const nu of [1, 2, 3, 4, 5, 7, 8, 13, 40]) for (const t of [0.3, 1, 2.5, 6]) cases.push([t, nu]);
    const asked: [number, number][] = [
      [0.95, 3],
      [0.99, 3],
      [0.99, 8],
      [0.9, 1],
      [0.999, 20],
    ];
    const ours = asked.map(([p, nu]) => [studentTQuantile(p, nu), nu]);
    // scipy's P(|T| < t) at our quantiles (its own ppf is good to about 1e-8 here; the CDF to ~1e-15).
    const ref = runScipy<{ cdf: number[]; at: number[] }>(
      'import json,sys\nfrom scipy.stats import t\nd=json.load(sys.stdin)\nf=lambda x,n: float(2*t.cdf(x,n)-1)\nprint(json.dumps({"cdf":[f(x,n) for x,n in d["c"]],"at":[f(x,n) for x,n in d["q"]]}))',
      { c: cases, q: ours },
    );
    cases.forEach(([t, nu], k) => expect(studentTTwoSided(t, nu), `t ${t}, ν ${nu}`).toBeCloseTo(ref.cdf[k], 12));
    asked.forEach(([p], k) => expect(ref.at[k], `quantile ${p}, ν ${asked[k][1]}`).toBeCloseTo(p, 12));
  });

  it('a baseline that climbs is called a trend; a flat one with the scatter its errors state seldom is (about the 1 % the test allows)', () => {
    const normal = seededNormal(17);
    const make = (slope: number) => {
      const c = new DriftChart({ ...DEFAULT_DRIFT, baseline: 5 });
      for (let k = 0; k < 5; k++) c.add(3.1 + slope * k + 2e-4 * normal(), 2e-4);
      return c.baselineTrend;
    };
    // The trapping oxide's figures: +0.036 eV per sweep against 2e-4 eV errors.
    const t = make(0.036);
    expect(t).toBeDefined();
    expect(t?.slope as number).toBeCloseTo(0.036, 3);
    expect(t?.sweeps).toBe(5);
    let alarms = 0;
    for (let r = 0; r < 2000; r++) if (make(0)) alarms++;
    expect(alarms / 2000).toBeLessThan(0.02);
  });
});
