/**
 * Each mechanism: its forward model against published check values, then synthetic data from the
 * forward model with known parameters and 1–2 % noise, fitted back. Check values are the ones in the
 * formulas of the sources named, computed from CODATA 2018 values.
 */
import { fmt } from '../../daemon/analysis/mechanism.js';
import { describe, expect, it } from 'vitest';
import { analyze, resolveInputs } from '../../daemon/analysis/analyze.js';
import { BOLTZMANN_EV_PER_K, VACUUM_PERMITTIVITY_F_PER_M } from '../../daemon/analysis/constants.js';
import { fowlerNordheim } from '../../daemon/analysis/mechanisms/fowler-nordheim.js';
import { getMechanism } from '../../daemon/analysis/mechanisms/index.js';
import { pooleFrenkel, rootFieldSlope } from '../../daemon/analysis/mechanisms/poole-frenkel.js';
import { schottkyEmission } from '../../daemon/analysis/mechanisms/schottky.js';
import { mottGurney } from '../../daemon/analysis/mechanisms/sclc.js';
import { hopping } from '../../daemon/analysis/mechanisms/hopping.js';
import { trapAssistedTunnelling } from '../../daemon/analysis/mechanisms/trap-assisted-tunneling.js';
import { inRange } from '../../daemon/analysis/mechanism.js';
import { shockley } from '../../daemon/analysis/mechanisms/diode.js';
import { expectRelClose } from '../helpers/reference.js';
import { sweep, withNoise } from '../helpers/synthetic.js';

describe('forward models against published check values', () => {
  // Lenzlinger & Snow (1969) form with Forbes' constants; φ = 3.2 eV, m_r = 0.42:
  // J(10 MV/cm) = 1.13e-3 A/cm², J(8 MV/cm) = 1.29e-6 A/cm² (computed from CODATA 2018 with Forbes' constants).
  it('Fowler–Nordheim current density at 10 and 8 MV/cm', () => {
    expectRelClose(fowlerNordheim(1e9, 3.2, 0.42) * 1e-4, 1.13e-3, 5e-3);
    expectRelClose(fowlerNordheim(8e8, 3.2, 0.42) * 1e-4, 1.29e-6, 5e-3);
  });
  // Chiu 2014 / Sze: SiO2 with ε_r = n² = 1.46² at 300 K: PF slope 2.011e-3 (m/V)^½, Schottky half that.
  it('Poole–Frenkel and Schottky √E slopes for SiO2 at 300 K', () => {
    expectRelClose(rootFieldSlope(1.46 ** 2, 300, 1), 2.011e-3, 1e-3);
    expectRelClose(rootFieldSlope(1.46 ** 2, 300, 4), 1.005e-3, 1e-3);
    expectRelClose(rootFieldSlope(4.0, 300, 1), 1.468e-3, 1e-3);
  });
  // Mott & Gurney (1940): ε_r = 3, μ = 1e-4 cm²/Vs, d = 100 nm, V = 1 V → 298.8 A/m².
  it('Mott–Gurney current density', () => {
    expectRelClose(mottGurney(1, 1e-8, 3, 100e-9), 298.8, 1e-3);
  });
  // Arrhenius: E_a = 0.5 eV gives a slope of −5802.26 K in ln(rate) against 1/T.
  it('Arrhenius slope for 0.5 eV', () => {
    const t = sweep(250, 400, 16);
    const rate = t.map((T) => 3e7 * Math.exp(-0.5 / (BOLTZMANN_EV_PER_K * T)));
    const r = analyze({ x: t, y: rate }, { model: 'arrhenius' });
    expectRelClose(r.line.slope, -5802.26, 1e-6);
    expectRelClose(r.parameters.activationEnergy.value, 0.5, 1e-9);
  });
});

