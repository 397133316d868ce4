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
  // The raw columns: a station's readings say they are the bias and the current; a file's may be
  // anything, and then the axes carry no unit rather than an invented one.
  axes: (_inputs, columns) => ({
    x: { label: columns?.x.label ?? 'x', unit: columns?.x.unit ?? '', kind: 'linear' },
    y: { label: columns?.y.label ?? 'y', unit: columns?.y.unit ?? '', kind: 'linear' },
  }),
  x: (v) => v,
  extract: () => ({ parameters: {}, warnings: [], plausible: true, notes: [] }),
  forward: (v, p) => (p.intercept ?? 0) + (p.slope ?? 0) * v,
};
