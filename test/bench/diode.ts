/** Two-diode fit benchmark: 1,000 points of an invented illuminated cell with noise. */
import { thermalVoltage } from '../../daemon/analysis/constants.js';
import { fitDiode } from '../../daemon/analysis/diode-fit.js';
import { diodeCurrentNewton } from '../../daemon/analysis/diode-models.js';
import { seededNormal } from '../../daemon/analysis/random.js';
import { report } from './timing.js';

export function benchDiode(): void {
  const T = 300;
  const c = { photocurrent: 0.035, diodes: [{ i0: 2e-11, n: 1.05 }, { i0: 5e-8, n: 1.9 }], seriesResistance: 0.8, shuntResistance: 2000, vt: thermalVoltage(T) };
  const normal = seededNormal(42);
  const v: number[] = [];
  const i: number[] = [];
  for (let k = 0; k < 1000; k++) {
    const x = -0.1 + (0.75 * k) / 999;
    v.push(x);
    i.push(-(diodeCurrentNewton(x, c) + 2e-6 * normal())); // as an SMU records it (load convention)
  }
  const times: number[] = [];
  let rmse = 0;
  // Warm-up (JIT), then the timed fits.
  for (let r = 0; r < 5; r++) fitDiode({ x: v, y: i }, 'double-diode', { temperature: T, illuminated: true });
  for (let r = 0; r < 15; r++) {
    const t0 = performance.now();
    const fit = fitDiode({ x: v, y: i }, 'double-diode', { temperature: T, illuminated: true });
    times.push(performance.now() - t0);
    rmse = fit.rmse as number;
  }
  times.sort((a, b) => a - b);
  report('two-diode fit, 1000 points (one-diode seed + two-diode)', times[7], `ms median; RMSE ${rmse.toExponential(3)} A (noise 2e-6 A)`, '≤ 20');
}
