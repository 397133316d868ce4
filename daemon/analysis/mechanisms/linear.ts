/** `linear`: the straight line y = a + b·x through the raw columns, no physics attached. */
import type { Mechanism } from '../mechanism.js';

export const linear: Mechanism = {
  id: 'linear',
  title: 'Straight line (raw columns)',
  yKind: 'linear',
  bias: 'raw',
  requires: [],
  uses: [],
  usesArea: false,
  ranked: false,
  axes: () => ({ x: { label: 'x', unit: '', kind: 'linear' }, y: { label: 'y', unit: '', kind: 'linear' } }),
  x: (v) => v,
  extract: () => ({ parameters: {}, warnings: [], plausible: true, notes: [] }),
  forward: (v, p) => (p.intercept ?? 0) + (p.slope ?? 0) * v,
};
