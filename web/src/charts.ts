/**
 * The uPlot charts. Each takes the numbers the daemon computed and draws them; log axes get
 * positive values only (a value ≤ 0 becomes a gap, per uPlot's log-scale rule).
 * Palettes (protocols/palette.ts, shared with the report): sweep order on a viridis-like
 * sequential ramp, categories in Okabe–Ito; every colour cue is doubled by a marker shape or dash.
 */
import uPlot from 'uplot';
import { OKABE_ITO, sequential } from '../../protocols/palette.js';
import type { PlotViewData, WireEvent } from '../../protocols/wire.js';
import type { SweepPoints } from './store.js';

function size(el: HTMLElement, h: number): { width: number; height: number } {
  return { width: Math.max(300, el.clientWidth), height: h };
}

/**
 * Draws markers at the points of series `si` (a draw hook): uPlot's faceted mode draws series
 * paths but not their points, so every marker here is drawn by the page. '×' negative current,
 * '□' compliance, '●' filled (in the fit window), '○' hollow (outside it).
 */
function drawMarkers(u: uPlot, si: number, shape: 'cross' | 'square' | 'dot' | 'ring', color: string, size = 4): void {
  const d = u.data[si] as unknown as [number[], (number | null)[]];
  if (!d) return;
  const xs = d[0];
  const ys = d[1];
  const ctx = u.ctx;
  const r = size * devicePixelRatio;
  const { left, top, width, height } = u.bbox;
  ctx.save();
  ctx.beginPath();
  ctx.rect(left, top, width, height);
  ctx.clip();
  ctx.strokeStyle = color;
  ctx.fillStyle = shape === 'dot' ? color : '#ffffff';
  ctx.lineWidth = 1.5 * devicePixelRatio;
  ctx.beginPath();
  for (let k = 0; k < xs.length; k++) {
    const y = ys[k];
    if (y === null || y === undefined) continue;
    const px = u.valToPos(xs[k], 'x', true);
    const py = u.valToPos(y, 'y', true);
    if (shape === 'cross') {
      ctx.moveTo(px - r, py - r);
      ctx.lineTo(px + r, py + r);
      ctx.moveTo(px + r, py - r);
      ctx.lineTo(px - r, py + r);
    } else if (shape === 'square') ctx.rect(px - r, py - r, 2 * r, 2 * r);
    else {
      ctx.moveTo(px + r, py);
      ctx.arc(px, py, r, 0, 2 * Math.PI);
    }
  }
  if (shape === 'dot' || shape === 'ring') ctx.fill();
  ctx.stroke();
  ctx.restore();
}

/** Log-axis range snapped to whole decades (positive only). */
const logRange: uPlot.Range.Function = (_u, min, max) => {
  if (!(max > 0)) return [1e-15, 1e-3];
  const lo = min > 0 ? min : max / 1e6;
  const a = Math.floor(Math.log10(lo));
  const b = Math.max(a + 1, Math.ceil(Math.log10(max)));
  return [10 ** a, 10 ** b];
};

/**
 * Decade ticks computed here: uPlot's own log splits use a table of increments that ends near
 * 1e-16, and the quantities of a Fowler–Nordheim plot (J/E² ~ 1e-25) lie far below it.
 */
const logSplits = (_u: uPlot, _axis: number, min: number, max: number): number[] => {
  const a = Math.ceil(Math.log10(min) - 1e-9);
  const b = Math.floor(Math.log10(max) + 1e-9);
  const step = Math.max(1, Math.ceil((b - a + 1) / 8));
  const out: number[] = [];
  for (let e = a; e <= b; e += step) out.push(10 ** e);
  return out;
};
const logValues = (_u: uPlot, v: number[]) => v.map((x) => (x === null ? '' : `1e${Math.round(Math.log10(x))}`));

/** Raw I–V of the sweeps so far (faceted: each sweep its own x). */
export class RawChart {
  plot: uPlot | null = null;
  private shape = '';
  data: [null, ...[number[], (number | null)[]][]] = [null];

