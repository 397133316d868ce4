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

const RTC_V = [
  -0.2057, -0.1291, -0.0588, 0.0057, 0.0646, 0.1185, 0.1678, 0.2132, 0.2545, 0.2924, 0.3269, 0.3585, 0.3873, 0.4137, 0.4373, 0.459, 0.4784, 0.496, 0.5119,
  0.5265, 0.5398, 0.5521, 0.5633, 0.5736, 0.5833, 0.59,
];
const RTC_I = [
  0.764, 0.762, 0.7605, 0.7605, 0.76, 0.759, 0.757, 0.757, 0.7555, 0.754, 0.7505, 0.7465, 0.7385, 0.728, 0.7065, 0.6755, 0.632, 0.573, 0.499, 0.413, 0.3165,
  0.212, 0.1035, -0.01, -0.123, -0.21,
];
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
      expect((w + Math.log(w) - L) / L).toBeLessThan(1e-13);
    }
    expect(lambertWExp(Math.log(3))).toBeCloseTo(lambertW0(3), 15);
  });

  it('single-diode current: the explicit Lambert-W form equals the Newton solution of the implicit equation', () => {
    const c = {
      photocurrent: 0.76078,
      diodes: [{ i0: 3.2302e-7, n: 1.48118 }],
      seriesResistance: 0.036377,
      shuntResistance: 53.7185,
      vt: thermalVoltage(T_RTC),
    };
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

describe('the model current for any number of diodes (bracketed Newton on the junction voltage)', () => {
  /**
   * How far the current i is from solving the model equation, as a current: |f(V, I)| / |∂f/∂I|
   * (one Newton step), against the largest current in the circuit's branches.
   */
  function equation(v: number, i: number, c: Parameters<typeof diodeCurrentNewton>[1]) {
    const rs = c.seriesResistance;
    const u = v + i * rs;
    let f = c.photocurrent - u / c.shuntResistance - i;
    let df = -1 - rs / c.shuntResistance;
    let scale = Math.max(Math.abs(c.photocurrent), Math.abs(u / c.shuntResistance), Math.abs(i));
    for (const d of c.diodes) {
      const e = Math.exp(u / (d.n * c.vt));
      f -= d.i0 * (e - 1);
      df -= (d.i0 * e * rs) / (d.n * c.vt);
      scale = Math.max(scale, Math.abs(d.i0 * (e - 1)));
    }
    return { f: Math.abs(f / df), scale };
  }

  it('solves the model equation to rounding over random circuits, from no guess and from poor ones, and equals the Lambert-W current for one diode', () => {
    const normal = seededNormal(11);
    const uniform = (lo: number, hi: number) => lo + (hi - lo) * (0.5 + 0.5 * Math.tanh(normal()));
    let worstResidual = 0;
    let worstExplicit = 0;
    for (let trial = 0; trial < 3000; trial++) {
      const nd = trial % 2 === 0 ? 1 : 2;
      const diodes = Array.from({ length: nd }, () => ({ i0: 10 ** uniform(-15, -5), n: uniform(0.8, 3) }));
      const c = {
        photocurrent: trial % 3 === 0 ? 0 : uniform(0, 1),
        diodes,
        seriesResistance: 10 ** uniform(-6, 3),
        shuntResistance: 10 ** uniform(0, 12),
        vt: thermalVoltage(uniform(200, 400)),
      };
      const v = uniform(-1, 1.2);
      for (const guess of [undefined, -1, 1, c.photocurrent]) {
        const i = diodeCurrentNewton(v, c, guess);
        const { f, scale } = equation(v, i, c);
        worstResidual = Math.max(worstResidual, Math.abs(f) / scale);
        if (nd === 1) {
          const x = singleDiodeExplicit(v, c);
          if (Number.isFinite(x)) worstExplicit = Math.max(worstExplicit, Math.abs(i - x) / scale);
        }
      }
    }
    expect(worstResidual, `largest distance from the root, relative to the largest branch current: ${worstResidual}`).toBeLessThan(1e-13);
    expect(worstExplicit, `largest difference from the Lambert-W current, relative to the largest branch current: ${worstExplicit}`).toBeLessThan(1e-12);
  });
});

describe('long curves and cells of one or two diodes (invented cells, 2 µA noise)', () => {
  const T = 300;
  /** An illuminated cell swept from −0.1 to 0.65 V in n points, as an SMU records it (load convention). */
  function cell(n: number, diodes: { i0: number; n: number }[], seed: number) {
    const c = { photocurrent: 0.035, diodes, seriesResistance: 0.5, shuntResistance: 1500, vt: thermalVoltage(T) };
    const normal = seededNormal(seed);
    const x = new Float64Array(n);
    const y = new Float64Array(n);
    for (let k = 0; k < n; k++) {
      x[k] = -0.1 + (0.75 * k) / (n - 1);
      y[k] = -(diodeCurrentNewton(x[k], c) + 2e-6 * normal());
    }
    return { x, y };
  }
  const req = { temperature: T, illuminated: true };

  it('130,000 points (past the old stack limit) give the parameters of a 1,300-point sweep of the same cell, within their standard errors', () => {
    const one = [{ i0: 3e-10, n: 1.3 }];
    const big = fitDiode(cell(130_000, one, 3), 'single-diode', req);
    const small = fitDiode(cell(1_300, one, 4), 'single-diode', req);
    expect(big.points.used).toBe(130_000);
    for (const k of Object.keys(small.parameters)) {
      const a = big.parameters[k];
      const b = small.parameters[k];
      expect(Math.abs(a.value - b.value), `${k}: ${a.value} ± ${a.stdErr} against ${b.value} ± ${b.stdErr}`).toBeLessThan(3 * Math.hypot(a.stdErr, b.stdErr));
      expect(a.stdErr, k).toBeLessThan(b.stdErr); // a hundred times the points: about a tenth of the error
    }
    expect(big.rmse).toBeCloseTo(2e-6, 7);
  });

  it('a one-diode cell fitted with two diodes: never worse than one diode, and the second diode reported as undetermined', () => {
    const data = cell(1000, [{ i0: 3e-10, n: 1.3 }], 5);
    const one = fitDiode(data, 'single-diode', req);
    const two = fitDiode(data, 'double-diode', req);
    expect(two.rmse as number).toBeLessThanOrEqual((one.rmse as number) * (1 + 1e-6));
    expect(two.warnings.join('\n')).toMatch(/saturationCurrent[12]: (standard error .* is more than half the value|no standard error)|ended on its bound/);
    expect(two.plausible).toBe(false);
    expect(one.plausible).toBe(true);
    // The two diodes together carry the one diode's current at the maximum-power bias.
    const p = two.parameters;
    const vt = thermalVoltage(T);
    const at = 0.5 + 0.5 * 0.0305;
    const sum =
      p.saturationCurrent1.value * Math.exp(at / (p.idealityFactor1.value * vt)) + p.saturationCurrent2.value * Math.exp(at / (p.idealityFactor2.value * vt));
    const single = one.parameters.saturationCurrent.value * Math.exp(at / (one.parameters.idealityFactor.value * vt));
    expect(Math.abs(sum / single - 1)).toBeLessThan(0.01);
  });

  it('a two-diode cell (diffusion n = 1.05 and recombination n = 1.9): both diodes back within 3σ', () => {
    const truth = [
      { i0: 2e-11, n: 1.05 },
      { i0: 5e-8, n: 1.9 },
    ];
    const r = fitDiode(cell(1000, truth, 6), 'double-diode', req);
    const p = r.parameters;
    const within = (k: string, x: number) =>
      expect(Math.abs(p[k].value - x), `${k} = ${p[k].value} ± ${p[k].stdErr} (true ${x})`).toBeLessThan(3 * p[k].stdErr);
    within('idealityFactor1', 1.05);
    within('idealityFactor2', 1.9);
    within('saturationCurrent1', 2e-11);
    within('saturationCurrent2', 5e-8);
    within('seriesResistance', 0.5);
    expect(r.rmse).toBeCloseTo(2e-6, 7);
  });
});

describe('dark sweeps as they come off the instrument (single- and double-diode fits)', () => {
  // Truth: the Shockley diode with ideality factor, series and shunt resistance (Shockley 1949;
  // Sze & Ng 2007, eq. 2.84 with R_s and R_sh), solved by the project's forward model
  // (diodeCurrentNewton), with a 30 fA floor and 0.2 % relative noise, as an SMU records it (load
  // convention), the current limited at 10 mA where the instrument clips it: an invented device.
  const T = 300;
  const truth = { i0: 1e-12, n: 1.3, rs: 20, rsh: 1e8 };
  function sweep(from: number, to: number, step: number, seed: number, diodes = [{ i0: truth.i0, n: truth.n }]) {
    const c = { photocurrent: 0, diodes, seriesResistance: truth.rs, shuntResistance: truth.rsh, vt: thermalVoltage(T) };
    const normal = seededNormal(seed);
    const x: number[] = [];
    const y: number[] = [];
    for (let k = 0; from + k * step <= to + 1e-9; k++) {
      const v = Math.round((from + k * step) * 1e4) / 1e4;
      const i = -diodeCurrentNewton(v, c);
      x.push(v);
      y.push(Math.min(1e-2, i + 3e-14 * normal() + 2e-3 * Math.abs(i) * normal()));
    }
    return { x, y };
  }
  const within = (r: ReturnType<typeof fitDiode>, k: string, x: number, z = 3) =>
    expect(Math.abs(r.parameters[k].value - x), `${k} = ${r.parameters[k].value} ± ${r.parameters[k].stdErr} (true ${x})`).toBeLessThan(
      z * r.parameters[k].stdErr,
    );

  it('readings clipped at compliance that no column marks are found by the sweep rule the semilog model uses, and left out', () => {
    for (const seed of [1, 2, 3]) {
      const data = sweep(-2, 1, 0.02, seed);
      const clipped = data.y.filter((i) => i === 1e-2).length;
      expect(clipped).toBeGreaterThanOrEqual(2);
      const r = fitDiode(data, 'single-diode', { temperature: T });
      expect(r.points.reasons['at compliance']).toBe(clipped);
      expect(r.notes.join('\n')).toMatch(/pinned at 0\.01000 A/);
      expect(r.plausible).toBe(true);
      // Shockley 1949 / Sze & Ng 2007 diode of known parameters: every one back within 3σ.
      within(r, 'seriesResistance', truth.rs);
      within(r, 'idealityFactor', truth.n);
      within(r, 'saturationCurrent', truth.i0);
      const two = fitDiode(data, 'double-diode', { temperature: T });
      expect(two.points.reasons['at compliance']).toBe(clipped);
    }
  });

  it('a forward-only sweep (0 to 1 V in 20 mV steps, the usual dark measurement) is fitted, the truth within 3σ', () => {
    for (const seed of [4, 5]) {
      const r = fitDiode(sweep(0, 1, 0.02, seed), 'single-diode', { temperature: T });
      expect(r.plausible).toBe(true);
      within(r, 'seriesResistance', truth.rs);
      within(r, 'idealityFactor', truth.n);
      within(r, 'saturationCurrent', truth.i0);
    }
    // Beginning above the shunt's reach (0.2 V on): the shunt is only a bound, said so, and the fit still stands.
    const r = fitDiode(sweep(0.2, 1, 0.02, 6), 'single-diode', { temperature: T });
    expect(r.plausible).toBe(true);
    within(r, 'seriesResistance', truth.rs);
    within(r, 'idealityFactor', truth.n);
  });

  it('a wrong answer is never silent: two diodes fitted with one, a device wired backwards', () => {
    // Diffusion (n ≈ 1) and recombination (n ≈ 2) diodes (Sze & Ng 2007, sec. 2.4): one exponential cannot follow them.
    const both = sweep(0, 1, 0.01, 7, [
      { i0: 1e-14, n: 1.05 },
      { i0: 3e-10, n: 1.85 },
    ]);
    const one = fitDiode(both, 'single-diode', { temperature: T });
    expect(one.plausible).toBe(false);
    expect(one.warnings.join('\n')).toMatch(/residuals are .* the noise/);
    const two = fitDiode(both, 'double-diode', { temperature: T });
    expect(two.plausible, two.warnings.join('\n')).toBe(true);
    const reversed = sweep(-2, 1, 0.02, 8);
    const r = fitDiode({ x: reversed.x.map((v) => -v), y: reversed.y.map((i) => -i) }, 'single-diode', { temperature: T });
    expect(r.plausible).toBe(false);
    expect(r.warnings.join('\n')).toMatch(/larger current flows at negative bias/);
  });
});
