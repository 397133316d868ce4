/** `power-law`: I = k·V^m; ln|I| against ln|V|. Parameters exponent and prefactor (A at 1 V). */
import { param, type Extraction, type Mechanism } from '../mechanism.js';

export const powerLaw: Mechanism = {
  id: 'power-law',
  title: 'Power law, log–log',
  yKind: 'log',
  bias: 'magnitude',
  requires: [],
  uses: [],
  usesArea: false,
  ranked: false,
  current: true,
  axes: () => ({ x: { label: '|V|', unit: 'V', kind: 'log' }, y: { label: '|I|', unit: 'A', kind: 'log' } }),
  x: (v) => Math.log(v),
  lnOffset: () => 0,
  extract: ({ line }): Extraction => {
    const pre = Math.exp(line.intercept);
    return {
      parameters: {
        exponent: param(line.slope, line.slopeStdErr, '1'),
        prefactor: param(pre, pre * line.interceptStdErr, 'A'),
      },
      warnings: [],
      plausible: true,
      notes: [],
    };
  },
  forward: (v, p) => p.prefactor * v ** p.exponent,
};
