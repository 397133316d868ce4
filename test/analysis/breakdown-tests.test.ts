/**
 * Breakdown criteria and charge to breakdown on hand-worked sequences. The criteria are the kinds
 * JEDEC JESD35-A names for wafer-level tests of thin dielectrics (a current level, a jump of the
 * current between steps, a change of the slope of the I–V curve; under a forced current, a collapse
 * of the voltage); each case below is worked by hand from its definition.
 * The wear-out model is checked against its closed form (a Weibull variate of unit scale, the
 * exponential field acceleration of the E model — McPherson & Mogul 1998 — and weakest-link area
 * scaling, η ∝ A^(−1/β), Wu & Suñé 2009).
 */
import { describe, expect, it } from 'vitest';
import {
  chargeToBreakdown,
  CurrentRampJudge,
  heldCharge,
  staircaseChargeToBreakdown,
  StressJudge,
  VoltageRampJudge,
} from '../../daemon/analysis/breakdown-tests.js';
import { chargeScaleAt, unitWeibull } from '../../daemon/analysis/wearout.js';
import { AdaptiveSweep } from '../../daemon/analysis/adaptive-sweep.js';
import { fowlerNordheim } from '../../daemon/analysis/mechanisms/fowler-nordheim.js';
import { seededNormal } from '../../daemon/analysis/random.js';

const CRITERIA = { currentJump: 10, slopeFactor: 3, slopeWindow: 5, floor: 1e-10 };

describe('voltage ramp', () => {
  // A hand-worked ramp: 0.5 V steps; the current grows ×2 per step (slope ln2/0.5 = 1.386 /V)
  // from 1 nA, then at the 12th reading (index 11) jumps ×40.
  const v = Array.from({ length: 14 }, (_, k) => 1 + 0.5 * k);
  const i = v.map((_, k) => 1e-9 * 2 ** k * (k >= 11 ? 40 : 1));

  it('the decade jump fires at the step where it happens, with the ratio', () => {
    const j = new VoltageRampJudge(CRITERIA, 1e-3);
    let verdict: ReturnType<VoltageRampJudge['add']>;
    for (let k = 0; k < v.length && !verdict; k++) verdict = j.add(v[k], i[k], false);
    expect(verdict?.criterion).toBe('current-jump');
    expect(verdict?.index).toBe(11);
    expect(verdict?.numbers.ratio).toBeCloseTo(80, 10); // ×2 of the ramp times ×40
  });

  it('a smaller step that triples the slope is a slope change (soft breakdown), not a jump', () => {
    // Slope ln2/0.5 for ten steps, then one step ×8 (slope ln8/0.5 = 3× the median): index 10.
    const ii = v.map((_, k) => 1e-9 * 2 ** Math.min(k, 9) * (k >= 10 ? 8 ** (k - 9) : 1));
    const j = new VoltageRampJudge(CRITERIA, 1e-3);
    let verdict: ReturnType<VoltageRampJudge['add']>;
    for (let k = 0; k < v.length && !verdict; k++) verdict = j.add(v[k], ii[k], false);
    expect(verdict?.criterion).toBe('slope-change');
    expect(verdict?.index).toBe(10);
    expect(verdict?.numbers.slope).toBeCloseTo(Math.log(8) / 0.5, 10);
    expect(verdict?.numbers.median).toBeCloseTo(Math.log(2) / 0.5, 10);
  });

  it('a Fowler–Nordheim ramp, whose ln-slope falls smoothly, fires nothing until its current level', () => {
    // J ∝ E² exp(−B/E) (Fowler & Nordheim 1928): d ln J/dV decreases with V.
    const B = 25; // V/nm·nm: B·d with d = 1 nm in these units — any B > 0 makes the slope fall
    const j = new VoltageRampJudge({ ...CRITERIA, currentLimit: 1e-4 }, 1e-3);
    let verdict: ReturnType<VoltageRampJudge['add']>;
    for (let V = 2; V <= 20 && !verdict; V += 0.1) verdict = j.add(V, 1e-3 * V * V * Math.exp(-B / V), false);
    expect(verdict?.criterion).toBe('current-limit');
    expect(1e-3 * (verdict?.numbers.voltage ?? 0) ** 2 * Math.exp(-B / (verdict?.numbers.voltage ?? 1))).toBeGreaterThanOrEqual(1e-4);
  });

  it('fine steps: the slope is taken over slopeSpan, so reading noise is not a soft breakdown; a real step still is', () => {
    // A 7 nm film's Fowler–Nordheim current (Fowler & Nordheim 1928; Forbes 2006 constants), 1 mV
    // steps from 5 V, each reading with 0.5 % noise (a source-measure unit's gain term, common
    // practice). Neighbouring readings' slope is then mostly noise: 0.5 %·√2 / 1 mV ≈ 7 /V against
    // the current's own ≈ 7 /V near 5.5 V. The slope over 0.1 V keeps the noise near 0.07 /V.
    const normal = seededNormal(5);
    const fn = (V: number) => 1e-8 * fowlerNordheim(V / 7e-9, 3.1, 0.42);
    const run = (span: number | undefined, step?: { at: number; factor: number }) => {
      const j = new VoltageRampJudge({ ...CRITERIA, ...(span !== undefined ? { slopeSpan: span } : {}), currentLimit: 1e-4 }, 1e-2);
      for (let k = 0; k <= 4000; k++) {
        const V = 5 + 0.001 * k;
        const i = fn(V) * (step && V >= step.at ? step.factor : 1) * (1 + 0.005 * normal());
        const verdict = j.add(V, i, false);
        if (verdict) return { ...verdict, V };
      }
      return undefined;
    };
    // Taken between neighbours (a span finer than the step), the noise trips the test early.
    expect(run(1e-6)?.criterion).toBe('slope-change');
    // Over the default 0.1 V: nothing until the current level (1e-4 A, near 8.9 V).
    const clean = run(undefined);
    expect(clean?.criterion).toBe('current-limit');
    // A soft breakdown — the current ×3 at 6 V (ln 3 over one 1 mV step) — still fires as a slope change there.
    const soft = run(undefined, { at: 6, factor: 3 });
    expect(soft?.criterion).toBe('slope-change');
    expect(soft?.V).toBeGreaterThanOrEqual(6);
    expect(soft?.V).toBeLessThan(6.01);
  });

  it('readings under the floor never trigger the ratio tests; compliance always does', () => {
    const j = new VoltageRampJudge(CRITERIA, 1e-3);
    expect(j.add(1, 1e-13, false)).toBeUndefined();
    expect(j.add(2, 5e-12, false)).toBeUndefined(); // ×50, but below the 1e-10 A floor
    expect(j.add(3, 1e-3, true)?.criterion).toBe('compliance');
  });
});

