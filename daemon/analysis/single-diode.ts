/**
 * Single-diode model of a solar cell or a diode with series and shunt resistance (Sze & Ng; the
 * implicit form of Jain & Kapoor 2004), generator convention (I > 0 delivered):
 *   I = I_ph − I₀·(exp((V + I·R_s)/(n·V_t)) − 1) − (V + I·R_s)/R_sh.
 * Evaluated explicitly through the Lambert W function (diode-models.ts), the same code the fits use.
 */
import { thermalVoltage } from './constants.js';
import { singleDiodeExplicit } from './diode-models.js';

export interface SingleDiodeParams {
  readonly photocurrent: number;
  readonly saturationCurrent: number;
  readonly idealityFactor: number;
  readonly seriesResistance: number;
  readonly shuntResistance: number;
  readonly temperature: number;
}

/** Terminal current (A, generator convention) at terminal voltage v (V): the explicit Lambert-W form. */
export function singleDiodeCurrent(v: number, p: SingleDiodeParams): number {
  return singleDiodeExplicit(v, {
    photocurrent: p.photocurrent,
    diodes: [{ i0: p.saturationCurrent, n: p.idealityFactor }],
    seriesResistance: p.seriesResistance,
    shuntResistance: p.shuntResistance,
    vt: thermalVoltage(p.temperature),
  });
}
