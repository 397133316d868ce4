/**
 * `ohmic`: I = V/R, fitted as I against V with a free offset. With area A and thickness d the
 * conductivity is σ = d/(R·A) (J = σE). Forward model J = σE, or I = V/R without geometry.
 */
import { param, type Mechanism } from '../mechanism.js';

export const ohmic: Mechanism = {
  id: 'ohmic',
  title: 'Ohmic conduction, I against V',
  yKind: 'linear',
  bias: 'magnitude',
  requires: [],
  uses: ['area', 'thickness'],
  usesArea: false,
  ranked: true,
  current: true,
  slopeSign: 1,
  axes: () => ({ x: { label: '|V|', unit: 'V', kind: 'linear' }, y: { label: '|I|', unit: 'A', kind: 'linear' } }),
  x: (v) => v,
  extract: ({ line, inputs }) => {
    const warnings: string[] = [];
    const parameters: Record<string, ReturnType<typeof param>> = {};
    const failed: string[] = [];
    if (!(line.slope > 0)) {
      warnings.push('current does not rise with bias (slope ≤ 0): not ohmic');
      failed.push(...warnings);
    }
    const r = 1 / line.slope;
    parameters.resistance = param(r, line.slopeStdErr / (line.slope * line.slope), 'ohm');
    if (inputs.area !== undefined && inputs.thickness !== undefined) {
      const k = inputs.thickness / inputs.area;
      parameters.conductivity = param(line.slope * k, line.slopeStdErr * k, 'S/m');
    } else {
      warnings.push('conductivity needs both area and thickness');
    }
    return { parameters, warnings, plausible: failed.length === 0, notes: [], failed };
  },
  forward: (v, p, inputs) =>
    p.conductivity !== undefined && inputs.thickness !== undefined
      ? p.conductivity * (v / inputs.thickness) * (inputs.area ?? 1) // I = σ·E·A
      : v / p.resistance,
};