describe('current ramp and constant stress', () => {
  it('the voltage falling by more than the set fraction of its highest value is a collapse', () => {
    const j = new CurrentRampJudge(0.1);
    const volts = [5, 6, 7, 7.5, 7.8, 7.7, 6.9];
    const out = volts.map((x, k) => j.add(x, 1e-6 * 10 ** k));
    // 7.7 is 1.3 % under 7.8 (kept); 6.9 is 11.5 % under it: collapse at index 6.
    expect(out.findIndex((x) => x !== undefined)).toBe(6);
    expect(out[6]?.numbers.highest).toBe(7.8);
  });

  it('constant stress: a jump between readings, with the stress time', () => {
    const j = new StressJudge({ currentJump: 10, floor: 1e-10 }, 1e-3);
    expect(j.add(0.1, 1e-6, false)).toBeUndefined();
    expect(j.add(0.2, 1.2e-6, false)).toBeUndefined();
    const v = j.add(0.3, 2e-5, false);
    expect(v?.criterion).toBe('current-jump');
    expect(v?.numbers.time).toBe(0.3);
  });
});

describe('charge to breakdown', () => {
  it('each reading stands for the hold that ends with it; half the breakdown step is added', () => {
    const hold = [0.01, 0.01, 0.02, 0.01];
    const i = [1e-6, 2e-6, 4e-6, 1e-2];
    // Readings 0–2 intact: 1e-8 + 2e-8 + 8e-8 = 1.1e-7 C; half of step 3 at the last intact 4 µA: 2e-8.
    expect(heldCharge(hold, i, 3)).toBeCloseTo(1.1e-7, 20);
    expect(chargeToBreakdown(hold, i, 3)).toBeCloseTo(1.3e-7, 20);
  });
});