describe('synthetic recovery: forward model → noisy data → fit → known parameters', () => {
  const d = 10e-9;
  const area = 1e-8;

  it('fowler-nordheim: φ = 3.2 eV, m_r = 0.42, 1 % noise → φ within 3σ and 0.5 %', () => {
    const v = sweep(7, 11, 41);
    const i = withNoise(
      v.map((x) => fowlerNordheim(x / d, 3.2, 0.42) * area),
      0.01,
      11,
    );
    const r = analyze({ x: v, y: i }, { model: 'fowler-nordheim', inputs: { thickness: d, area, massRatio: 0.42 } });
    const p = r.parameters.barrierHeight;
    expect(Math.abs(p.value - 3.2)).toBeLessThan(3 * p.stdErr + 1e-9);
    expectRelClose(p.value, 3.2, 5e-3);
    expect(r.plausible).toBe(true);
    expect(p.unit).toBe('eV');
  });

  it('poole-frenkel: ε_r = 4 (Si3N4, n = 2) recovered; plausibility note against n²', () => {
    const v = sweep(2, 10, 41);
    const i = withNoise(
      v.map((x) => pooleFrenkel(x / d, 1e-2, 1.3, 4, 300) * area),
      0.01,
      12,
    );
    const r = analyze({ x: v, y: i }, { model: 'poole-frenkel', inputs: { thickness: d, area, temperature: 300, refractiveIndex: 2 } });
    const p = r.parameters.relativePermittivity;
    expect(Math.abs(p.value - 4)).toBeLessThan(3 * p.stdErr);
    expect(r.plausible).toBe(true);
    expect(r.notes.join(' ')).toMatch(/agrees with n²/);
    // Without the refractive index the check cannot be made, and the fit says so.
    const u = analyze({ x: v, y: i }, { model: 'poole-frenkel', inputs: { thickness: d, area, temperature: 300 } });
    expect(u.notes.join(' ')).toMatch(/ε_r = [34]\.\d+ ± \S+ is not checked against n² \(no refractive index given/);
    expect(u.notes.join(' ')).not.toMatch(/agrees with n²/);
  });

  it('schottky: ε_r = 2.13 and φ_B = 1.0 eV from slope and intercept', () => {
    const v = sweep(1, 8, 36);
    const i = withNoise(
      v.map((x) => schottkyEmission(x / d, 1.0, 2.13, 350, 1.2e6) * area),
      0.01,
      13,
    );
    const r = analyze({ x: v, y: i }, { model: 'schottky', inputs: { thickness: d, area, temperature: 350, richardson: 1.2e6, refractiveIndex: 1.46 } });
    const eps = r.parameters.relativePermittivity;
    const phi = r.parameters.barrierHeight;
    expect(Math.abs(eps.value - 2.13)).toBeLessThan(3 * eps.stdErr);
    expect(Math.abs(phi.value - 1.0)).toBeLessThan(3 * phi.stdErr + 1e-6);
    expect(r.plausible).toBe(true);
  });

  it('hopping: a = 1.5 nm', () => {
    const v = sweep(2, 10, 41);
    const i = withNoise(
      v.map((x) => hopping(x / d, 1e-3, 1.5e-9, 300) * area),
      0.01,
      14,
    );
    const r = analyze({ x: v, y: i }, { model: 'hopping', inputs: { thickness: d, area, temperature: 300 } });
    const p = r.parameters.hoppingDistance;
    expect(Math.abs(p.value - 1.5e-9)).toBeLessThan(3 * p.stdErr);
    expect(p.unit).toBe('m');
  });

  it('trap-assisted-tunneling: φ_t = 1.2 eV', () => {
    const v = sweep(3, 9, 31);
    const i = withNoise(
      v.map((x) => trapAssistedTunnelling(x / d, 1e2, 1.2, 0.5) * area),
      0.01,
      15,
    );
    const r = analyze({ x: v, y: i }, { model: 'trap-assisted-tunneling', inputs: { thickness: d, area, massRatio: 0.5 } });
    const p = r.parameters.trapEnergy;
    expect(Math.abs(p.value - 1.2)).toBeLessThan(3 * p.stdErr);
  });

  it('diode: n = 1.3, I0 = 1e-12 A above 3kT/q', () => {
    const v = sweep(0.15, 0.5, 36);
    const i = withNoise(
      v.map((x) => shockley(x, 1e-12, 1.3, 300)),
      0.01,
      16,
    );
    const r = analyze({ x: v, y: i }, { model: 'diode', inputs: { temperature: 300 } });
    expect(Math.abs(r.parameters.idealityFactor.value - 1.3)).toBeLessThan(3 * r.parameters.idealityFactor.stdErr);
    expect(Math.abs(Math.log(r.parameters.saturationCurrent.value / 1e-12))).toBeLessThan((3 * r.parameters.saturationCurrent.stdErr) / 1e-12 + 0.05);
  });

  it('sclc: μ = 1e-8 m²/Vs with ε_r = 3; exponent 2; ohmic→SCLC transition at 8σd²/(9ε₀ε_r μ)', () => {
    const dd = 100e-9;
    const sigma = 1e-6; // S/m
    const v = Float64Array.from({ length: 60 }, (_, k) => 10 ** (-2 + (3 * k) / 59));
    const j = v.map((x) => mottGurney(x, 1e-8, 3, dd) + (sigma * x) / dd);
    const i = withNoise(
      j.map((x) => x * area),
      0.005,
      17,
    );
    const vtr = (8 * sigma * dd * dd) / (9 * VACUUM_PERMITTIVITY_F_PER_M * 3 * 1e-8);
    const r = analyze({ x: v, y: i }, { model: 'sclc', inputs: { thickness: dd, area, permittivity: 3 }, window: { from: 3, to: 10 } });
    expect(Math.abs(r.parameters.exponent.value - 2)).toBeLessThan(0.1);
    expectRelClose(r.parameters.mobility.value, 1e-8, 0.15);
    // The crossing of the two asymptotes is where both terms are equal (analytical above).
    const t = r.parameters.transitionVoltage;
    expect(t).toBeDefined();
    expectRelClose(t.value, vtr, 0.35);
  });

  it('ohmic: R = 1 MΩ, conductivity = d/(R·A)', () => {
    const v = sweep(-1, 1, 21);
    const i = withNoise(
      v.map((x) => x / 1e6),
      0.005,
      18,
    );
    const r = analyze({ x: v, y: i }, { model: 'ohmic', inputs: { thickness: d, area } });
    expectRelClose(r.parameters.resistance.value, 1e6, 0.01);
    expectRelClose(r.parameters.conductivity.value, d / (1e6 * area), 0.01);
    // Both polarities carry signal: each branch is analysed on its own, the other one counted; the
    // zero-bias reading belongs to neither.
    expect(r.points.reasons['other polarity (analysed as its own branch)']).toBe(10);
    expect(r.points.reasons['zero bias']).toBe(1);
    expect(r.branches.map((b) => b.polarity).sort()).toEqual(['negative', 'positive']);
    for (const b of r.branches) expectRelClose(b.parameters.resistance.value, 1e6, 0.01);
  });
});

describe('Poole–Frenkel versus Schottky, told apart by n² (Chiu 2014: the lowering differs by 2)', () => {
  it('PF data read as Schottky give ε_r four times too small and fail the n² check', () => {
    const d = 20e-9;
    const v = sweep(4, 16, 41);
    const i = withNoise(
      v.map((x) => pooleFrenkel(x / d, 1e-2, 1.0, 2.13, 300) * 1e-8),
      0.005,
      21,
    );
    const inputs = { thickness: d, area: 1e-8, temperature: 300, refractiveIndex: 1.46 };
    const pf = analyze({ x: v, y: i }, { model: 'poole-frenkel', inputs });
    const sc = analyze({ x: v, y: i }, { model: 'schottky', inputs });
    expect(pf.plausible).toBe(true);
    expect(sc.plausible).toBe(false);
    expect(sc.warnings.join(' ')).toMatch(/far from n²/);
  });
});

describe('points that cannot enter a transform are counted by reason', () => {
  it('zero and negative currents under a log, compliance flags, and a compliance limit', () => {
    const v = [0, 0.1, 0.2, 0.3, 0.4, 0.5, 0.6, 0.7];
    const i = [0, 0, -1e-12, 1e-10, 1e-9, 1e-8, 1e-7, 1e-3];
    const comp = [0, 0, 0, 0, 0, 0, 1, 0];
    const r = analyze({ x: v, y: i, compliance: comp }, { model: 'diode', complianceLimit: 1e-3 });
    expect(r.points.used).toBe(3);
    // The reading of exactly zero and the one of the other sign carry no current along the bias: at
    // the noise floor (whatever the floor is).
    expect(r.points.reasons).toEqual({
      'zero bias': 1,
      'at the noise floor': 2,
      'at compliance': 2,
    });
    expect(r.points.excluded).toBe(5);
  });
  it('missing required input names the setting', () => {
    expect(() => resolveInputs(getMechanism('fowler-nordheim'), {})).toThrowError(/thickness/);
  });
  it('every default applied to an input the model uses is listed as assumed, the flat band (0 V) too', () => {
    expect(resolveInputs(getMechanism('fowler-nordheim'), { thickness: 7e-9 }).assumed.sort()).toEqual(['flatBand', 'massRatio']);
    expect(resolveInputs(getMechanism('fowler-nordheim'), { thickness: 7e-9, flatBand: 0 }).assumed).toEqual(['massRatio']);
  });
});

describe('plausibility warnings', () => {
  it('name the value with its unit, and a dimensionless one without a dangling space', () => {
    const w: string[] = [];
    expect(inRange(w, 'ideality factor', 0.8796, 1, 5, '')).toBe(false);
    expect(inRange(w, 'barrier height', 61.3, 0.3, 6, 'eV')).toBe(false);
    expect(inRange(w, 'barrier height', 3.1, 0.3, 6, 'eV')).toBe(true);
    expect(w).toEqual(['ideality factor = 0.8796 is outside the plausible range 1–5', 'barrier height = 61.3 eV is outside the plausible range 0.3–6 eV']);
  });
});

describe('numbers in messages', () => {
  it('four significant figures; a million and up in powers of ten', () => {
    expect(fmt(3.14)).toBe('3.14');
    expect(fmt(1.234567)).toBe('1.235');
    expect(fmt(0.000123456)).toBe('0.0001235');
    expect(fmt(554600000)).toBe('5.546e8');
    expect(fmt(-2.5974e15)).toBe('-2.597e15');
    expect(fmt(999999)).toBe('1000000');
  });
});
