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
import { resolveInputs } from '../../daemon/analysis/analyze.js';

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

describe('breakdown watch (signatures: common practice)', () => {
  const inputs = resolveInputs(fowlerNordheim, { thickness: 7e-9, area: 1e-8, massRatio: 0.42 });
  const fn = (v: number) => fowlerNordheim.forward(v, { barrierHeight: 3.1 }, inputs) * 1e-8;

  it('a Fowler–Nordheim current climbing smoothly into compliance is not breakdown', () => {
    const limit = fn(9.2);
    const w = new BreakdownWatch(DEFAULT_BREAKDOWN, limit);
    for (let v = 5; v <= 9.5; v += 0.05) {
      const i = Math.min(fn(v), limit);
      expect(w.add(v, i, i >= limit)).toBeUndefined();
    }
  });

  it('a jump of decades into compliance with the bias collapsing is confirmed', () => {
    const w = new BreakdownWatch(DEFAULT_BREAKDOWN, 1e-3);
    for (let v = 5; v < 8.7; v += 0.1) w.add(v, fn(v), false);
    const verdict = w.add(0.2, 1e-3, true);
    expect(verdict?.state).toBe('confirmed');
    expect(verdict?.numbers.previousBias).toBeGreaterThan(8.5);
  });

  it('a jump above the floor without compliance is suspected, and confirmed when the fit predicts decades less', () => {
    const w = new BreakdownWatch(DEFAULT_BREAKDOWN, 1e-3);
    w.add(6, 1e-9, false);
    w.add(6.1, 1.2e-9, false);
    expect(w.add(6.2, 5e-6, false)?.state).toBe('suspected');
    const w2 = new BreakdownWatch(DEFAULT_BREAKDOWN, 1e-3);
    w2.add(6, 1e-9, false);
    w2.add(6.1, 1.2e-9, false);
    expect(w2.add(6.2, 5e-6, false, 1.5e-9)?.state).toBe('confirmed');
  });

  it('noise below the floor never triggers', () => {
    const w = new BreakdownWatch(DEFAULT_BREAKDOWN, 1e-3);
    for (const i of [1e-15, 3e-13, 2e-15, 8e-14, 1e-15, 9e-11]) expect(w.add(1, i, false)).toBeUndefined();
  });
});
