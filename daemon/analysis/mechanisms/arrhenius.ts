/**
 * `arrhenius`: rate = A·exp(−E_a/(k_B T)). The x column is the temperature in K; ln(rate) against
 * 1/T has slope −E_a/k_B, so E_a = −k_B·slope (k_B in eV/K, CODATA 2018).
 */
import { BOLTZMANN_EV_PER_K } from '../constants.js';
import { inRange, param, type Extraction, type Mechanism } from '../mechanism.js';

export const arrhenius: Mechanism = {
  id: 'arrhenius',
  title: 'Arrhenius, ln(rate) against 1/T',
  yKind: 'log',
  bias: 'temperature',
  requires: [],
  uses: [],
  usesArea: false,
  ranked: false,
  axes: () => ({ x: { label: '1/T', unit: '1/K', kind: 'linear' }, y: { label: 'rate', unit: '', kind: 'log' } }),
  x: (t) => 1 / t,
  lnOffset: () => 0,
  extract: ({ line }): Extraction => {
    const warnings: string[] = [];
    const ea = -BOLTZMANN_EV_PER_K * line.slope;
    const pre = Math.exp(line.intercept);
    const failed: string[] = [];
    let plausible = true;
    if (line.slope >= 0) {
      const text = 'the rate does not rise with temperature (slope ≥ 0): no thermal activation';
      warnings.push(text);
      failed.push(text);
      plausible = false;
    } else {
      plausible = inRange(warnings, 'activation energy', ea, 0.001, 5, 'eV', failed);
    }
    return {
      parameters: {
        activationEnergy: param(ea, BOLTZMANN_EV_PER_K * line.slopeStdErr, 'eV'),
        prefactor: param(pre, pre * line.interceptStdErr, 'same unit as y'),
      },
      warnings,
      plausible,
      failed,
      notes: [],
    };
  },
  forward: (t, p) => p.prefactor * Math.exp(-p.activationEnergy / (BOLTZMANN_EV_PER_K * t)),
};
