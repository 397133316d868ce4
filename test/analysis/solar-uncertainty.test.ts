/**
 * Uncertainties of the solar figures of merit: stated errors must cover the truth about as often
 * as they claim. Curves come from the single-diode model evaluated with the Lambert W function
 * (Jain & Kapoor 2004) with noise as a source-measure unit states it (± % of reading + an offset,
 * common practice); the truth is the noise-free curve's I_sc, V_oc and P_max. For a normal
 * estimate, |error| < σ about 68 % of the time and < 2σ about 95 %; with the few degrees of freedom
 * of a local fit the σ is itself estimated, so a little less (Student's t with 4 dof: 63 % and
 * 88 %). Near V_oc the noise of an SMU grows with the current, so one σ pooled over the local fit
 * is on the safe side there (about 80 % within 1σ in this setting).
 */
import { describe, expect, it } from 'vitest';
import { solarFiguresWithUncertainty } from '../../daemon/analysis/diode-fit.js';
import { diodeCurrent } from '../../daemon/analysis/diode-models.js';
import { thermalVoltage } from '../../daemon/analysis/constants.js';
import { seededNormal } from '../../daemon/analysis/random.js';

const cell = { photocurrent: 0.14, diodes: [{ i0: 2e-10, n: 1.3 }], seriesResistance: 0.05, shuntResistance: 200, vt: thermalVoltage(298.15) };

function truth(): { isc: number; voc: number; pmax: number } {
  const isc = diodeCurrent(0, cell);
  let lo = 0;
  let hi = 1;
  for (let k = 0; k < 80; k++) {
    const m = (lo + hi) / 2;
    if (diodeCurrent(m, cell) > 0) lo = m;
    else hi = m;
  }
  const voc = (lo + hi) / 2;
  // Golden-section search of P(V) = V·I(V) on [0, V_oc].
  let a = 0;
  let b = voc;
  const r = (Math.sqrt(5) - 1) / 2;
  for (let k = 0; k < 100; k++) {
    const x1 = b - r * (b - a);
    const x2 = a + r * (b - a);
    if (x1 * diodeCurrent(x1, cell) > x2 * diodeCurrent(x2, cell)) b = x2;
    else a = x1;
  }
  const vm = (a + b) / 2;
  return { isc, voc, pmax: vm * diodeCurrent(vm, cell) };
}

describe('solar figures of merit with uncertainties', () => {
  const t = truth();
  const v = Array.from({ length: 83 }, (_, k) => -0.1 + 0.01 * k);

  it('the noise-free curve gives the true values', () => {
    const r = solarFiguresWithUncertainty({ x: v, y: v.map((x) => -diodeCurrent(x, cell)) }, { area: 4e-4 });
    expect(r.figures.isc.value / t.isc).toBeCloseTo(1, 6);
    expect(r.figures.voc.value / t.voc).toBeCloseTo(1, 5);
    expect(r.figures.pmax.value / t.pmax).toBeCloseTo(1, 4);
    // J_sc per area, η = P_max / (1000 W/m² · A).
    expect(r.jsc?.value).toBeCloseTo(t.isc / 4e-4, 3);
    expect((r.figures.efficiency?.value ?? 0) / (t.pmax / (1000 * 4e-4))).toBeCloseTo(1, 4);
    expect(r.warnings.filter((w) => w.includes('apart'))).toEqual([]);
  });

  it('a coarse sweep near V_oc is said to bias the local fits', () => {
    const coarse = Array.from({ length: 42 }, (_, k) => -0.1 + 0.02 * k);
    const r = solarFiguresWithUncertainty({ x: coarse, y: coarse.map((x) => -diodeCurrent(x, cell)) });
    expect(r.warnings.join(' ')).toMatch(/near V_oc are about 20 mV apart/);
  });

  it('the stated standard errors cover the truth as often as they claim', () => {
    const n = 400;
    const inside = { isc: [0, 0], voc: [0, 0], pmax: [0, 0] };
    const normal = seededNormal(11);
    for (let trial = 0; trial < n; trial++) {
      const y = v.map((x) => {
        const i = diodeCurrent(x, cell);
        // ± (0.1 % of reading + 20 µA), one standard deviation.
        return -(i + normal() * (1e-3 * Math.abs(i) + 2e-5));
      });
      const r = solarFiguresWithUncertainty({ x: v, y });
      for (const key of ['isc', 'voc', 'pmax'] as const) {
        const f = r.figures[key];
        const z = Math.abs(f.value - t[key]) / f.stdErr;
        if (z < 1) inside[key][0]++;
        if (z < 2) inside[key][1]++;
      }
    }
    for (const key of ['isc', 'voc', 'pmax'] as const) {
      const one = inside[key][0] / n;
      const two = inside[key][1] / n;
      expect(one, `${key}: ${(100 * one).toFixed(1)} % within 1σ`).toBeGreaterThan(0.5);
      expect(one, `${key}: ${(100 * one).toFixed(1)} % within 1σ`).toBeLessThan(0.9);
      expect(two, `${key}: ${(100 * two).toFixed(1)} % within 2σ`).toBeGreaterThan(0.84);
    }
  });
});