describe('charge to breakdown on a staircase, timed by the level changes', () => {
  it('intact levels count from their setting to the next; half the uncertain interval at the last intact current', () => {
    // Levels set at 0, 10, 20, 30 ms; read at 8, 18, 60 (a slow gap before level 3), 38 ms; the
    // reading at 38 ms (index 3) shows the breakdown.
    const tSet = [0, 0.01, 0.02, 0.065];
    const tMeas = [0.008, 0.018, 0.06, 0.073];
    const i = [1e-6, 2e-6, 4e-6, 1e-2];
    // 1e-6·0.01 + 2e-6·0.01 + 4e-6·(0.06 − 0.02) known; + ½·4e-6·(0.073 − 0.06).
    const expected = 1e-8 + 2e-8 + 1.6e-7 + 0.5 * 4e-6 * 0.013;
    expect(staircaseChargeToBreakdown(tSet, tMeas, i, 3)).toBeCloseTo(expected, 20);
  });
});

describe('wear-out model', () => {
  it('the unit Weibull variate is the inverse of F(x) = 1 − exp(−x^β)', () => {
    for (const [beta, u] of [
      [2, 0.5],
      [1.3, 0.9],
      [5, 0.01],
    ]) {
      const x = unitWeibull(beta, u);
      expect(1 - Math.exp(-(x ** beta))).toBeCloseTo(u, 12);
    }
  });

  it('the charge scale falls e-fold per 1/γ of field and scales with area as A^(−1/β)', () => {
    const spec = { shape: 2, chargeScale: 3000, referenceField: 1.4e9, fieldAcceleration: 1e-8, referenceArea: 1e-8 };
    expect(chargeScaleAt(spec, 1.4e9, 1e-8)).toBeCloseTo(3000, 9);
    expect(chargeScaleAt(spec, 1.3e9, 1e-8)).toBeCloseTo(3000 * Math.E, 9);
    expect(chargeScaleAt(spec, 1.4e9, 4e-8)).toBeCloseTo(3000 / 2, 9); // (1/4)^(1/2)
  });
});

