/**
 * Where an adaptive sweep puts its readings (daemon/analysis/adaptive-sweep.ts), on devices whose
 * current is known exactly, so every decision can be checked by hand:
 *  - the fall in the slope's variance one more reading brings, by the rank-one update, against the
 *    slope's variance computed directly from the inverted information matrix by mathjs (a
 *    general-purpose reference library);
 *  - for a plain line the greedy c-optimal fill settles on two levels, the top and one far below it
 *    (a c-optimal design for one coefficient of a two-parameter model has two support points:
 *    Elfving 1952, Ann. Math. Statist. 23, 255; for equal noise they are the two ends — Box, Hunter
 *    & Hunter 2005, Statistics for Experimenters: var(b) = σ²/Σ(x − x̄)²);
 *  - with a leakage term beside the line the lower level moves up (the lowest currents then pin
 *    the leakage rather than the slope);
 *  - a later sweep starts at the earlier low end and never goes above the earlier top;
 *  - on an autoranging instrument, whose offset is a fraction of the range in use (the "% of
 *    reading + offset" accuracy form of source-measure unit data sheets, common practice), the fill
 *    reads just below a decade's top rather than just above it, and the slope's variance of the
 *    readings taken — computed by mathjs with that noise form — is smaller than a range-blind fill's.
 */
import { inv } from 'mathjs';
import { describe, expect, it } from 'vitest';
import { AdaptiveSweep, Information, rangeOf, type AdaptiveSettings } from '../../daemon/analysis/adaptive-sweep.js';
import { sweepLegs } from '../../daemon/analysis/sweep-points.js';

/** var(b) = (M⁻¹)₁₁ by mathjs for rows f with weights w. */
function slopeVariance(rows: { f: number[]; w: number }[]): number {
  const p = rows[0].f.length;
  const m = Array.from({ length: p }, () => new Array(p).fill(0));
  for (const r of rows) for (let a = 0; a < p; a++) for (let b = 0; b < p; b++) m[a][b] += r.w * r.f[a] * r.f[b];
  return (inv(m) as number[][])[1][1];
}

/** Drives a planner over a device: returns every level it read, in order. */
function drive(planner: AdaptiveSweep, current: (v: number) => number, stopAfter = 200): number[] {
  const levels: number[] = [];
  let v = planner.first();
  for (let k = 0; k < stopAfter; k++) {
    levels.push(v);
    const step = planner.add(v, current(v), false);
    if ('stop' in step) break;
    v = step.next;
  }
  return levels;
}

describe('the information an adaptive sweep weighs its next reading by', () => {
  it('the rank-one fall in var(b) equals the difference of the directly inverted matrices (mathjs)', () => {
    // Rows of a line with a leakage column over a made-up spread of levels (scale differences of a
    // real field axis and V/I included: x in V/m, V/I in Ω).
    const rows = [5, 5.5, 6, 7, 8, 9].map((v) => ({
      f: [1, v * 1e8, v / (1e-12 * Math.exp(2.5 * v))],
      w: 1 / (1e-3 + 1e-13 / (1e-12 * Math.exp(2.5 * v))) ** 2,
    }));
    const info = new Information(true);
    for (const r of rows) info.add(r);
    const before = slopeVariance(rows);
    for (const extra of [
      { f: [1, 5.2e8, 5.2 / (1e-12 * Math.exp(13))], w: 2e5 },
      { f: [1, 8.8e8, 8.8 / (1e-12 * Math.exp(22))], w: 1e6 },
    ]) {
      const after = slopeVariance([...rows, extra]);
      expect(after).toBeLessThan(before);
      // The information object scales its columns by the first row's magnitudes, so its slope is
      // b·x₀ and its variance var(b)·x₀².
      const x0 = rows[0].f[1];
      const fall = info.slopeGain(extra) / (x0 * x0);
      expect(Math.abs(fall - (before - after)) / (before - after)).toBeLessThan(1e-6);
    }
    // A singular matrix (one row) gives no gain rather than a wrong one.
    const single = new Information(false);
    single.add({ f: [1, 2], w: 1 });
    expect(single.slopeGain({ f: [1, 3], w: 1 })).toBe(0);
  });
});