  constructor(private readonly el: HTMLElement) {}

  update(sweeps: Map<number, SweepPoints>, log: boolean): void {
    const keys = [...sweeps.keys()].sort((a, b) => a - b);
    const shape = `${log}:${keys.join(',')}`;
    const data: [null, ...[number[], (number | null)[]][]] = [null];
    const negX: number[] = [];
    const negY: number[] = [];
    const compX: number[] = [];
    const compY: number[] = [];
    for (const k of keys) {
      const s = sweeps.get(k) as SweepPoints;
      const y = s.i.map((i) => (log ? (Math.abs(i) > 0 ? Math.abs(i) : null) : i));
      data.push([s.v, y]);
      for (let n = 0; n < s.v.length; n++) {
        if (log && s.i[n] < 0) {
          negX.push(s.v[n]);
          negY.push(-s.i[n]);
        }
        if (s.flags[n] & 1) {
          compX.push(s.v[n]);
          compY.push(log ? Math.abs(s.i[n]) : s.i[n]);
        }
      }
    }
    data.push([negX, negY], [compX, compY]);
    this.data = data;
    if (!this.plot || shape.split(':')[0] !== this.shape.split(':')[0] || keys.length + 3 !== this.plot.series.length) {
      this.plot?.destroy();
      this.el.textContent = '';
      const series: uPlot.Series[] = [{}];
      keys.forEach((k, n) => series.push({
        label: `sweep ${k}`,
        stroke: sequential(keys.length > 1 ? n / (keys.length - 1) : 1),
        width: 1.5,
        points: { show: true, size: 3 },
        paths: uPlot.paths.linear?.(),
      } as uPlot.Series));
      series.push({ label: 'negative current (|I|)', stroke: OKABE_ITO.vermillion, paths: () => null, points: { show: false } } as uPlot.Series);
      series.push({ label: 'at compliance', stroke: OKABE_ITO.black, paths: () => null, points: { show: false } } as uPlot.Series);
      const nNeg = series.length - 2;
      this.plot = new uPlot({
        mode: 2,
        ...size(this.el, 340),
        legend: { show: false },
        cursor: { drag: { x: true, y: true, setScale: true } },
        scales: { x: { time: false }, y: log ? { distr: 3, range: logRange } : {} },
        hooks: {
          draw: [(u: uPlot) => {
            drawMarkers(u, nNeg, 'cross', OKABE_ITO.vermillion);
            drawMarkers(u, nNeg + 1, 'square', OKABE_ITO.black);
          }],
        },
        axes: [
          { label: 'bias V (V)', stroke: '#1b1b1b' },
          log
            ? { label: '|I| (A)', stroke: '#1b1b1b', size: 70, splits: logSplits, values: logValues }
            : { label: 'I (A)', stroke: '#1b1b1b', size: 70, values: (_u, v) => v.map((x) => (x === null ? '' : x.toExponential(1))) },
        ],
        series,
      }, data as unknown as uPlot.AlignedData, this.el);
    } else {
      this.plot.setData(data as unknown as uPlot.AlignedData);
    }
    this.shape = shape;
  }
}

/** Linearized view with its fit line, window band and regimes; and the residuals under it. */
export class LinearizedChart {
  plot: uPlot | null = null;
  resid: uPlot | null = null;
  view: PlotViewData | null = null;
  private key = '';

  constructor(private readonly el: HTMLElement, private readonly residEl: HTMLElement, private readonly onWindow: (from: number, to: number) => void) {}

