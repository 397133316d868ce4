/**
 * Analysis-core benchmark figures: batch line fit, incremental update, the default analysis of a
 * whole sweep (noise floor, branches, automatic window, leakage term, window-choice uncertainty)
 * and the ranking of every mechanism, at 1e3, 1e5 and 1e6 points.
 */
import { fitLine } from '../../daemon/analysis/line-fit.js';
import { LineAccumulator } from '../../daemon/analysis/line-accumulator.js';
import { analyze } from '../../daemon/analysis/analyze.js';
import { segmentLine } from '../../daemon/analysis/segmentation.js';
import { rankMechanisms } from '../../daemon/analysis/ranking.js';
import { fowlerNordheim } from '../../daemon/analysis/mechanisms/fowler-nordheim.js';
import { seededNormal } from '../../daemon/analysis/random.js';
import { medianMs, report } from './timing.js';

/** A whole 0 → 10 V sweep of an invented 8 nm oxide: floor 1e-13 A, 1 % noise, 1e13 Ω leakage. */
function wholeSweep(m: number, normal: () => number): { v: Float64Array; i: Float64Array } {
  const d = 8e-9;
  const v = Float64Array.from({ length: m }, (_, k) => (10 * k) / (m - 1));
  const i = v.map((b) => (b > 0 ? fowlerNordheim(b / d, 3.1, 0.42) * 1e-8 : 0) + b / 1e13);
  for (let k = 0; k < m; k++) i[k] = i[k] * (1 + 0.01 * normal()) + 1e-13 * normal();
  return { v, i };
}

export function benchAnalysis(): void {
  const normal = seededNormal(42);
  const n = 1_000_000;
  const x = new Float64Array(n);
  const y = new Float64Array(n);
  for (let k = 0; k < n; k++) {
    x[k] = k * 1e-3;
    y[k] = 1 + 2 * x[k] + 0.01 * normal();
  }
  report(
    'batch line fit, 1e6 points (median of 15)',
    medianMs(() => fitLine(x, y), 15),
    'ms',
    '<= 5 ms',
  );

  const acc = new LineAccumulator();
  const t0 = process.hrtime.bigint();
  for (let k = 0; k < n; k++) acc.add(x[k], y[k]);
  const perAdd = Number(process.hrtime.bigint() - t0) / n;
  report('incremental add, per point (1e6 adds)', perAdd, 'ns', '<= 20 ns');
  const t1 = process.hrtime.bigint();
  for (let k = 0; k < n; k++) {
    acc.remove(x[k], y[k]);
    acc.add(x[k], y[k]);
  }
  report('incremental remove + add, per pair', Number(process.hrtime.bigint() - t1) / n, 'ns');

  const inputs = { thickness: 8e-9, area: 1e-8, massRatio: 0.42, refractiveIndex: 1.46 };
  for (const m of [1_000, 100_000, 1_000_000]) {
    const s = wholeSweep(m, normal);
    const repeats = m >= 1_000_000 ? 3 : m >= 100_000 ? 5 : 15;
    const label = m.toExponential(0).replace('+', '');
    const fit = medianMs(() => analyze({ x: s.v, y: s.i }, { model: 'fowler-nordheim', inputs, regimes: false }), repeats);
    report(`default fit (floor, branches, automatic window), ${label} points`, fit, 'ms', m === 1_000_000 ? '<= 1000 ms' : undefined);
    const rank = medianMs(() => rankMechanisms({ x: s.v, y: s.i }, { inputs }), repeats);
    report(
      `mechanism ranking (every mechanism, own window), ${label} points`,
      rank,
      'ms',
      m === 1_000_000 ? '<= 1000 ms' : m === 1_000 ? '<= 10 ms' : undefined,
    );
  }
  const small = wholeSweep(1000, normal);
  const lx = small.v.map((b) => 8e-9 / b).slice(1);
  const ly = small.i.map((c, k) => Math.log(Math.abs(c) / (small.v[k] / 8e-9) ** 2)).slice(1);
  report(
    'regime segmentation, 1000 points',
    medianMs(() => segmentLine(lx.reverse(), ly.reverse()), 9),
    'ms',
  );
}
