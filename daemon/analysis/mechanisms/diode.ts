/**
 * `diode`: the Shockley diode with ideality factor (Sze & Ng, Physics of Semiconductor Devices),
 *   I = I₀·(exp(V/(n·V_t)) − 1),  V_t = kT/q.
 * ln I against V where V ≫ V_t and the I·R_s drop is small: slope 1/(n V_t), intercept ln I₀.
 * n is tied to the temperature used: only the product n·T is measured.
 */
import { thermalVoltage } from '../constants.js';
import { fmt, param, type Extraction, type Mechanism } from '../mechanism.js';

export function shockley(v: number, saturationCurrent: number, idealityFactor: number, temperature: number): number {
  return saturationCurrent * Math.expm1(v / (idealityFactor * thermalVoltage(temperature)));
}

/**
 * What an ideality factor says of a fit: below 1 no diode can have it (Sze & Ng 2007, ch. 2:
 * diffusion current n = 1, recombination in the depletion region n = 2); far above 2 the
 * exponential is not a junction's; between 2.2 and 4 a warning (series resistance, tunnelling, a
 * window past the straight part) that leaves the fit plausible. 0.95 and 4 are our own margins.
 */
export function idealityVerdict(n: number, temperature: number, name = 'ideality factor'): { plausible: boolean; warning?: string } {
  if (n < 0.95) return { plausible: false, warning: `${name} ${fmt(n)} is below 1, which a diode at ${fmt(temperature)} K cannot have` };
  if (n > 4) return { plausible: false, warning: `${name} ${fmt(n)} is far above 2: not a diode's exponential (a film, leakage, or tunnelling)` };
  if (n > 2.2) return { plausible: true, warning: `${name} ${fmt(n)} is above 2: series resistance, tunnelling or a window past the straight part` };
  return { plausible: true };
}

export const diodeMechanism: Mechanism = {
  id: 'diode',
  title: 'Diode semilog, ln I against V',
  yKind: 'log',
  bias: 'magnitude',
  requires: [],
  uses: ['temperature'],
  usesArea: false,
  ranked: true,
  current: true,
  slopeSign: 1,
  forwardOnly: true,
  leakage: true,
  superOhmic: true,
  series: true,
  axes: () => ({ x: { label: 'V', unit: 'V', kind: 'linear' }, y: { label: 'I', unit: 'A', kind: 'log' } }),
  x: (v) => v,
  lnOffset: () => 0,
  extract: ({ line, inputs, used, terms }): Extraction => {
    const warnings: string[] = [];
    const notes: string[] = [];
    if (!(line.slope > 0)) {
      warnings.push('ln I does not rise with V (slope ≤ 0): not a forward-biased diode');
      return { parameters: {}, warnings, plausible: false, notes, failed: [...warnings] };
    }
    const vt = thermalVoltage(inputs.temperature);
    const n = 1 / (vt * line.slope);
    const i0 = Math.exp(line.intercept);
    const verdict = idealityVerdict(n, inputs.temperature);
    const plausible = verdict.plausible;
    if (verdict.warning) warnings.push(verdict.warning);
    else notes.push(`ideality factor ${fmt(n)} at ${fmt(inputs.temperature)} K`);
    let minV = Infinity;
    for (let i = 0; i < used.v.length; i++) minV = Math.min(minV, used.v[i]);
    // With the series-resistance model the exact Shockley current (its "−1" included) was fitted.
    if (minV < 3 * vt && !terms?.series) warnings.push(`the window starts below 3kT/q (${fmt(3 * vt)} V), where the "−1" term bends the semilog line`);
    return {
      parameters: {
        idealityFactor: param(n, n * Math.abs(line.slopeStdErr / line.slope), '1'),
        saturationCurrent: param(i0, i0 * line.interceptStdErr, 'A'),
      },
      warnings,
      plausible,
      notes,
      failed: plausible || !verdict.warning ? [] : [verdict.warning],
    };
  },
  forward: (v, p, inp) => shockley(v, p.saturationCurrent, p.idealityFactor, inp.temperature),
};