  update(view: PlotViewData | undefined): void {
    if (!view) return;
    this.view = view;
    const inX: number[] = [];
    const inY: number[] = [];
    const outX: number[] = [];
    const outY: number[] = [];
    const rInX: number[] = [];
    const rInY: number[] = [];
    const rOutX: number[] = [];
    const rOutY: number[] = [];
    for (let k = 0; k < view.x.length; k++) {
      const win = view.inWindow[k] === 1;
      (win ? inX : outX).push(view.x[k]);
      (win ? inY : outY).push(view.y[k]);
      const r = view.residual[k];
      if (r !== null) {
        (win ? rInX : rOutX).push(view.x[k]);
        (win ? rInY : rOutY).push(r);
      }
    }
    const line = view.line ? [view.line.x, view.line.y] : [[], []];
    const data = [null, [inX, inY], [outX, outY], line, ...view.regimes.map((g) => [g.x, g.y])];
    const key = `${view.model}:${view.regimes.length}:${view.axes.x.kind}:${view.axes.y.kind}`;
    const xlog = view.axes.x.kind === 'log';
    const ylog = view.axes.y.kind === 'log';
    if (!this.plot || key !== this.key) {
      this.plot?.destroy();
      this.resid?.destroy();
      this.el.textContent = '';
      this.residEl.textContent = '';
      const series: uPlot.Series[] = [
        {},
        { label: 'in window', stroke: OKABE_ITO.blue, paths: () => null, points: { show: false } },
        { label: 'outside window', stroke: OKABE_ITO.orange, paths: () => null, points: { show: false } },
        { label: 'fit', stroke: OKABE_ITO.black, width: 2, points: { show: false } },
        ...view.regimes.map((_, n) => ({ label: `regime ${n + 1}`, stroke: OKABE_ITO.purple, width: 1.5, dash: [6, 4], points: { show: false } })),
      ];
      const axisLabel = (a: { label: string; unit: string }) => `${a.label} (${a.unit})`;
      const fmt = (_log: boolean) => (_u: uPlot, v: number[]) => v.map((x) => (x === null ? '' : x !== 0 && (Math.abs(x) < 1e-2 || Math.abs(x) >= 1e4) ? x.toExponential(1) : String(+x.toPrecision(3))));
      this.plot = new uPlot({
        mode: 2,
        ...size(this.el, 320),
        legend: { show: false },
        cursor: { drag: { x: true, y: false, setScale: false } },
        select: { show: true, left: 0, top: 0, width: 0, height: 0 },
        scales: { x: xlog ? { time: false, distr: 3, range: logRange } : { time: false }, y: ylog ? { distr: 3, range: logRange } : {} },
        axes: [
          xlog ? { label: axisLabel(view.axes.x), stroke: '#1b1b1b', splits: logSplits, values: logValues } : { label: axisLabel(view.axes.x), stroke: '#1b1b1b', values: fmt(false) },
          ylog ? { label: axisLabel(view.axes.y), stroke: '#1b1b1b', size: 75, splits: logSplits, values: logValues } : { label: axisLabel(view.axes.y), stroke: '#1b1b1b', size: 75, values: fmt(false) },
        ],
        series,
        hooks: {
          drawClear: [(u: uPlot) => this.drawWindow(u)],
          draw: [(u: uPlot) => {
            drawMarkers(u, 2, 'ring', OKABE_ITO.orange, 3.5);
            drawMarkers(u, 1, 'dot', OKABE_ITO.blue, 3.5);
            // The fit line again, on top of the points.
            const l = this.view?.line;
            if (!l) return;
            const ctx = u.ctx;
            ctx.save();
            ctx.beginPath();
            ctx.rect(u.bbox.left, u.bbox.top, u.bbox.width, u.bbox.height);
            ctx.clip();
            ctx.strokeStyle = OKABE_ITO.black;
            ctx.lineWidth = 2 * devicePixelRatio;
            ctx.beginPath();
            ctx.moveTo(u.valToPos(l.x[0], 'x', true), u.valToPos(l.y[0], 'y', true));
            ctx.lineTo(u.valToPos(l.x[1], 'x', true), u.valToPos(l.y[1], 'y', true));
            ctx.stroke();
            ctx.restore();
          }],
          setSelect: [(u: uPlot) => {
            if (u.select.width < 4) return;
            const a = u.posToVal(u.select.left, 'x');
            const b = u.posToVal(u.select.left + u.select.width, 'x');
            u.setSelect({ left: 0, top: 0, width: 0, height: 0 }, false);
            this.selected(Math.min(a, b), Math.max(a, b));
          }],
        },
      }, data as unknown as uPlot.AlignedData, this.el);
      this.resid = new uPlot({
        mode: 2,
        ...size(this.residEl, 160),
        legend: { show: false },
        cursor: { drag: { x: false, y: false } },
        scales: { x: xlog ? { time: false, distr: 3, range: logRange } : { time: false } },
        axes: [
          xlog ? { label: axisLabel(view.axes.x), stroke: '#1b1b1b', splits: logSplits, values: logValues } : { label: axisLabel(view.axes.x), stroke: '#1b1b1b', values: fmt(false) },
          { label: ylog ? 'residual, ln' : `residual (${view.axes.y.unit})`, stroke: '#1b1b1b', size: 75 },
        ],
        series: [
          {},
          { label: 'in window', stroke: OKABE_ITO.blue, paths: () => null, points: { show: false } },
          { label: 'outside', stroke: OKABE_ITO.orange, paths: () => null, points: { show: false } },
        ],
        hooks: {
          draw: [(u: uPlot) => {
            const y0 = u.valToPos(0, 'y', true);
            u.ctx.save();
            u.ctx.strokeStyle = '#1b1b1b';
            u.ctx.beginPath();
            u.ctx.moveTo(u.bbox.left, y0);
            u.ctx.lineTo(u.bbox.left + u.bbox.width, y0);
            u.ctx.stroke();
            u.ctx.restore();
            drawMarkers(u, 2, 'ring', OKABE_ITO.orange, 3);
            drawMarkers(u, 1, 'dot', OKABE_ITO.blue, 3);
          }],
        },
      }, [null, [rInX, rInY], [rOutX, rOutY]] as unknown as uPlot.AlignedData, this.residEl);
      this.key = key;
    } else {
      this.plot.setData(data as unknown as uPlot.AlignedData);
      this.resid?.setData([null, [rInX, rInY], [rOutX, rOutY]] as unknown as uPlot.AlignedData);
    }
    this.focus(view);
  }

