import { describe, expect, it } from 'vitest';
import { analyze } from '../../daemon/analysis/analyze.js';
import { fowlerNordheim } from '../../daemon/analysis/mechanisms/fowler-nordheim.js';
import { pooleFrenkel } from '../../daemon/analysis/mechanisms/poole-frenkel.js';
import { schottkyEmission } from '../../daemon/analysis/mechanisms/schottky.js';
import { rankMechanisms } from '../../daemon/analysis/ranking.js';
import { formatRanking } from '../../daemon/cli/format.js';
import { segmentLine } from '../../daemon/analysis/segmentation.js';
import { searchWindow } from '../../daemon/analysis/window.js';
import { estimateNoise } from '../../daemon/analysis/noise.js';
import { seededNormal } from '../../daemon/analysis/random.js';
import { sweep, withNoise } from '../helpers/synthetic.js';
import { linearBias, wholeSweep, type SweepSpec } from '../helpers/whole-sweep.js';

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
    const w = searchWindow(x, y, new Float64Array(x.length).fill(1 / 0.002 ** 2));
    expect(w.passed).toBe(true);
    expect(x[w.start]).toBeLessThan(0.5);
    expect(x[w.end]).toBeGreaterThan(5.5);
    expect(x[w.end]).toBeLessThan(6.6);
  });

  it('fits Fowler–Nordheim together with the ohmic leakage below it (the default window)', () => {
    const d = 7e-9;
    const v = sweep(0.1, 9, 90);
    // Leakage 5e13 Ω in parallel; 1 % relative noise, no floor.
    const i = withNoise(
      v.map((x) => fowlerNordheim(x / d, 3.1, 0.42) * 1e-8 + 2e-14 * x),
      0.01,
      9,
    );
    const r = analyze({ x: v, y: i }, { model: 'fowler-nordheim', inputs: { thickness: d, area: 1e-8, massRatio: 0.42 } });
    expect(r.window.mode).toBe('auto');
    expect(r.window.to).toBeCloseTo(9, 6);
    expect(Math.abs(r.parameters.barrierHeight.value - 3.1), JSON.stringify(r.parameters)).toBeLessThan(3 * r.parameters.barrierHeight.stdErr + 1e-3);
    expect(r.parameters.leakageResistance.value / 5e13).toBeGreaterThan(0.8);
    expect(r.parameters.leakageResistance.value / 5e13).toBeLessThan(1.25);
    expect(r.plausible).toBe(true);
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
    const i = withNoise(
      v.map((x) => fowlerNordheim(x / d, 3.2, 0.42) * area),
      0.01,
      31,
    );
    const r = rankMechanisms({ x: v, y: i }, { inputs: { thickness: d, area, massRatio: 0.42 } });
    expect(r.ranking[0].model).toBe('fowler-nordheim');
    expect(r.ranking[0].score).toBeGreaterThan(0.9);
    expect(r.ranking[0].reasons.length).toBeGreaterThan(0);
  });
  it('Poole–Frenkel data with n known rank Poole–Frenkel above Schottky (n² check)', () => {
    const v = sweep(4, 16, 41);
    const i = withNoise(
      v.map((x) => pooleFrenkel(x / 20e-9, 1e-2, 1.0, 2.13, 300) * area),
      0.01,
      32,
    );
    const r = rankMechanisms({ x: v, y: i }, { inputs: { thickness: 20e-9, area, temperature: 300, refractiveIndex: 1.46 } });
    const order = r.ranking.map((e) => e.model);
    expect(order.indexOf('poole-frenkel')).toBeLessThan(order.indexOf('schottky'));
    expect(r.ranking.find((e) => e.model === 'schottky')?.plausible).toBe(false);
  });
  it('Schottky data with n known rank Schottky above Poole–Frenkel', () => {
    const v = sweep(1, 8, 41);
    const i = withNoise(
      v.map((x) => schottkyEmission(x / d, 0.9, 2.13, 300, 1.2e6) * area),
      0.01,
      33,
    );
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

describe('ranking whole sweeps (test/helpers/whole-sweep.ts), no window given', () => {
  const fnSpec = {
    device: { kind: 'fowler-nordheim', barrier: 3.1, massRatio: 0.42 } as const,
    thickness: 7e-9,
    area: 1e-8,
    leakage: 1e13,
    relative: 0.02,
    floor: 1e-13,
    compliance: 1e-3,
  };
  const cases: [string, Omit<SweepSpec, 'seed'>, Record<string, number>][] = [
    ['fowler-nordheim', { ...fnSpec, bias: linearBias(0, 10, 101) }, { thickness: 7e-9, area: 1e-8, massRatio: 0.42, refractiveIndex: 1.46 }],
    ['fowler-nordheim', { ...fnSpec, bias: linearBias(-10, 10, 201) }, { thickness: 7e-9, area: 1e-8, massRatio: 0.42, refractiveIndex: 1.46 }],
    ['fowler-nordheim', { ...fnSpec, bias: linearBias(0, 10, 21) }, { thickness: 7e-9, area: 1e-8, massRatio: 0.42, refractiveIndex: 1.46 }],
    [
      'poole-frenkel',
      {
        device: { kind: 'poole-frenkel', prefactor: 1e-2, trapDepth: 1.0, permittivity: 4 },
        thickness: 20e-9,
        area: 1e-8,
        leakage: 1e15,
        bias: linearBias(0, 15, 76),
        relative: 0.02,
        floor: 1e-13,
        compliance: 1e-3,
      },
      { thickness: 20e-9, area: 1e-8, refractiveIndex: 2 },
    ],
    [
      'poole-frenkel',
      {
        device: { kind: 'poole-frenkel', prefactor: 1e-2, trapDepth: 1.0, permittivity: 2.13 },
        thickness: 20e-9,
        area: 1e-8,
        leakage: 1e14,
        bias: linearBias(-16, 16, 161),
        relative: 0.01,
        floor: 1e-13,
        compliance: 1e-3,
      },
      { thickness: 20e-9, area: 1e-8, refractiveIndex: 1.46 },
    ],
    [
      'schottky',
      {
        device: { kind: 'schottky', barrier: 0.9, permittivity: 4, richardson: 1.2017e6 },
        thickness: 12e-9,
        area: 1e-8,
        temperature: 350,
        leakage: 1e14,
        bias: linearBias(0, 5, 51),
        relative: 0.02,
        floor: 1e-13,
        compliance: 1e-3,
      },
      { thickness: 12e-9, area: 1e-8, temperature: 350, refractiveIndex: 2 },
    ],
    [
      'trap-assisted-tunneling',
      {
        device: { kind: 'trap-assisted-tunneling', prefactor: 100, trapEnergy: 1.2, massRatio: 0.5 },
        thickness: 10e-9,
        area: 1e-8,
        leakage: 1e14,
        bias: linearBias(0, 9, 91),
        relative: 0.02,
        floor: 1e-13,
        compliance: 1e-3,
      },
      { thickness: 10e-9, area: 1e-8, massRatio: 0.5 },
    ],
    [
      'hopping',
      {
        device: { kind: 'hopping', prefactor: 1e-3, distance: 2e-9 },
        thickness: 50e-9,
        area: 1e-8,
        leakage: 1e13,
        bias: linearBias(0, 10, 101),
        relative: 0.02,
        floor: 1e-13,
        compliance: 1e-3,
      },
      { thickness: 50e-9, area: 1e-8 },
    ],
    [
      'diode',
      {
        device: { kind: 'diode', saturationCurrent: 1e-12, ideality: 1.2, series: 2, shunt: 1e8 },
        bias: linearBias(-1, 0.8, 181),
        relative: 0.02,
        floor: 1e-13,
        compliance: 1e-2,
      },
      { temperature: 300 },
    ],
    [
      'sclc',
      {
        device: { kind: 'sclc', mobility: 1e-8, permittivity: 3, conductivity: 3e-5 },
        thickness: 1e-7,
        area: 1e-8,
        bias: linearBias(0, 10, 101),
        relative: 0.02,
        floor: 1e-13,
        compliance: 1e-2,
      },
      { thickness: 1e-7, area: 1e-8, permittivity: 3 },
    ],
    [
      'ohmic',
      {
        device: { kind: 'hopping', prefactor: 1e-30, distance: 1e-10 },
        thickness: 50e-9,
        area: 1e-8,
        leakage: 1e9,
        bias: linearBias(-2, 2, 81),
        relative: 0.01,
        floor: 1e-13,
      },
      { thickness: 50e-9, area: 1e-8 },
    ],
  ];
  for (const [truth, spec, inputs] of cases) {
    it(`${truth} first (${spec.bias.length} points, ${spec.bias[0]} → ${spec.bias[spec.bias.length - 1]} V)`, () => {
      for (const seed of [1, 2, 3]) {
        const s = wholeSweep({ ...spec, seed });
        const r = rankMechanisms({ x: s.v, y: s.i }, { inputs });
        const order = r.ranking.map((e) => `${e.model}${e.plausible ? '' : '*'} ${e.score.toPrecision(2)}`).join(', ');
        expect(r.ranking[0].model, `seed ${seed}: ${order}`).toBe(truth);
        expect(r.ranking[0].plausible, order).toBe(true);
        // Akaike weights over every fitted mechanism sum to 1, implausible ones included.
        expect(r.ranking.reduce((a, e) => a + e.score, 0)).toBeCloseTo(1, 9);
      }
    });
  }

  it('hopping and diode draw the same straight line: the tie is reported and the physical checks decide', () => {
    // Well above kT/q the diode's "−1" no longer tells them apart: ln J against V is one line for both.
    const s = wholeSweep({ ...cases[7][1], bias: linearBias(4, 10, 61), seed: 4 });
    const r = rankMechanisms({ x: s.v, y: s.i }, { inputs: cases[7][2] });
    const diode = r.ranking.find((e) => e.model === 'diode');
    expect(diode?.reasons.join(' ')).toMatch(/hopping/);
    expect(r.ranking[0].model).toBe('hopping');
  });

  it('an implausible mechanism that fits best is listed with its weight and the ranking says so', () => {
    // Poole–Frenkel data with the wrong refractive index given: PF fails the n² check, keeps its weight.
    const s = wholeSweep({ ...cases[3][1], seed: 5 });
    const r = rankMechanisms({ x: s.v, y: s.i }, { inputs: { ...cases[3][2], refractiveIndex: 1.2 } });
    const pf = r.ranking.find((e) => e.model === 'poole-frenkel');
    expect(pf?.plausible).toBe(false);
    expect(pf?.score).toBeGreaterThan(0.5);
    expect(r.warnings.join(' ')).toMatch(/'poole-frenkel' fits best .* but fails a physical check/);
    // The check named is the one that failed (ε_r against n²), not the first warning of the row.
    expect(pf?.failed[0]).toMatch(/far from n²/);
    expect(r.warnings.join(' ')).toContain(`fails a physical check (${pf?.failed[0]})`);
  });

  it('the summary names the check that failed, not an assumed input; a row without parameters says why', () => {
    // A 1 kΩ resistor (Ohm's law) clipped at 1 mA, with 0.1 % noise on every reading; no temperature
    // given, so "300 K assumed" stands among the warnings of the temperature-dependent mechanisms.
    const normal = seededNormal(11);
    const v = Array.from({ length: 101 }, (_, k) => k * 0.05);
    const i = v.map((x) => Math.min(x / 1000, 1e-3) * (1 + 0.001 * normal()));
    const r = rankMechanisms({ x: v, y: i }, { inputs: { thickness: 5e-9, massRatio: 0.42 } });
    const best = r.ranking.reduce((m, e) => (e.score > m.score ? e : m));
    expect(best.plausible).toBe(false);
    expect(best.reasons).toContain('temperature not given: 300 K assumed');
    expect(best.failed.length).toBeGreaterThan(0);
    for (const e of r.ranking) {
      expect(e.failed.length > 0).toBe(!e.plausible);
      for (const f of e.failed) expect(f).not.toMatch(/not given|assumed/);
    }
    const summary = r.warnings.find((w) => /fits best/.test(w));
    expect(summary).toContain(`fails a physical check (${best.failed[0]})`);
    // Mechanisms whose line slopes the wrong way give no parameter, and their row says so.
    const empty = r.ranking.filter((e) => Object.keys(e.parameters).length === 0);
    expect(empty.map((e) => e.model)).toEqual(expect.arrayContaining(['poole-frenkel', 'fowler-nordheim']));
    for (const e of empty) {
      expect(e.noParameters).toMatch(/wrong sign/);
      expect(e.failed[0]).toMatch(/slope [≤≥] 0/);
    }
    for (const e of r.ranking.filter((x) => Object.keys(x.parameters).length > 0)) expect(e.noParameters).toBeUndefined();
    const pfRow = formatRanking(r)
      .split('\n')
      .find((l) => /^\d+\s+poole-frenkel /.test(l));
    expect(pfRow).toMatch(/none: the slope has the wrong sign/);
  });
});
