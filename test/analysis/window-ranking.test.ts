import { describe, expect, it } from 'vitest';
import { analyze } from '../../daemon/analysis/analyze.js';
import { fowlerNordheim } from '../../daemon/analysis/mechanisms/fowler-nordheim.js';
import { pooleFrenkel } from '../../daemon/analysis/mechanisms/poole-frenkel.js';
import { schottkyEmission } from '../../daemon/analysis/mechanisms/schottky.js';
import { rankMechanisms } from '../../daemon/analysis/ranking.js';
import { segmentLine } from '../../daemon/analysis/segmentation.js';
import { autoWindow } from '../../daemon/analysis/window.js';
import { estimateNoise } from '../../daemon/analysis/noise.js';
import { seededNormal } from '../../daemon/analysis/random.js';
import { sweep, withNoise } from '../helpers/synthetic.js';

describe('noise estimate', () => {
  it('recovers σ of white noise on a smooth curve within 15 %', () => {
    const normal = seededNormal(5);
    const x = sweep(0, 10, 2000);
    const y = x.map((v) => Math.sin(v) + 0.01 * normal());
    expect(Math.abs(estimateNoise(x, y) - 0.01) / 0.01).toBeLessThan(0.15);
  });
});

describe('automatic window', () => {
  it('finds the straight part of a line that bends into a plateau', () => {
    const normal = seededNormal(3);
    const x = sweep(0, 10, 201);
    // Straight up to x = 6, then a quadratic bend: the window must stop near 6.
    const y = x.map((v) => 2 + 0.5 * v - (v > 6 ? 0.3 * (v - 6) ** 2 : 0) + 0.002 * normal());
    const w = autoWindow(x, y);
    expect(x[w.start]).toBeLessThan(0.5);
    expect(x[w.end]).toBeGreaterThan(5.5);
    expect(x[w.end]).toBeLessThan(6.6);
  });

  it('picks the Fowler–Nordheim regime above a leakage floor (fit with --auto)', () => {
    const d = 7e-9;
    const v = sweep(0.1, 9, 90);
    const i = withNoise(v.map((x) => fowlerNordheim(x / d, 3.1, 0.42) * 1e-8 + 2e-14 * x), 0.01, 9);
    const r = analyze({ x: v, y: i }, { model: 'fowler-nordheim', inputs: { thickness: d, area: 1e-8, massRatio: 0.42 }, window: 'auto' });
    expect(r.window.mode).toBe('auto');
    expect(r.window.from).toBeGreaterThan(3.5);
    expect(r.window.to).toBeCloseTo(9, 6);
    expect(Math.abs(r.parameters.barrierHeight.value - 3.1)).toBeLessThan(0.02);
  });
});

describe('regime segmentation', () => {
  it('splits three straight pieces at their true breakpoints', () => {
    const normal = seededNormal(4);
    const x = sweep(0, 30, 301);
    const y = x.map((v) => (v < 10 ? v : v < 20 ? 10 + 3 * (v - 10) : 40 - (v - 20)) + 0.05 * normal());
    const s = segmentLine(x, y);
    expect(s.segments.length).toBe(3);
    expect(Math.abs(s.breakpoints[0] - 10)).toBeLessThan(0.3);
    expect(Math.abs(s.breakpoints[1] - 20)).toBeLessThan(0.3);
    expect(s.segments[1].slope).toBeCloseTo(3, 1);
  });
  it('keeps one segment for one straight line', () => {
    const normal = seededNormal(8);
    const x = sweep(0, 1, 100);
    const y = x.map((v) => 1 - 2 * v + 0.01 * normal());
    expect(segmentLine(x, y).segments.length).toBe(1);
  });
});

describe('mechanism ranking', () => {
  const d = 10e-9;
  const area = 1e-8;
  it('Fowler–Nordheim data rank Fowler–Nordheim first', () => {
    const v = sweep(7, 11, 41);
    const i = withNoise(v.map((x) => fowlerNordheim(x / d, 3.2, 0.42) * area), 0.01, 31);
    const r = rankMechanisms({ x: v, y: i }, { inputs: { thickness: d, area, massRatio: 0.42 } });
    expect(r.ranking[0].model).toBe('fowler-nordheim');
    expect(r.ranking[0].score).toBeGreaterThan(0.9);
    expect(r.ranking[0].reasons.length).toBeGreaterThan(0);
  });
  it('Poole–Frenkel data with n known rank Poole–Frenkel above Schottky (n² check)', () => {
    const v = sweep(4, 16, 41);
    const i = withNoise(v.map((x) => pooleFrenkel(x / 20e-9, 1e-2, 1.0, 2.13, 300) * area), 0.01, 32);
    const r = rankMechanisms({ x: v, y: i }, { inputs: { thickness: 20e-9, area, temperature: 300, refractiveIndex: 1.46 } });
    const order = r.ranking.map((e) => e.model);
    expect(order.indexOf('poole-frenkel')).toBeLessThan(order.indexOf('schottky'));
    expect(r.ranking.find((e) => e.model === 'schottky')?.plausible).toBe(false);
  });
  it('Schottky data with n known rank Schottky above Poole–Frenkel', () => {
    const v = sweep(1, 8, 41);
    const i = withNoise(v.map((x) => schottkyEmission(x / d, 0.9, 2.13, 300, 1.2e6) * area), 0.01, 33);
    const r = rankMechanisms({ x: v, y: i }, { inputs: { thickness: d, area, temperature: 300, refractiveIndex: 1.46 } });
    const order = r.ranking.map((e) => e.model);
    expect(order.indexOf('schottky')).toBeLessThan(order.indexOf('poole-frenkel'));
  });
  it('mechanisms that need a missing input are skipped with the reason', () => {
    const v = sweep(0.1, 1, 20);
    const i = v.map((x) => x * 1e-6);
    const r = rankMechanisms({ x: v, y: i });
    expect(r.skipped.find((s) => s.model === 'fowler-nordheim')?.reason).toMatch(/thickness/);
    expect(r.ranking.length).toBeGreaterThan(0);
  });
});
