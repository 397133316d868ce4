/**
 * What a page draws for one sweep and one mechanism: every transformable point of the analysed
 * branch in the mechanism's coordinates, shown as the quantities themselves (a log axis shows J/E²,
 * not ln(J/E²)), which points are in the fit window, the mechanism's fitted line over the window,
 * the residuals against the fitted model (in the fitted logarithmic or linear units), and the
 * regimes. The page only draws these numbers.
 */
import { analyzeDetailed, type DetailedFit, type FitRequest, type IVData } from './analyze.js';
import { AnalysisError } from './errors.js';
import type { AxisSpec } from './mechanism.js';
import { getMechanism } from './mechanisms/index.js';
import { resolveInputs, transformPoint } from './analyze.js';
import { floorLevel } from './noise-floor.js';
import { classifySweep } from './sweep-points.js';

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
  /** y − model in fitted units (ln units for log axes); null outside a fit. */
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
  const axes = mech.axes(inputs, request.columns);
  const dx = (x: number) => (axes.x.kind === 'log' ? Math.exp(x) : x);
  const dy = (y: number) => (axes.y.kind === 'log' ? Math.exp(y) : y);
  let detailed: DetailedFit;
  try {
    detailed = analyzeDetailed(data, { ...request, regimes: request.regimes ?? true, eachBranch: false });
  } catch (e) {
    if (e instanceof AnalysisError) {
      // No fit: the readings are still drawn on the mechanism's plot (the branch carrying the larger current).
      const pts = rawPoints(data, mech, inputs);
      const n = pts.x.length;
      return {
        model: mech.id,
        axes,
        x: pts.x.map(dx),
        y: pts.y.map(dy),
        bias: pts.bias,
        inWindow: new Array<number>(n).fill(0),
        residual: new Array<number | null>(n).fill(null),
        line: null,
        window: null,
        regimes: [],
        error: e.message,
      };
    }
    throw e;
  }
  const f = detailed.fit;
  const all = f.all;
  const n = all.x.length;
  const a = f.line.intercept;
  const b = f.line.slope;
  const lo = Math.min(all.x[f.start], all.x[f.end]);
  const hi = Math.max(all.x[f.start], all.x[f.end]);
  let bLo = Infinity;
  let bHi = -Infinity;
  for (let k = f.start; k <= f.end; k++) {
    bLo = Math.min(bLo, all.raw[k]);
    bHi = Math.max(bHi, all.raw[k]);
  }
  const regimes = detailed.report.regimes.map((g) => {
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
    model: mech.id,
    axes,
    x: Array.from(all.x, dx),
    y: Array.from(all.y, dy),
    bias: Array.from(all.raw),
    inWindow: Array.from(all.x, (_, k) => (k >= f.start && k <= f.end ? 1 : 0)),
    residual: Array.from(all.y, (y, k) => (Number.isFinite(f.model[k]) ? y - f.model[k] : null)),
    line: { x: [dx(lo), dx(hi)], y: [dy(a + b * lo), dy(a + b * hi)] },
    window: { x: [dx(lo), dx(hi)], bias: [bLo, bHi] },
    regimes,
  };
}

/**
 * Every reading the mechanism's plot can take, in bias order, when no fit could be made — except,
 * as on every log plot, the readings at the noise floor (and those the sweep's classification
 * excludes: at compliance, at breakdown, at zero bias): a film ramped from 0 V spends its first
 * volts there, and one such reading near zero bias would stretch a 1/E axis a thousandfold.
 */
function rawPoints(
  data: IVData,
  mech: ReturnType<typeof getMechanism>,
  inputs: ReturnType<typeof resolveInputs>,
): { x: number[]; y: number[]; bias: number[] } {
  let pos = 0;
  let neg = 0;
  for (let k = 0; k < data.x.length; k++) {
    const b = data.x[k] - inputs.flatBand;
    const a = Math.abs(data.y[k]);
    if (b > 0 && a > pos) pos = a;
    if (b < 0 && a > neg) neg = a;
  }
  const sign = neg > pos ? -1 : 1;
  const area = mech.usesArea && inputs.area !== undefined ? inputs.area : 1;
  const out = { x: 0, y: 0, bias: 0 };
  const classes = classifySweep(data, { flatBand: inputs.flatBand, detectCompliance: !!mech.current });
  const level = mech.current && mech.yKind === 'log' ? floorLevel(classes.noise) : 0;
  const ks: number[] = [];
  for (let k = 0; k < data.x.length; k++) if (classes.excluded[k] === 0 && !(Math.abs(data.y[k]) < level)) ks.push(k);
  ks.sort((a, b) => data.x[a] - data.x[b]);
  const x: number[] = [];
  const y: number[] = [];
  const bias: number[] = [];
  for (const k of ks) {
    if (data.compliance?.[k] || data.breakdown?.[k]) continue;
    if (transformPoint(mech, inputs, data.x[k], data.y[k], sign, area, out) !== undefined) continue;
    x.push(out.x);
    y.push(out.y);
    bias.push(data.x[k]);
  }
  return { x, y, bias };
}
