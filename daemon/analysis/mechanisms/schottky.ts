/**
 * `schottky`: thermionic emission over a barrier lowered by the image force (Sze & Ng, Physics of
 * Semiconductor Devices, 3rd ed.):  J = A*·T²·exp(−q(φ_B − √(qE/(4π ε₀ ε_r)))/(kT)).
 * ln(J/T²) against √E: slope (q/kT)√(q/(4π ε₀ ε_r)) gives ε_r; intercept c = ln A* − qφ_B/kT gives
 * φ_B = (kT/q)(ln A* − c), which needs J as a density (an area) and A* in the same units.
 */
import { BOLTZMANN_J_PER_K, ELEMENTARY_CHARGE_C as Q } from '../constants.js';
import { currentUnit, field, inRange, param, type Extraction, type Mechanism, type ParameterValue } from '../mechanism.js';
import { rootFieldPermittivity, rootFieldSlope } from './poole-frenkel.js';

export function schottkyEmission(e: number, barrierHeight: number, permittivity: number, temperature: number, richardson: number): number {
  const kt = (BOLTZMANN_J_PER_K * temperature) / Q; // eV
  return richardson * temperature * temperature * Math.exp(-barrierHeight / kt + rootFieldSlope(permittivity, temperature, 4) * Math.sqrt(e));
}

export const schottkyMechanism: Mechanism = {
  id: 'schottky',
  title: 'Schottky emission, ln(J/T²) against √E',
  yKind: 'log',
  bias: 'magnitude',
  requires: ['thickness'],
  uses: ['area', 'temperature', 'richardson', 'refractiveIndex', 'permittivity', 'flatBand'],
  usesArea: true,
  ranked: true,
  current: true,
  slopeSign: 1,
  leakage: true,
  superOhmic: true,
  axes: (inp) => ({
    x: { label: '√E', unit: '(V/m)^0.5', kind: 'linear' },
    y: { label: 'J/T²', unit: `${currentUnit(inp)}/K^2`, kind: 'log' },
  }),
  x: (v, inp) => Math.sqrt(field(v, inp)),
  lnOffset: (_v, inp) => 2 * Math.log(inp.temperature),
  extract: ({ line, inputs }): Extraction => {
    const warnings: string[] = [];
    const notes: string[] = [];
    if (!(line.slope > 0)) {
      warnings.push('ln(J/T²) does not rise with √E (slope ≤ 0): not Schottky emission');
      return { parameters: {}, warnings, plausible: false, notes, failed: [...warnings] };
    }
    const failed: string[] = [];
    const parameters: Record<string, ParameterValue> = {};
    const checked = rootFieldPermittivity(line, inputs, 4, { name: 'Poole–Frenkel emission', factor: 4 }, { warnings, notes, failed });
    parameters.relativePermittivity = param(checked.eps.value, checked.eps.stdErr, '1');
    let plausible = checked.plausible;
    if (inputs.area !== undefined) {
      const kt = (BOLTZMANN_J_PER_K * inputs.temperature) / Q;
      const phi = kt * (Math.log(inputs.richardson) - line.intercept);
      parameters.barrierHeight = param(phi, kt * line.interceptStdErr, 'eV');
      plausible = inRange(warnings, 'barrier height', phi, 0.05, 5, 'eV', failed) && plausible;
    } else {
      warnings.push('barrier height needs the area (J as a current density)');
    }
    return { parameters, warnings, plausible, notes, failed };
  },
  forward: (v, p, inp) => schottkyEmission(field(v, inp), p.barrierHeight, p.relativePermittivity, inp.temperature, inp.richardson),
};
