/**
 * Diode and solar-cell models.
 * Sources:
 *  - Dataset: the R.T.C. France silicon cell (57 mm diameter, 1000 W/m², 33 °C), 26 points, from
 *    T. Easwarakhanthan, J. Bottin, I. Bouhouch & C. Boutrit, Int. J. Solar Energy 4, 1–12 (1986),
 *    the standard benchmark of solar-cell parameter extraction (generator convention). The values
 *    were checked against a public copy (repository nightowl97/DEPV, data/RTC33D1000W.csv).
 *  - Published best fits of that cell (from memory; widely quoted in the parameter-extraction
 *    literature). With the implicit-residual objective, f(V, I_measured): single diode
 *    I_ph = 0.76078 A, I₀ = 0.32302 µA, n = 1.48118, R_s = 0.036377 Ω, R_sh = 53.7185 Ω,
 *    RMSE = 9.8602e-4 A; double diode RMSE = 9.8248e-4 A with the ideality factors bounded to [1, 2].
 *    With the true-current objective (explicit Lambert-W current): RMSE = 7.7301e-4 A,
 *    R_s = 0.0365469 Ω, R_sh = 52.8898 Ω.
 *  - Lambert W: W(1) = Ω = 0.5671432904097838 (omega constant), W(e) = 1, W(x·eˣ) = x (definition).
 *  - Cheung–Cheung synthetic check (Cheung & Cheung 1986 functions on a diode of our own, I₀ from
 *    A·A**·T²·exp(−qφ_B/kT) computed by hand): n = 1.10,
 *    φ_B = 0.70 eV, R_s = 10 Ω, A = 1e-3 cm², A** = 112 A cm⁻² K⁻², 300 K.
 *  - kT/q at 300 K = 25.8520 mV (computed from CODATA 2018).
 */
import { describe, expect, it } from 'vitest';
import { thermalVoltage } from '../../daemon/analysis/constants.js';
import { cheung, fitDiode, modelCurve, solarFigures } from '../../daemon/analysis/diode-fit.js';
import { diodeCurrentNewton, singleDiodeExplicit } from '../../daemon/analysis/diode-models.js';
import { lambertW0, lambertWExp } from '../../daemon/analysis/lambert-w.js';
import { seededNormal } from '../../daemon/analysis/random.js';

const RTC_V = [-0.2057, -0.1291, -0.0588, 0.0057, 0.0646, 0.1185, 0.1678, 0.2132, 0.2545, 0.2924, 0.3269, 0.3585, 0.3873, 0.4137, 0.4373, 0.459, 0.4784, 0.496, 0.5119, 0.5265, 0.5398, 0.5521, 0.5633, 0.5736, 0.5833, 0.59];
const RTC_I = [0.764, 0.762, 0.7605, 0.7605, 0.76, 0.759, 0.757, 0.757, 0.7555, 0.754, 0.7505, 0.7465, 0.7385, 0.728, 0.7065, 0.6755, 0.632, 0.573, 0.499, 0.413, 0.3165, 0.212, 0.1035, -0.01, -0.123, -0.21];
const T_RTC = 273.15 + 33;

