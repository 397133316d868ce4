/**
 * Single-diode model of a solar cell or a diode with series and shunt resistance (Sze & Ng; the
 * implicit form as in the physics reference §7), generator convention (I > 0 delivered):
 *   I = I_ph − I₀·(exp((V + I·R_s)/(n·V_t)) − 1) − (V + I·R_s)/R_sh.
 * Solved for I at each V by a damped Newton iteration started from I_ph (converges in < 10 steps).
 * The explicit Lambert-W form and the fits belong to the diode/solar-cell work that builds on this.
 */
import { thermalVoltage } from './constants.js';

export interface SingleDiodeParams {
  readonly photocurrent: number;
  readonly saturationCurrent: number;
  readonly idealityFactor: number;
  readonly seriesResistance: number;
  readonly shuntResistance: number;
  readonly temperature: number;
}

/** Terminal current (A, generator convention) at terminal voltage v (V). */
export function singleDiodeCurrent(v: number, p: SingleDiodeParams): number {
  const nvt = p.idealityFactor * thermalVoltage(p.temperature);
  const rs = p.seriesResistance;
  let i = p.photocurrent;
  for (let k = 0; k < 100; k++) {
    const arg = Math.min((v + i * rs) / nvt, 700);
    const e = Math.exp(arg);
    const f = p.photocurrent - p.saturationCurrent * (e - 1) - (v + i * rs) / p.shuntResistance - i;
    const df = (-p.saturationCurrent * e * rs) / nvt - rs / p.shuntResistance - 1;
    let step = f / df;
    // Damp steps that would jump far past the exponential's knee.
    if (Math.abs(step * rs) > 2 * nvt && rs > 0) step = Math.sign(step) * (2 * nvt) / rs;
    i -= step;
    if (Math.abs(step) <= 1e-15 + 1e-12 * Math.abs(i)) break;
  }
  return i;
}