  /** Whole curve, or (default) the fit window with a margin: the axes then follow the window's points. */
  wholeCurve = false;

  private focus(view: PlotViewData): void {
    const u = this.plot;
    if (!u || !view.window || this.wholeCurve) return;
    const xlog = view.axes.x.kind === 'log';
    const ylog = view.axes.y.kind === 'log';
    const tx = (x: number) => (xlog ? Math.log10(x) : x);
    const ux = (t: number) => (xlog ? 10 ** t : t);
    const a = tx(view.window.x[0]);
    const b = tx(view.window.x[1]);
    const m = 0.35 * (b - a || Math.abs(a) || 1);
    const x0 = ux(a - m);
    const x1 = ux(b + m);
    let lo = Infinity;
    let hi = -Infinity;
    let rlo = Infinity;
    let rhi = -Infinity;
    for (let k = 0; k < view.x.length; k++) {
      if (view.x[k] < x0 || view.x[k] > x1) continue;
      lo = Math.min(lo, view.y[k]);
      hi = Math.max(hi, view.y[k]);
      const r = view.residual[k];
      if (r !== null) {
        rlo = Math.min(rlo, r);
        rhi = Math.max(rhi, r);
      }
    }
    if (!Number.isFinite(lo)) return;
    u.batch(() => {
      u.setScale('x', { min: x0, max: x1 });
      if (ylog) {
        const [ya, yb] = logRange(u, lo, hi, 'y') as [number, number];
        u.setScale('y', { min: ya, max: yb });
      } else {
        const pad = 0.05 * (hi - lo || Math.abs(hi) || 1);
        u.setScale('y', { min: lo - pad, max: hi + pad });
      }
    });
    if (this.resid && Number.isFinite(rlo)) {
      const r = Math.max(Math.abs(rlo), Math.abs(rhi)) * 1.15 || 1;
      this.resid.batch(() => {
        this.resid?.setScale('x', { min: x0, max: x1 });
        this.resid?.setScale('y', { min: -r, max: r });
      });
    }
  }

