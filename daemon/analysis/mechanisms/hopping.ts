/**
 * `hopping`: thermally assisted hopping between sites a apart (Chiu, Adv. Mater. Sci. Eng. 2014,
 * 578168):  J = J₀·exp(q·a·E/(kT)) at high field. ln J against E has slope qa/(kT), so
 * a = kT·slope/q.
 */
import { BOLTZMANN_J_PER_K, ELEMENTARY_CHARGE_C as Q } from '../constants.js';
import { currentUnit, field, inRange, param, type Extraction, type Mechanism } from '../mechanism.js';

export function hopping(e: number, prefactor: number, distance: number, temperature: number): number {
  return prefactor * Math.exp((Q * distance * e) / (BOLTZMANN_J_PER_K * temperature));
}

export const hoppingMechanism: Mechanism = {
  id: 'hopping',
  title: 'Hopping conduction, ln J against E',
  yKind: 'log',
  bias: 'magnitude',
  requires: ['thickness'],
  uses: ['temperature', 'area', 'flatBand'],
  usesArea: true,
  ranked: true,
  current: true,
  slopeSign: 1,
  leakage: true,
  superOhmic: true,
  axes: (inp) => ({
    x: { label: 'E', unit: 'V/m', kind: 'linear' },
    y: { label: 'J', unit: currentUnit(inp), kind: 'log' },
  }),
  x: (v, inp) => field(v, inp),
  lnOffset: () => 0,
  extract: ({ line, inputs }): Extraction => {
    const warnings: string[] = [];
    if (!(line.slope > 0)) {
      warnings.push('ln J does not rise with E (slope ≤ 0): not hopping conduction');
      return { parameters: {}, warnings, plausible: false, notes: [], failed: [...warnings] };
    }
    const k = (BOLTZMANN_J_PER_K * inputs.temperature) / Q;
    const a = k * line.slope;
    const failed: string[] = [];
    const plausible = inRange(warnings, 'hopping distance', a * 1e9, 0.05, 20, 'nm', failed);
    return { parameters: { hoppingDistance: param(a, k * line.slopeStdErr, 'm') }, warnings, plausible, notes: [], failed };
  },
  forward: (v, p, inp) => hopping(field(v, inp), p.prefactor, p.hoppingDistance, inp.temperature),
};
