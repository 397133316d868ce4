/** Analysis-core benchmark figures (issue: batch fit, incremental update, window, segmentation, ranking). */
import { fitLine } from '../../daemon/analysis/line-fit.js';
import { LineAccumulator } from '../../daemon/analysis/line-accumulator.js';
import { autoWindow } from '../../daemon/analysis/window.js';
import { segmentLine } from '../../daemon/analysis/segmentation.js';
import { rankMechanisms } from '../../daemon/analysis/ranking.js';
import { fowlerNordheim } from '../../daemon/analysis/mechanisms/fowler-nordheim.js';
import { seededNormal } from '../../daemon/analysis/random.js';
import { medianMs, report } from './timing.js';

export function benchAnalysis(): void {
  const normal = seededNormal(42);
  const n = 1_000_000;
  const x = new Float64Array(n);
  const y = new Float64Array(n);
  for (let k = 0; k < n; k++) {
    x[k] = k * 1e-3;
    y[k] = 1 + 2 * x[k] + 0.01 * normal();
  }
  report('batch line fit, 1e6 points (median of 15)', medianMs(() => fitLine(x, y), 15), 'ms', '<= 5 ms');

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

  const m = 1000;
  const d = 8e-9;
  const v = Float64Array.from({ length: m }, (_, k) => 0.01 + (9 * k) / (m - 1));
  const i = v.map((b) => (fowlerNordheim(b / d, 3.1, 0.42) * 1e-8 + 1e-14 * b) * (1 + 0.01 * normal()));
  const lx = v.map((b) => d / b);
  const ly = i.map((c, k) => Math.log(c / (v[k] / d) ** 2));
  const order = Array.from(lx.keys()).sort((a, b) => lx[a] - lx[b]);
  const sx = Float64Array.from(order, (k) => lx[k]);
  const sy = Float64Array.from(order, (k) => ly[k]);
  report('automatic window, 1000 points', medianMs(() => autoWindow(sx, sy), 9), 'ms');
  report('regime segmentation, 1000 points', medianMs(() => segmentLine(sx, sy), 9), 'ms');
  const inputs = { thickness: d, area: 1e-8, massRatio: 0.42, refractiveIndex: 1.46 };
  report('mechanism ranking, 1000 points', medianMs(() => rankMechanisms({ x: v, y: i }, { inputs, window: 'all' }), 15), 'ms', '<= 10 ms');
}