describe('Lambert W', () => {
  it('known values and the defining identity, also through the overflow-safe log form', () => {
    expect(lambertW0(1)).toBeCloseTo(0.5671432904097838, 15);
    expect(lambertW0(Math.E)).toBeCloseTo(1, 15);
    expect(lambertW0(-1 / Math.E + 1e-12)).toBeCloseTo(-1, 5);
    for (const w of [-0.9, -0.3, 0.01, 0.5, 3, 40, 700]) expect(lambertW0(w * Math.exp(w)) / w).toBeCloseTo(1, 13);
    // W(e^L) for L far beyond the double range: w + ln w = L.
    for (const L of [1, 5, 100, 1e4, 1e8]) {
      const w = lambertWExp(L);
      expect((w + Math.log(w) - L) / L).toBeLessThan(1e-15);
    }
    expect(lambertWExp(Math.log(3))).toBeCloseTo(lambertW0(3), 15);
  });

  it('single-diode current: the explicit Lambert-W form equals the Newton solution of the implicit equation', () => {
    const c = { photocurrent: 0.76078, diodes: [{ i0: 3.2302e-7, n: 1.48118 }], seriesResistance: 0.036377, shuntResistance: 53.7185, vt: thermalVoltage(T_RTC) };
    for (const v of RTC_V) expect(Math.abs(singleDiodeExplicit(v, c) - diodeCurrentNewton(v, c))).toBeLessThan(1e-14);
    // A real module-sized argument: θ = exp(>1000) would overflow without the log form.
    const big = { ...c, shuntResistance: 1e6, seriesResistance: 1e-3 };
    expect(Number.isFinite(singleDiodeExplicit(0.7, big))).toBe(true);
    expect(Math.abs(singleDiodeExplicit(0.7, big) - diodeCurrentNewton(0.7, big))).toBeLessThan(1e-12);
  });
});

describe('RTC France cell (Easwarakhanthan et al. 1986)', () => {
  const data = { x: RTC_V, y: RTC_I };
  const req = { temperature: T_RTC, illuminated: true, convention: 'generator' as const };

  it('single-diode fit, implicit-residual objective: the published parameters and RMSE to their digits', () => {
    const r = fitDiode(data, 'single-diode', { ...req, objective: 'implicit' });
    const p = r.parameters;
    expect(r.rmseImplicit).toBeCloseTo(9.8602e-4, 8);
    expect(p.photocurrent.value).toBeCloseTo(0.76078, 5);
    expect(p.saturationCurrent.value * 1e6).toBeCloseTo(0.32302, 4);
    expect(p.idealityFactor.value).toBeCloseTo(1.48118, 4);
    expect(p.seriesResistance.value).toBeCloseTo(0.036377, 5);
    expect(p.shuntResistance.value).toBeCloseTo(53.7185, 3);
    for (const k of Object.keys(p)) expect(p[k].stdErr).toBeGreaterThan(0);
  });

  it('single-diode fit, true-current objective (the RMSE plumbline reports): published RMSE, R_s and R_sh', () => {
    const r = fitDiode(data, 'single-diode', req);
    expect(r.rmse).toBeCloseTo(7.7301e-4, 8);
    expect(r.parameters.seriesResistance.value).toBeCloseTo(0.0365469, 6);
    expect(r.parameters.shuntResistance.value).toBeCloseTo(52.8898, 3);
    // The true-current optimum has the smaller true-current RMSE, the larger implicit one.
    expect(r.rmseImplicit).toBeGreaterThan(9.8602e-4);
  });

  it('double-diode fit (n₁, n₂ in [1, 2]): the published implicit-residual RMSE; never worse than one diode', () => {
    const imp = fitDiode(data, 'double-diode', { ...req, objective: 'implicit' });
    expect(imp.rmseImplicit).toBeCloseTo(9.8248e-4, 7);
    const cur = fitDiode(data, 'double-diode', req);
    expect(cur.rmse).toBeLessThanOrEqual(7.7301e-4);
    for (const k of ['idealityFactor1', 'idealityFactor2']) {
      expect(cur.parameters[k].value).toBeGreaterThanOrEqual(1);
      expect(cur.parameters[k].value).toBeLessThanOrEqual(2);
    }
  });

  it('load convention (as an SMU records it) gives the same fit as the generator convention', () => {
    const load = fitDiode({ x: RTC_V, y: RTC_I.map((i) => -i) }, 'single-diode', { ...req, convention: 'load' });
    expect(load.rmse).toBeCloseTo(7.7301e-4, 8);
  });

  it('figures of merit from the measured curve (hand interpolation of the data)', () => {
    const s = solarFigures(data, { convention: 'generator', area: Math.PI * 0.0285 ** 2 });
    // I_sc between −0.0588 V and 0.0057 V (both 0.7605 A); V_oc between 0.5633 V and 0.5736 V.
    expect(s.figures.isc.value).toBeCloseTo(0.7605, 10);
    expect(s.figures.voc.value).toBeCloseTo(0.5633 + (0.0103 * 0.1035) / 0.1135, 10);
    // Largest measured V·I is 0.459 × 0.6755 = 0.3100545 W; the parabola's vertex lies a little above.
    expect(s.figures.pmax.value).toBeGreaterThanOrEqual(0.3100545);
    expect(s.figures.pmax.value).toBeLessThan(0.3100545 * 1.01);
    expect(s.figures.fillFactor.value).toBeCloseTo(s.figures.pmax.value / (s.figures.isc.value * s.figures.voc.value), 12);
    expect(s.figures.efficiency?.value).toBeCloseTo(s.figures.pmax.value / (1000 * Math.PI * 0.0285 ** 2), 12);
  });
});