describe('where the fill puts its readings', () => {
  // ln I = −30 + 2.5·V (A): off a 1e-13 A floor near 1 V, 0.5 mA limit near 9 V; the range ends at 8 V.
  const current = (v: number) => (v <= 0 ? 1e-14 : Math.exp(-30 + 2.5 * v));
  // An instrument held on one range (rangeOffset 0): the noise is the same fraction of every reading.
  const base: AdaptiveSettings = { start: 0, stop: 8, maxPoints: 200, currentLimit: 5e-4, absoluteFloor: 1e-13, rangeOffset: 0 };

  /** The fill's readings (after the top, 8 V, is first reached) and the levels they cluster around. */
  function fillOf(leakage: boolean): { fill: number[]; clusters: number[]; fine: number } {
    const p = new AdaptiveSweep({ ...base, leakage });
    const levels = drive(p, current);
    expect(p.stopReason).toBe('bias-limit');
    const fill = levels.slice(levels.indexOf(8) + 1);
    const clusters: number[] = [];
    for (const v of fill) if (!clusters.some((c) => Math.abs(c - v) <= p.fine + 1e-9)) clusters.push(v);
    return { fill, clusters: clusters.sort((x, y) => x - y), fine: p.fine };
  }

  it('the readings of an adaptive sweep are one curve in its own order, not an out-and-back sweep: the fit does not split them into legs', () => {
    for (const leakage of [false, true]) {
      const levels = drive(new AdaptiveSweep({ ...base, leakage }), current);
      expect(levels.length).toBeGreaterThan(20);
      expect(sweepLegs(levels)).toBeUndefined();
    }
  });

  it('a plain line: the fill keeps to two levels, the top and one below it (Elfving: a c-optimal design for one coefficient of a two-parameter line needs two support points)', () => {
    const { fill, clusters, fine } = fillOf(false);
    expect(fill.length).toBeGreaterThan(20);
    expect(clusters.length).toBe(2);
    expect(Math.abs(clusters[1] - 8)).toBeLessThanOrEqual(fine);
    // Far below the top, but not down where the 1e-13 A floor swamps the reading (I = 1.5e-11 A at 2 V).
    expect(clusters[0]).toBeLessThan(5);
    expect(current(clusters[0])).toBeGreaterThan(100 * 1e-13);
    // Both used, about equally; no level above the range; the levels are distinct.
    const atTop = fill.filter((v) => Math.abs(v - 8) <= fine + 1e-9).length;
    expect(atTop / fill.length).toBeGreaterThan(0.35);
    expect(atTop / fill.length).toBeLessThan(0.65);
    expect(Math.max(...fill)).toBeLessThanOrEqual(8);
    expect(new Set(fill.map((v) => v.toFixed(9))).size).toBeGreaterThan(fill.length * 0.8);
  });

  it('with a leakage term beside the line the lower fill level moves up: the lowest currents go to pin the leakage, not the slope', () => {
    const plain = fillOf(false);
    const leaky = fillOf(true);
    // The bulk of the leaky fill's lower readings sit above the plain fill's lower level.
    const lower = (f: { fill: number[] }) => f.fill.filter((v) => v < 7).sort((x, y) => x - y);
    const mid = (xs: number[]) => xs[xs.length >> 1];
    expect(mid(lower(leaky))).toBeGreaterThan(mid(lower(plain)) + 0.5);
  });

  it('a first sweep that met its target on the way up: later sweeps go no higher than it went', () => {
    const first = new AdaptiveSweep({ ...base, leakage: true });
    let v = first.first();
    // Nine readings: up to 4.1 V of the 8 V range, short of the top.
    for (let k = 0; k < 9; k++) {
      const r = first.add(v, current(v), false);
      if ('stop' in r) break;
      v = r.next;
    }
    first.targetReached();
    const known = first.knowledge();
    expect(known?.top).toBeDefined();
    expect(known?.topReason).toBe('earlier-top');
    expect(known?.top as number).toBeLessThan(5);
    const later = new AdaptiveSweep({ ...base, leakage: true }, known);
    const l2 = drive(later, current);
    expect(Math.max(...l2)).toBeLessThanOrEqual((known?.top as number) + 1e-12);
    expect(later.stopReason).toBe('earlier-top');
  });

  it('a later sweep starts at the earlier low end and never goes above the earlier top', () => {
    // A 10 µA limit: the first sweep's top is the current limit (near 4.0 V), below the range's end.
    const settings = { ...base, currentLimit: 1e-5, leakage: true };
    const first = new AdaptiveSweep(settings);
    const l1 = drive(first, current);
    expect(first.stopReason).toBe('current-limit');
    const known = first.knowledge();
    expect(known?.top).toBeDefined();
    expect(known?.low).toBeDefined();
    const top = known?.top as number;
    expect(current(top)).toBeLessThan(1e-5);
    const later = new AdaptiveSweep(settings, known);
    expect(later.first()).toBe(known?.low);
    const l2 = drive(later, current);
    expect(Math.max(...l2)).toBeLessThanOrEqual(top + 1e-12);
    // Straight to the regime: far fewer readings before the fill than the first sweep's climb.
    const climb = (ls: number[]) => ls.findIndex((v) => Math.abs(v - top) < 1e-12);
    expect(climb(l2)).toBeGreaterThan(0);
    expect(climb(l2)).toBeLessThan(climb(l1));
  });
});