describe('adaptive sweep plan', () => {
  it('coarse steps on the floor, fine steps once the current leaves it, and the stop reasons', () => {
    const p = new AdaptiveSweep({ start: 0, stop: 12, maxPoints: 100, currentLimit: 1e-3 });
    expect(p.coarse).toBe(1);
    expect(p.fine).toBeCloseTo(0.2, 12);
    // Floor readings of either sign near 1e-13 A.
    expect(p.add(0, 1e-13, false)).toEqual({ next: 1 });
    expect(p.add(1, -2e-13, false)).toEqual({ next: 2 });
    expect(p.inRegime).toBe(false);
    // 3e-11 A is more than twenty floors (2e-13): the regime begins; steps become fine.
    const r = p.add(2, 3e-11, false);
    expect(p.inRegime).toBe(true);
    expect('next' in r && r.next).toBeCloseTo(2.2, 12);
    expect(p.add(2.2, 2e-3, false)).toEqual({ stop: 'current-limit' });
    // The floor's σ for the fill's weights: the robust RMS √(median I²/0.4549) of the two readings
    // before the onset (0.4549 the median of χ²₁).
    // The top a later sweep may not pass: the highest level read below the limit (2 V; the limit came at once, no fill).
    expect(p.knowledge()).toEqual({
      onset: 2,
      floor: 2e-13,
      floorSigma: Math.sqrt((0.5 * (1e-26 + 4e-26)) / 0.454936423119572),
      top: 2,
      topReason: 'current-limit',
    });
    // The next sweep starts a fine step below the onset, in fine steps.
    const q = new AdaptiveSweep({ start: 0, stop: 12, maxPoints: 100, currentLimit: 1e-3 }, p.knowledge());
    expect(q.first()).toBeCloseTo(1.8, 12);
    const s = q.add(1.8, 1e-12, false);
    expect('next' in s && s.next).toBeCloseTo(2.0, 12);
  });

  it('a step never jumps far past the current limit: on a Fowler–Nordheim film the highest reading stays within 2× of it', () => {
    // J = A E²/φ · exp(−B φ^1.5/E) (Fowler & Nordheim 1928; constants as in Lenzlinger & Snow 1969):
    // a 7 nm film with φ = 3.1 eV rises by about a decade per 0.5 V near 1 µA, so a coarse step of a
    // twelfth of 0–14 V (1.17 V) taken blindly would land two decades or more past the limit.
    const d = 7e-9;
    const area = 1e-8;
    const current = (V: number) => (V <= 0 ? 0 : area * fowlerNordheim(V / d, 3.1, 0.42)) + 1e-13;
    // (A limit within four decades of the floor can still be passed by the one blind coarse step
    // that leaves the floor — 2.1× at 1e-9 A here — as nothing about the slope is known before it.)
    for (const limit of [1e-7, 1e-6, 1e-4]) {
      const p = new AdaptiveSweep({ start: 0, stop: 14, maxPoints: 200, currentLimit: limit, absoluteFloor: 1e-13 });
      let v = p.first();
      let top = 0;
      for (let k = 0; k < 200; k++) {
        const i = current(v);
        top = Math.max(top, i);
        const r = p.add(v, i, false);
        if ('stop' in r) break;
        v = r.next;
      }
      expect(top, `limit ${limit} A`).toBeLessThanOrEqual(2 * limit);
      expect(top, `limit ${limit} A: the sweep still climbs to it`).toBeGreaterThanOrEqual(0.1 * limit);
    }
  });

  it('once the top is reached short of the target, the fill keeps to two levels inside the regime: the top and one far below it', () => {
    // The same Fowler–Nordheim film (Fowler & Nordheim 1928; Lenzlinger & Snow 1969) over 0–9 V with
    // a limit it never reaches: the up-leg ends at 9 V, then the fill. Its axis is 1/V (the
    // Fowler–Nordheim plot's); a c-optimal design for the slope of a two-parameter line has two
    // support points (Elfving 1952, Ann. Math. Statist. 23, 255).
    const current = (V: number) => (V <= 0 ? 0 : 1e-8 * fowlerNordheim(V / 7e-9, 3.1, 0.42)) + 1e-13;
    const p = new AdaptiveSweep({ start: 0, stop: 9, maxPoints: 200, currentLimit: 5e-4, absoluteFloor: 1e-13, axis: (v) => 1 / v, rangeOffset: 0 });
    const levels: number[] = [];
    let v = p.first();
    let r: ReturnType<AdaptiveSweep['add']> = { next: v };
    for (let k = 0; k < 200 && 'next' in r; k++) {
      levels.push(v);
      r = p.add(v, current(v), false);
      if ('next' in r) v = r.next;
    }
    expect(r).toEqual({ stop: 'bias-limit' });
    const top = levels.indexOf(9);
    expect(top).toBeGreaterThan(0);
    // Coarse steps over the floor, then a growing climb: the up-leg is short.
    expect(top).toBeLessThan(20);
    const onset = levels.find((x) => current(x) > 20 * 1e-13) as number;
    const fill = levels.slice(top + 1);
    expect(fill.length).toBeGreaterThanOrEqual(8);
    const mid = 0.5 * (onset + 9);
    const high = fill.filter((x) => x > mid);
    const low = fill.filter((x) => x <= mid);
    // Both levels used about equally, each spread over no more than one fine step.
    expect(high.length / fill.length).toBeGreaterThan(0.35);
    expect(low.length / fill.length).toBeGreaterThan(0.35);
    expect(Math.max(...high) - Math.min(...high)).toBeLessThanOrEqual(p.fine);
    expect(Math.max(...low) - Math.min(...low)).toBeLessThanOrEqual(p.fine);
    for (const x of fill) {
      expect(x, 'inside the regime already read').toBeGreaterThanOrEqual(onset);
      expect(x).toBeLessThan(9);
    }
    // The levels are distinct (the noise estimate from neighbours needs distinct biases).
    expect(new Set(fill).size).toBe(fill.length);
  });

  it('the end of the range and the point budget stop a sweep', () => {
    const p = new AdaptiveSweep({ start: 0, stop: 1, maxPoints: 8, currentLimit: 1 });
    let v = 0;
    let r: ReturnType<AdaptiveSweep['add']> = { next: 0 };
    for (let k = 0; k < 20 && 'next' in r; k++) {
      r = p.add(v, 1e-9 * (k + 1), false);
      if ('next' in r) v = r.next;
    }
    expect(r).toEqual({ stop: 'point-budget' });
  });
});