describe('dark diode', () => {
  it('recovers a Shockley diode of known n, I₀, R_s and R_sh from noisy SMU-convention data', () => {
    const T = 300;
    const c = { photocurrent: 0, diodes: [{ i0: 1e-12, n: 1.3 }], seriesResistance: 2, shuntResistance: 1e7, vt: thermalVoltage(T) };
    const normal = seededNormal(5);
    const v: number[] = [];
    const i: number[] = [];
    for (let k = 0; k <= 80; k++) {
      const x = -0.2 + k * 0.0125;
      v.push(x);
      // Load convention: current into the device positive; 0.2 % noise plus a 1 pA floor.
      const il = -diodeCurrentNewton(x, c);
      i.push(il * (1 + 0.002 * normal()) + 1e-12 * normal());
    }
    const r = fitDiode({ x: v, y: i }, 'single-diode', { temperature: T });
    const p = r.parameters;
    expect(Math.abs(p.idealityFactor.value - 1.3)).toBeLessThan(3 * p.idealityFactor.stdErr + 1e-3);
    expect(p.saturationCurrent.value / 1e-12).toBeGreaterThan(0.9);
    expect(p.saturationCurrent.value / 1e-12).toBeLessThan(1.1);
    expect(p.seriesResistance.value).toBeCloseTo(2, 1);
    expect(p.shuntResistance.value / 1e7).toBeGreaterThan(0.5);
    expect(p.shuntResistance.value / 1e7).toBeLessThan(2);
    // The model curve passes through the data (relative error at high current).
    const m = modelCurve(r, [0.7]);
    expect(Math.abs(-m[0] / -diodeCurrentNewton(0.7, c) - 1)).toBeLessThan(0.01);
  });

  it('Cheung–Cheung reproduces R_s, n and φ_B of the physics-notes synthetic diode', () => {
    const T = 300;
    const vt = thermalVoltage(T);
    const area = 1e-3 * 1e-4; // m²
    const aStar = 112e4; // A m⁻² K⁻²
    const i0 = area * aStar * T * T * Math.exp(-0.7 / vt);
    expect(i0).toBeCloseTo(1.754e-8, 10); // by hand: A·A**·T²·exp(−φ_B/V_t) = 1.754e-8 A
    const cur: number[] = [];
    const volt: number[] = [];
    for (let k = 0; k <= 60; k++) {
      const I = 1e-4 * 10 ** (k / 30); // 1e-4 … 1e-2 A
      cur.push(I);
      volt.push(I * 10 + 1.1 * vt * Math.log(I / i0 + 1));
    }
    const r = cheung({ x: volt, y: cur }, { temperature: T, area, richardson: aStar });
    expect(r.parameters.seriesResistance.value).toBeCloseTo(10.0, 1); // function 1 on this diode gives 10.02 Ω (worked by hand)
    expect(r.parameters.idealityFactor.value).toBeCloseTo(1.1, 2); // 1.0999
    expect(r.parameters.barrierHeight.value).toBeCloseTo(0.7, 3); // 0.7000 eV
    expect(r.parameters.seriesResistanceH.value).toBeCloseTo(10, 2); // 10.000 Ω
  });
});
