/**
 * Do the stated uncertainties mean what they say? Replicate whole sweeps (test/helpers/whole-sweep.ts:
 * published forward models, independent seeded noise: a floor of either sign, relative noise,
 * leakage, compliance), each analysed with no window given; the stated ±1σ must cover the true value
 * 60–80 % of the time (68 % for a correct standard uncertainty, JCGM 100:2008 §6), and the spread of
 * (value − truth)/σ must be near 1. Both directions fail: σ too small gives low coverage and a large
 * spread, σ too large high coverage and a small one.
 */
import { describe, expect, it } from 'vitest';
import { analyze } from '../../daemon/analysis/analyze.js';
import { fitDiode } from '../../daemon/analysis/diode-fit.js';
import { linearBias, wholeSweep, type SweepSpec } from '../helpers/whole-sweep.js';

interface Study {
  readonly name: string;
  readonly spec: Omit<SweepSpec, 'seed'>;
  readonly model: string;
  readonly inputs: Record<string, number>;
  readonly key: string;
  readonly truth: number;
}

const STUDIES: Study[] = [
  {
    name: 'Fowler–Nordheim barrier',
    model: 'fowler-nordheim',
    key: 'barrierHeight',
    truth: 3.1,
    spec: {
      device: { kind: 'fowler-nordheim', barrier: 3.1, massRatio: 0.42 },
      thickness: 7e-9,
      area: 1e-8,
      leakage: 1e13,
      bias: linearBias(0, 10, 101),
      relative: 0.02,
      floor: 1e-13,
      compliance: 1e-3,
    },
    inputs: { thickness: 7e-9, area: 1e-8, massRatio: 0.42 },
  },
  {
    name: 'Poole–Frenkel dynamic permittivity',
    model: 'poole-frenkel',
    key: 'relativePermittivity',
    truth: 4,
    spec: {
      device: { kind: 'poole-frenkel', prefactor: 1e-2, trapDepth: 1.0, permittivity: 4 },
      thickness: 20e-9,
      area: 1e-8,
      leakage: 1e15,
      bias: linearBias(0, 15, 76),
      relative: 0.02,
      floor: 1e-13,
      compliance: 1e-3,
    },
    inputs: { thickness: 20e-9, area: 1e-8, refractiveIndex: 2 },
  },
  {
    name: 'Schottky barrier (intercept)',
    model: 'schottky',
    key: 'barrierHeight',
    truth: 0.9,
    spec: {
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
    inputs: { thickness: 12e-9, area: 1e-8, temperature: 350, refractiveIndex: 2 },
  },
  {
    name: 'trap-assisted tunnelling trap energy',
    model: 'trap-assisted-tunneling',
    key: 'trapEnergy',
    truth: 1.2,
    spec: {
      device: { kind: 'trap-assisted-tunneling', prefactor: 100, trapEnergy: 1.2, massRatio: 0.5 },
      thickness: 10e-9,
      area: 1e-8,
      leakage: 1e14,
      bias: linearBias(0, 9, 91),
      relative: 0.02,
      floor: 1e-13,
      compliance: 1e-3,
    },
    inputs: { thickness: 10e-9, area: 1e-8, massRatio: 0.5 },
  },
  {
    name: 'hopping distance',
    model: 'hopping',
    key: 'hoppingDistance',
    truth: 2e-9,
    spec: {
      device: { kind: 'hopping', prefactor: 1e-3, distance: 2e-9 },
      thickness: 50e-9,
      area: 1e-8,
      leakage: 1e13,
      bias: linearBias(0, 10, 101),
      relative: 0.02,
      floor: 1e-13,
      compliance: 1e-3,
    },
    inputs: { thickness: 50e-9, area: 1e-8 },
  },
  {
    name: 'diode ideality (semilog, with series and shunt terms)',
    model: 'diode',
    key: 'idealityFactor',
    truth: 1.2,
    spec: {
      device: { kind: 'diode', saturationCurrent: 1e-12, ideality: 1.2, series: 2, shunt: 1e8 },
      bias: linearBias(-0.5, 0.7, 121),
      relative: 0.02,
      floor: 1e-13,
      compliance: 1e-2,
    },
    inputs: { temperature: 300 },
  },
  {
    name: 'space-charge-limited mobility (ohmic + Mott–Gurney)',
    model: 'sclc',
    key: 'mobility',
    truth: 1e-8,
    spec: {
      device: { kind: 'sclc', mobility: 1e-8, permittivity: 3, conductivity: 3e-5 },
      thickness: 1e-7,
      area: 1e-8,
      bias: linearBias(0, 10, 101),
      relative: 0.02,
      floor: 1e-13,
      compliance: 1e-2,
    },
    inputs: { thickness: 1e-7, area: 1e-8, permittivity: 3 },
  },
];

const REPLICATES = 120;

describe('stated ±1σ against replicate sweeps (coverage 60–80 %, spread of z near 1)', () => {
  for (const st of STUDIES) {
    it(st.name, () => {
      let cover = 0;
      let z2 = 0;
      for (let seed = 1; seed <= REPLICATES; seed++) {
        const s = wholeSweep({ ...st.spec, seed: 1000 + seed });
        const p = analyze({ x: s.v, y: s.i }, { model: st.model, inputs: st.inputs }).parameters[st.key];
        const z = (p.value - st.truth) / p.stdErr;
        if (Math.abs(z) <= 1) cover++;
        z2 += z * z;
      }
      const coverage = cover / REPLICATES;
      const rmsZ = Math.sqrt(z2 / REPLICATES);
      const what = `coverage ${(100 * coverage).toFixed(1)} %, RMS z ${rmsZ.toFixed(3)}`;
      // With 120 replicates the coverage of a correct σ has an SD of 4.3 %: the band is wide enough
      // not to fail by chance and narrow enough to catch σ off by a quarter either way.
      expect(coverage, what).toBeGreaterThanOrEqual(0.58);
      expect(coverage, what).toBeLessThanOrEqual(0.8);
      expect(rmsZ, what).toBeGreaterThan(0.8);
      expect(rmsZ, what).toBeLessThan(1.25);
    });
  }
});

describe('the single-diode model of a dark diode (Levenberg–Marquardt, Shockley with R_s and R_sh): ±1σ against replicates', () => {
  // Shockley 1949 with series and shunt resistance (Sze & Ng 2007), swept −0.5 → 0.7 V as an SMU
  // records it: 2 % relative noise, a 1e-13 A floor, 10 mA compliance.
  const truth: Record<string, number> = { idealityFactor: 1.2, saturationCurrent: 1e-12, seriesResistance: 2, shuntResistance: 1e8 };
  it('n, I₀, R_s and R_sh each covered 60–80 % of the time, spread of z near 1', () => {
    const acc: Record<string, { c: number; z2: number }> = {};
    for (let seed = 1; seed <= REPLICATES; seed++) {
      const s = wholeSweep({
        device: { kind: 'diode', saturationCurrent: 1e-12, ideality: 1.2, series: 2, shunt: 1e8 },
        bias: linearBias(-0.5, 0.7, 121),
        relative: 0.02,
        floor: 1e-13,
        compliance: 1e-2,
        seed: 500 + seed,
      });
      const r = fitDiode({ x: s.v, y: s.i, compliance: s.compliance }, 'single-diode', { temperature: 300 });
      for (const [k, t] of Object.entries(truth)) {
        const p = r.parameters[k];
        const z = (p.value - t) / p.stdErr;
        const a = (acc[k] ??= { c: 0, z2: 0 });
        if (Math.abs(z) <= 1) a.c++;
        a.z2 += z * z;
      }
    }
    for (const [k, a] of Object.entries(acc)) {
      const coverage = a.c / REPLICATES;
      const rmsZ = Math.sqrt(a.z2 / REPLICATES);
      const what = `${k}: coverage ${(100 * coverage).toFixed(1)} %, RMS z ${rmsZ.toFixed(3)}`;
      expect(coverage, what).toBeGreaterThanOrEqual(0.55);
      expect(coverage, what).toBeLessThanOrEqual(0.8);
      expect(rmsZ, what).toBeGreaterThan(0.8);
      expect(rmsZ, what).toBeLessThan(1.3);
    }
  });
});
