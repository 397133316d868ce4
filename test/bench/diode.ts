/**
 * Diode-fit benchmarks on invented cells with noise: the two-diode fit of 1,000 points on a cell
 * that has two diodes, on one that has only one (the second diode undetermined), and on a dark
 * diode; and the single-diode fit from 1e3 to 1e6 points (the cost per point should stay flat).
 */
import { thermalVoltage } from '../../daemon/analysis/constants.js';
import { fitDiode } from '../../daemon/analysis/diode-fit.js';
import { diodeCurrentNewton, type DiodeCircuit } from '../../daemon/analysis/diode-models.js';
import { seededNormal } from '../../daemon/analysis/random.js';
import { report } from './timing.js';

const T = 300;

/** n points from −0.1 to 0.65 V as an SMU records them (load convention), with 2 µA noise (0.1 % + 1 pA for a dark diode). */
function sweep(c: DiodeCircuit, n: number): { x: Float64Array; y: Float64Array } {
  const normal = seededNormal(42);
  const x = new Float64Array(n);
  const y = new Float64Array(n);
  const dark = c.photocurrent === 0;
  for (let k = 0; k < n; k++) {
    x[k] = -0.1 + (0.75 * k) / (n - 1);
    const i = diodeCurrentNewton(x[k], c);
    y[k] = -(i + (dark ? 1e-3 * Math.abs(i) + 1e-12 : 2e-6) * normal());
  }
  return { x, y };
}

function median(fn: () => unknown, warm: number, runs: number): number {
  for (let r = 0; r < warm; r++) fn();
  const t: number[] = [];
  for (let r = 0; r < runs; r++) {
    const t0 = performance.now();
    fn();
    t.push(performance.now() - t0);
  }
  t.sort((a, b) => a - b);
  return t[t.length >> 1];
}

export function benchDiode(): void {
  const vt = thermalVoltage(T);
  const cells: [string, DiodeCircuit][] = [
    [
      'two-diode cell',
      {
        photocurrent: 0.035,
        diodes: [
          { i0: 2e-11, n: 1.05 },
          { i0: 5e-8, n: 1.9 },
        ],
        seriesResistance: 0.8,
        shuntResistance: 2000,
        vt,
      },
    ],
    ['one-diode cell', { photocurrent: 0.035, diodes: [{ i0: 3e-10, n: 1.3 }], seriesResistance: 0.5, shuntResistance: 1500, vt }],
    ['one-diode cell, n = 1', { photocurrent: 0.035, diodes: [{ i0: 1e-12, n: 1 }], seriesResistance: 0.3, shuntResistance: 800, vt }],
    ['dark diode', { photocurrent: 0, diodes: [{ i0: 3e-10, n: 1.3 }], seriesResistance: 0.5, shuntResistance: 1500, vt }],
  ];
  for (const [name, c] of cells) {
    const data = sweep(c, 1000);
    const req = { temperature: T, illuminated: c.photocurrent > 0 };
    let rmse = 0;
    const ms = median(() => (rmse = fitDiode(data, 'double-diode', req).rmse as number), 5, 15);
    report(`two-diode fit, 1000 points: ${name}`, ms, `ms median; RMSE ${rmse.toExponential(3)} A`, '≤ 20 ms');
  }
  const one = cells[1][1];
  let first = 0;
  for (const n of [1_000, 10_000, 100_000, 1_000_000]) {
    const data = sweep(one, n);
    const req = { temperature: T, illuminated: true };
    const ms = median(() => fitDiode(data, 'single-diode', req), n <= 10_000 ? 3 : 1, n <= 10_000 ? 9 : n <= 100_000 ? 3 : 1);
    if (n === 1_000) first = ms / n;
    report(
      `single-diode fit, ${n.toExponential(0)} points`,
      ms,
      `ms; ${((1000 * ms) / n).toFixed(2)} µs per point (×${(ms / n / first).toFixed(2)} the 1e3 figure)`,
      'linear in N',
    );
  }
  const big = sweep(cells[0][1], 100_000);
  report(
    'two-diode fit, 1e5 points: two-diode cell',
    median(() => fitDiode(big, 'double-diode', { temperature: T, illuminated: true }), 1, 1),
    'ms',
  );
}