describe('an autoranging instrument: the fill reads where the range in use reads best', () => {
  it('the range of a current is the decade at or above it', () => {
    expect(rangeOf(7e-5)).toBeCloseTo(1e-4, 18);
    expect(rangeOf(1e-4)).toBeCloseTo(1e-4, 18);
    expect(rangeOf(1.2e-4)).toBeCloseTo(1e-3, 17);
    expect(rangeOf(3e-12)).toBeCloseTo(1e-11, 25);
  });

  // ln I = −30 + 2.5·V (A) over 0–8.5 V: the top, 1.6e-4 A, sits just above the 1e-4 A decade,
  // where an autoranging instrument reads on the 1 mA range. The noise of a reading, for the
  // independent check: σ/I = 0.05 % + 0.02 % of the range in use (a typical data-sheet form).
  const current = (v: number) => (v <= 0 ? 1e-14 : Math.exp(-30 + 2.5 * v));
  const sigmaRel = (a: number) => 5e-4 + (2e-4 * rangeOf(a)) / a;
  const settings: AdaptiveSettings = { start: 0, stop: 8.5, maxPoints: 200, currentLimit: 5e-4, absoluteFloor: 1e-13, leakage: false };

  /** The first 40 readings after the top: the fill. */
  function fill(rangeOffset?: number): number[] {
    const p = new AdaptiveSweep({ ...settings, ...(rangeOffset !== undefined ? { rangeOffset } : {}) });
    const levels = drive(p, current, 200);
    const top = levels.indexOf(8.5);
    expect(top).toBeGreaterThan(0);
    return levels.slice(0, top + 41);
  }
  /** Share of a set of levels whose current lies in the lower 45 % of its decade (read on the range above). */
  const lowInDecade = (ls: number[]) => ls.filter((v) => current(v) / rangeOf(current(v)) < 0.45).length / ls.length;

  it('the climb steps from band to band: once aimed, each reading lands just below a decade top', () => {
    const p = new AdaptiveSweep(settings);
    const levels = drive(p, current, 200);
    const top = levels.indexOf(8.5);
    // The climb from 1 nA up (the first regime readings are fine steps, before the secant can aim).
    const climb = levels.slice(0, top).filter((v) => current(v) > 1e-9);
    expect(climb.length).toBeGreaterThanOrEqual(4);
    // On ln I = −30 + 2.5·V the secant is exact, so each aimed reading lands at 85 % of its decade.
    for (const v of climb) {
      const r = current(v) / rangeOf(current(v));
      expect(r, `${v} V: ${current(v)} A`).toBeGreaterThanOrEqual(0.45);
      expect(r, `${v} V: ${current(v)} A`).toBeLessThanOrEqual(0.9);
    }
    // A range-blind climb (one range) does not aim: some of its readings sit low in a decade.
    const blind = drive(new AdaptiveSweep({ ...settings, rangeOffset: 0 }), current, 200);
    expect(lowInDecade(blind.slice(0, blind.indexOf(8.5)).filter((v) => current(v) > 1e-9))).toBeGreaterThan(0.2);
  });

  it('keeps the fill out of the bottom of a decade, and its readings pin the slope better (mathjs)', () => {
    const aware = fill();
    const blind = fill(0);
    const fa = aware.slice(aware.indexOf(8.5) + 1);
    const fb = blind.slice(blind.indexOf(8.5) + 1);
    expect(lowInDecade(fb)).toBeGreaterThan(0.3);
    expect(lowInDecade(fa)).toBeLessThan(0.1);
    // The same count of readings each (the first n of each sweep): var(b) of the line ln I = a + b·V
    // with the autoranging noise above, by mathjs.
    const rows = (ls: number[]) => ls.filter((v) => current(v) > 2e-12).map((v) => ({ f: [1, v], w: 1 / sigmaRel(current(v)) ** 2 }));
    const n = Math.min(aware.length, blind.length);
    expect(n).toBeGreaterThan(45);
    expect(slopeVariance(rows(aware.slice(0, n)))).toBeLessThan(0.7 * slopeVariance(rows(blind.slice(0, n))));
  });
});

describe('a first sweep that ran out of points on the way up', () => {
  it('sets no top for later sweeps: where the budget ended says nothing about the device', () => {
    const current = (v: number) => (v <= 0 ? 1e-14 : Math.exp(-30 + 2.5 * v));
    const settings: AdaptiveSettings = { start: 0, stop: 8, maxPoints: 8, currentLimit: 5e-4, absoluteFloor: 1e-13 };
    const first = new AdaptiveSweep(settings);
    const l1 = drive(first, current);
    expect(first.stopReason).toBe('point-budget');
    expect(Math.max(...l1)).toBeLessThan(8);
    const known = first.knowledge();
    expect(known?.top).toBeUndefined();
    // The next sweep may climb past where the first one's budget ran out.
    const later = new AdaptiveSweep({ ...settings, maxPoints: 40 }, known);
    const l2 = drive(later, current);
    expect(Math.max(...l2)).toBeGreaterThan(Math.max(...l1));
    expect(later.stopReason).not.toBe('earlier-top');
  });
});
