/**
 * What a page draws for one sweep and one mechanism: every transformable point in the mechanism's
 * coordinates, shown as the quantities themselves (a log axis shows J/E², not ln(J/E²)), which
 * points are in the fit window, the fitted line at the window's ends, the residuals in the fitted
 * (logarithmic or linear) units, and the regimes. The page only draws these numbers.
 */
import { analyzePrepared, preparePoints, resolveInputs, selectWindow, type FitRequest, type IVData } from './analyze.js';
import { AnalysisError } from './errors.js';
import type { AxisSpec } from './mechanism.js';
import { getMechanism } from './mechanisms/index.js';

export interface PlotView {
  readonly model: string;
  readonly axes: { x: AxisSpec; y: AxisSpec };
  /** Display values (the quantity itself; log axes are log-scaled by the page). */
  readonly x: number[];
  readonly y: number[];
  /** The bias each point came from, V (for mapping a dragged window back to the sweep). */
  readonly bias: number[];
  /** 1 where the point is inside the fit window. */
  readonly inWindow: number[];
  /** y − (a + b·x) in fitted units (ln units for log axes); null outside a fit. */
  readonly residual: (number | null)[];
  /** The fitted line at the window's ends, in display values. */
  readonly line: { x: [number, number]; y: [number, number] } | null;
  /** The window in display x and in the sweep's bias. */
  readonly window: { x: [number, number]; bias: [number, number] } | null;
  readonly regimes: { x: [number, number]; y: [number, number] }[];
  readonly error?: string;
}

export function plotView(data: IVData, request: FitRequest): PlotView {
  const mech = getMechanism(request.model);
  const inputs = resolveInputs(mech, request.inputs);
  const { all } = preparePoints(mech, data, inputs, { complianceLimit: request.complianceLimit });
  const axes = mech.axes(inputs);
  const dx = (x: number) => (axes.x.kind === 'log' ? Math.exp(x) : x);
  const dy = (y: number) => (axes.y.kind === 'log' ? Math.exp(y) : y);
  const n = all.x.length;
  const base = {
    model: mech.id,
    axes,
    x: Array.from(all.x, dx),
    y: Array.from(all.y, dy),
    bias: Array.from(all.raw),
  };
  if (n < 3) {
    return { ...base, inWindow: new Array<number>(n).fill(0), residual: new Array<number | null>(n).fill(null), line: null, window: null, regimes: [], error: `${n} usable points` };
  }
  const { used } = selectWindow(all, request.window);
  let lo = Infinity;
  let hi = -Infinity;
  for (let k = 0; k < used.x.length; k++) {
    lo = Math.min(lo, used.x[k]);
    hi = Math.max(hi, used.x[k]);
  }
  const inWindow = Array.from(all.x, (x) => (x >= lo && x <= hi ? 1 : 0));
  if (used.x.length < 3) {
    return { ...base, inWindow, residual: new Array<number | null>(n).fill(null), line: null, window: null, regimes: [], error: 'fewer than 3 points in the window' };
  }
  try {
    const r = analyzePrepared(mech, inputs, all, used, { regimes: true });
    const a = r.line.intercept;
    const b = r.line.slope;
    let bLo = Infinity;
    let bHi = -Infinity;
    for (let k = 0; k < used.raw.length; k++) {
      bLo = Math.min(bLo, used.raw[k]);
      bHi = Math.max(bHi, used.raw[k]);
    }
    const regimes = r.regimes.map((g) => {
      // Regimes are reported in the data's own x (bias); draw each over its points.
      let xl = Infinity;
      let xh = -Infinity;
      for (let k = 0; k < n; k++) {
        if (all.raw[k] >= g.from && all.raw[k] <= g.to) {
          xl = Math.min(xl, all.x[k]);
          xh = Math.max(xh, all.x[k]);
        }
      }
      return { x: [dx(xl), dx(xh)] as [number, number], y: [dy(g.intercept + g.slope * xl), dy(g.intercept + g.slope * xh)] as [number, number] };
    });
    return {
      ...base,
      inWindow,
      residual: Array.from(all.x, (x, k) => all.y[k] - (a + b * x)),
      line: { x: [dx(lo), dx(hi)], y: [dy(a + b * lo), dy(a + b * hi)] },
      window: { x: [dx(lo), dx(hi)], bias: [bLo, bHi] },
      regimes,
    };
  } catch (e) {
    if (e instanceof AnalysisError) {
      return { ...base, inWindow, residual: new Array<number | null>(n).fill(null), line: null, window: null, regimes: [], error: e.message };
    }
    throw e;
  }
}
