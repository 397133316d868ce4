/**
 * `trap-assisted-tunneling`: tunnelling via traps φ_t below the band edge (Chiu, Adv. Mater. Sci.
 * Eng. 2014, 578168):  J = J₀·exp(−b·√m_r·φ_t^{3/2}/E), b the second Fowler–Nordheim constant.
 * ln J against 1/E has slope −b√m_r φ_t^{3/2}.
 */
import { FN_B_EV32_V_PER_M } from '../constants.js';
import { currentUnit, field, inRange, param, type Extraction, type Mechanism } from '../mechanism.js';
import { barrierFromTunnellingSlope } from './fowler-nordheim.js';

export function trapAssistedTunnelling(e: number, prefactor: number, trapEnergy: number, massRatio: number): number {
  return prefactor * Math.exp((-FN_B_EV32_V_PER_M * Math.sqrt(massRatio) * trapEnergy ** 1.5) / e);
}

export const trapAssistedTunnelingMechanism: Mechanism = {
  id: 'trap-assisted-tunneling',
  title: 'Trap-assisted tunnelling, ln J against 1/E',
  yKind: 'log',
  bias: 'magnitude',
  requires: ['thickness'],
  uses: ['massRatio', 'area', 'flatBand'],
  usesArea: true,
  ranked: true,
  current: true,
  slopeSign: -1,
  leakage: true,
  superOhmic: true,
  axes: (inp) => ({
    x: { label: '1/E', unit: 'm/V', kind: 'linear' },
    y: { label: 'J', unit: currentUnit(inp), kind: 'log' },
  }),
  x: (v, inp) => 1 / field(v, inp),
  lnOffset: () => 0,
  extract: ({ line, inputs }): Extraction => {
    const warnings: string[] = [];
    if (!(line.slope < 0)) {
      warnings.push('ln J does not fall with 1/E (slope ≥ 0): not trap-assisted tunnelling');
      return { parameters: {}, warnings, plausible: false, notes: [], failed: [...warnings] };
    }
    const t = barrierFromTunnellingSlope(line.slope, line.slopeStdErr, inputs.massRatio);
    const failed: string[] = [];
    const plausible = inRange(warnings, 'trap energy', t.value, 0.05, 5, 'eV', failed);
    return { parameters: { trapEnergy: param(t.value, t.stdErr, 'eV') }, warnings, plausible, notes: [], failed };
  },
  forward: (v, p, inp) => trapAssistedTunnelling(field(v, inp), p.prefactor, p.trapEnergy, inp.massRatio),
};
