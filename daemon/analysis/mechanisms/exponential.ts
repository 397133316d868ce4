/** `exponential`: I = I₀·exp(rate·V); ln|I| against V. Parameters rate (1/V) and prefactor (A). */
import { param, type Extraction, type Mechanism } from '../mechanism.js';

export const exponential: Mechanism = {
  id: 'exponential',
  title: 'Exponential, ln|y| against x',
  yKind: 'log',
  bias: 'raw',
  requires: [],
  uses: [],
  usesArea: false,
  ranked: false,
  current: true,
  axes: () => ({ x: { label: 'V', unit: 'V', kind: 'linear' }, y: { label: '|I|', unit: 'A', kind: 'log' } }),
  x: (v) => v,
  lnOffset: () => 0,
  extract: ({ line }): Extraction => {
    const pre = Math.exp(line.intercept);
    return {
      parameters: {
        rate: param(line.slope, line.slopeStdErr, '1/V'),
        prefactor: param(pre, pre * line.interceptStdErr, 'A'),
      },
      warnings: [],
      plausible: true,
      notes: [],
    };
  },
  forward: (v, p) => p.prefactor * Math.exp(p.rate * v),
};
