/**
 * The linearized view of a sweep the mechanism cannot fit yet (daemon/analysis/plot.ts): a film
 * ramped from 0 V whose current has only begun to rise out of the noise floor. The readings are a
 * Fowler–Nordheim oxide's (Fowler & Nordheim 1928, the forward model of test/helpers/whole-sweep.ts)
 * with a noise floor of either sign; a log plot leaves out the floor (common practice: a reading
 * at the floor is noise, its logarithm says nothing of the mechanism).
 */
import { describe, expect, it } from 'vitest';
import { analyze } from '../../daemon/analysis/analyze.js';
import { plotView } from '../../daemon/analysis/plot.js';
import { linearBias, wholeSweep } from '../helpers/whole-sweep.js';

describe('the view of a sweep with no fit yet', () => {
  const inputs = { thickness: 7e-9, area: 1e-8, massRatio: 0.42 };
  it('draws only the readings above the noise floor: none at zero bias or at the floor, so the 1/E axis spans the readings that carry current', () => {
    let drawn = 0;
    for (let seed = 1; seed <= 5; seed++) {
      // 0 → 4.7 V in 0.1 V steps: the current (2.3e-13 A at 4.5 V, 1.2e-11 A at 5 V) is only
      // beginning to leave a 1e-13 A floor; the fit needs more readings above it.
      const s = wholeSweep({
        device: { kind: 'fowler-nordheim', barrier: 3.1, massRatio: 0.42 },
        thickness: 7e-9,
        area: 1e-8,
        bias: linearBias(0, 4.7, 48),
        relative: 0.02,
        floor: 1e-13,
        seed,
      });
      const data = { x: s.v, y: s.i };
      expect(() => analyze(data, { model: 'fowler-nordheim', inputs })).toThrow();
      const view = plotView(data, { model: 'fowler-nordheim', inputs });
      expect(view.error).toBeDefined();
      expect(view.line).toBeNull();
      // Every reading drawn is one whose current is rising out of the floor (above 4 V, where the
      // true current passes 1e-15 A), never one near zero bias: the drawn 1/E values then span
      // under a factor of 1.3, not the hundredfold of a floor reading at 0.05 V.
      for (const b of view.bias) expect(b, `seed ${seed}: drawn at ${view.bias.join(', ')}`).toBeGreaterThan(4);
      if (view.x.length > 1) expect(Math.max(...view.x) / Math.min(...view.x)).toBeLessThan(1.3);
      drawn += view.x.length;
    }
    // The readings rising out of the floor are drawn (the view is not simply empty).
    expect(drawn).toBeGreaterThan(0);
  });
});