  private drawWindow(u: uPlot): void {
    const w = this.view?.window;
    if (!w) return;
    const a = u.valToPos(w.x[0], 'x', true);
    const b = u.valToPos(w.x[1], 'x', true);
    const ctx = u.ctx;
    ctx.save();
    ctx.fillStyle = 'rgba(86, 180, 233, 0.16)';
    ctx.fillRect(Math.min(a, b), u.bbox.top, Math.abs(b - a), u.bbox.height);
    ctx.strokeStyle = 'rgba(0, 114, 178, 0.8)';
    ctx.setLineDash([4, 3]);
    ctx.strokeRect(Math.min(a, b), u.bbox.top, Math.abs(b - a), u.bbox.height);
    ctx.restore();
  }

  /** Maps a dragged x range to the bias range of the points inside it (no physics: a lookup). */
  private selected(x0: number, x1: number): void {
    const v = this.view;
    if (!v) return;
    let lo = Infinity;
    let hi = -Infinity;
    for (let k = 0; k < v.x.length; k++) {
      if (v.x[k] >= x0 && v.x[k] <= x1) {
        lo = Math.min(lo, v.bias[k]);
        hi = Math.max(hi, v.bias[k]);
      }
    }
    if (Number.isFinite(lo) && hi > lo) this.onWindow(lo, hi);
  }
}

/** The drift chart: the charted parameter per sweep, the EWMA (or CUSUM) statistic and its limits. */
export class DriftChart {
  plot: uPlot | null = null;
  private key = '';

  constructor(private readonly el: HTMLElement) {}

  update(drift: Extract<WireEvent, { type: 'drift' }>[]): void {
    if (drift.length === 0) return;
    const d = [...drift].sort((a, b) => a.sweep - b.sweep);
    const cusum = d[0].method === 'cusum';
    const xs = d.map((p) => p.sweep);
    const data = [
      xs,
      d.map((p) => (cusum ? null : p.value)),
      d.map((p) => p.statistic),
      d.map((p) => p.upper),
      d.map((p) => p.lower),
    ];
    const key = `${d[0].parameter}:${d[0].method}`;
    if (!this.plot || key !== this.key) {
      this.plot?.destroy();
      this.el.textContent = '';
      this.plot = new uPlot({
        ...size(this.el, 180),
        legend: { show: false },
        scales: { x: { time: false } },
        axes: [{ label: 'sweep', stroke: '#1b1b1b', incrs: [1, 2, 5, 10, 20, 50, 100, 200, 500, 1000], values: (_u, v) => v.map((x) => String(Math.round(x))) }, { stroke: '#1b1b1b', size: 60, values: (_u, v) => v.map((x) => (x === null ? '' : x.toPrecision(4))) }],
        series: [
          {},
          { label: d[0].parameter, stroke: OKABE_ITO.blue, points: { show: true, size: 6 }, width: 1 },
          { label: cusum ? 'CUSUM' : 'EWMA', stroke: OKABE_ITO.black, width: 2, points: { show: true, size: 4 } },
          { label: 'upper limit', stroke: OKABE_ITO.vermillion, dash: [6, 4], width: 1.5, points: { show: false } },
          { label: 'lower limit', stroke: OKABE_ITO.vermillion, dash: [6, 4], width: 1.5, points: { show: false } },
        ],
      }, data as uPlot.AlignedData, this.el);
      this.key = key;
    } else this.plot.setData(data as uPlot.AlignedData);
  }
}
