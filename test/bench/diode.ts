/**
 * Diode fit benchmarks: 1,000 points of an invented illuminated cell with two diodes (the two-diode
 * fit's favourable case) and of a one-diode cell (where every two-diode start runs), each with noise;
 * and the single-diode fit of 1e5 points (the cost grows linearly: a crawl on ~250 points, then a
 * short run on the whole curve).
 */
import { thermalVoltage } from '../../daemon/analysis/constants.js';
import { fitDiode } from '../../daemon/analysis/diode-fit.js';
import { diodeCurrentNewton } from '../../daemon/analysis/diode-models.js';
import { seededNormal } from '../../daemon/analysis/random.js';
import { report } from './timing.js';

function cell(diodes: { i0: number; n: number }[], points: number, seed: number): { v: number[]; i: number[] } {
  const T = 300;
  const c = { photocurrent: 0.035, diodes, seriesResistance: 0.8, shuntResistance: 2000, vt: thermalVoltage(T) };
  const normal = seededNormal(seed);
  const v: number[] = [];
  const i: number[] = [];
  for (let k = 0; k < points; k++) {
    const x = -0.1 + (0.75 * k) / (points - 1);
    v.push(x);
    i.push(-(diodeCurrentNewton(x, c) + 2e-6 * normal())); // as an SMU records it (load convention)
  }
  return { v, i };
}

function median(fn: () => number, repeats: number): { ms: number; rmse: number } {
  let rmse = 0;
  for (let r = 0; r < 3; r++) fn(); // warm-up (JIT)
  const times: number[] = [];
  for (let r = 0; r < repeats; r++) {
    const t0 = performance.now();
    rmse = fn();
    times.push(performance.now() - t0);
  }
  times.sort((a, b) => a - b);
  return { ms: times[repeats >> 1], rmse };
}

export function benchDiode(): void {
  const req = { temperature: 300, illuminated: true };
  const two = cell([{ i0: 2e-11, n: 1.05 }, { i0: 5e-8, n: 1.9 }], 1000, 42);
  const a = median(() => fitDiode({ x: two.v, y: two.i }, 'double-diode', req).rmse as number, 15);
  report('two-diode fit, 1000 points, two-diode cell', a.ms, `ms median; RMSE ${a.rmse.toExponential(3)} A (noise 2e-6 A)`, '≤ 20');
  const one = cell([{ i0: 2e-10, n: 1.3 }], 1000, 43);
  const b = median(() => fitDiode({ x: one.v, y: one.i }, 'double-diode', req).rmse as number, 9);
  report('two-diode fit, 1000 points, one-diode cell', b.ms, `ms median; RMSE ${b.rmse.toExponential(3)} A`, '≤ 20');
  const big = cell([{ i0: 2e-10, n: 1.3 }], 100000, 44);
  const c = median(() => fitDiode({ x: big.v, y: big.i }, 'single-diode', req).rmse as number, 3);
  report('single-diode fit, 1e5 points', c.ms, `ms median; RMSE ${c.rmse.toExponential(3)} A`);
}
