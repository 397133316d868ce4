/**
 * The uPlot charts. Each takes the numbers the daemon computed and draws them in the trade's units;
 * log axes get positive values only (a value ≤ 0 becomes a gap, per uPlot's log-scale rule).
 * Palettes (protocols/palette.ts, shared with the report): sweep order on a viridis-like
 * sequential ramp, categories in Okabe–Ito; every colour cue is doubled by a marker shape or dash.
 */
import uPlot from 'uplot';
import { displayUnit, parameterLabel } from '../../protocols/display-units.js';
import { OKABE_ITO, sweepColour } from '../../protocols/palette.js';
import type { PlotViewData, SolarSummary, WireEvent } from '../../protocols/wire.js';
import { axisText, displayView, linearRange, linearSplits, linearValues, logRange, logSplits, logValues, type DisplayView } from './axes.js';
import type { Envelope, SweepPoints } from './store.js';

type Shape = 'cross' | 'square' | 'dot' | 'ring';

function size(el: HTMLElement, h: number): { width: number; height: number } {
  return { width: Math.max(300, el.clientWidth), height: h };
}

/**
 * Draws markers at (xs, ys) on the plot's canvas (a draw hook): uPlot's faceted mode draws series
 * paths but not their points, so every marker here is drawn by the page. '×' negative current,
 * '□' compliance, '●' filled (in the fit window), '○' hollow (outside it).
 */
function drawPoints(u: uPlot, xs: ArrayLike<number>, ys: ArrayLike<number | null>, shape: Shape, color: string, radius = 4, alpha = 1): void {
  const ctx = u.ctx;
  const r = radius * devicePixelRatio;
  const { left, top, width, height } = u.bbox;
  ctx.save();
  ctx.globalAlpha = alpha;
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
    if (!Number.isFinite(px) || !Number.isFinite(py)) continue;
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

function drawSegment(u: uPlot, x: [number, number], y: [number, number], color: string, width: number, dash: number[] = [], alpha = 1): void {
  const ctx = u.ctx;
  ctx.save();
  ctx.globalAlpha = alpha;
  ctx.beginPath();
  ctx.rect(u.bbox.left, u.bbox.top, u.bbox.width, u.bbox.height);
  ctx.clip();
  ctx.strokeStyle = color;
  ctx.lineWidth = width * devicePixelRatio;
  ctx.setLineDash(dash.map((d) => d * devicePixelRatio));
  ctx.beginPath();
  ctx.moveTo(u.valToPos(x[0], 'x', true), u.valToPos(y[0], 'y', true));
  ctx.lineTo(u.valToPos(x[1], 'x', true), u.valToPos(y[1], 'y', true));
  ctx.stroke();
  ctx.restore();
}

/** Readings on the raw chart up to which each one gets a dot (beyond, lines only: drawing stays fast). */
const DOT_LIMIT = 5000;

/** Per-sweep arrays the raw chart draws, rebuilt only for sweeps that grew. */
interface RawCache {
  n: number;
  y: (number | null)[];
  negX: number[];
  negY: number[];
  compX: number[];
  compY: number[];
}

/**
 * Raw I–V of the sweeps kept (faceted: each sweep its own x), and for a past session the envelope
 * of every sweep (grey band: smallest to largest current in each bias bin).
 */
export class RawChart {
  plot: uPlot | null = null;
  private shape = '';
  private cache = new Map<number, RawCache>();
  private envelope: Envelope | null = null;
  private log = true;
  data: [null, ...[number[], (number | null)[]][]] = [null];

  /** `xLabel`: the x axis (the bias; the stress chart passes stress time in the points' `v`). */
  constructor(
    private readonly el: HTMLElement,
    private readonly xLabel = 'bias (V)',
  ) {}

  private sweepArrays(k: number, s: SweepPoints, log: boolean): RawCache {
    let c = this.cache.get(k);
    if (!c || c.n > s.v.length) {
      c = { n: 0, y: [], negX: [], negY: [], compX: [], compY: [] };
      this.cache.set(k, c);
    }
    for (let n = c.n; n < s.v.length; n++) {
      const i = s.i[n];
      // A reading at compliance is marked (□) but not joined to the curve: the bias was not held.
      const off = (s.flags[n] & 1) !== 0;
      c.y.push(off ? null : log ? (Math.abs(i) > 0 && Number.isFinite(i) ? Math.abs(i) : null) : Number.isFinite(i) ? i : null);
      if (log && i < 0) {
        c.negX.push(s.v[n]);
        c.negY.push(-i);
      }
      if (s.flags[n] & 1) {
        c.compX.push(s.v[n]);
        c.compY.push(log ? Math.abs(i) : i);
      }
    }
    c.n = s.v.length;
    return c;
  }

  /**
   * `byBias`: draw each sweep's readings in bias order rather than in the order taken (an adaptive
   * sweep goes back and forth between levels; joined in time order its curve would zigzag). Up-down
   * sweeps keep their order, so their two legs stay apart.
   */
  update(sweeps: Map<number, SweepPoints>, log: boolean, envelope: Envelope | null = null, byBias = false): void {
    if (log !== this.log) this.cache.clear();
    this.log = log;
    this.envelope = envelope;
    const keys = [...sweeps.keys()].sort((a, b) => a - b);
    for (const k of this.cache.keys()) if (!sweeps.has(k)) this.cache.delete(k);
    const data: [null, ...[number[], (number | null)[]][]] = [null];
    for (const k of keys) {
      const s = sweeps.get(k) as SweepPoints;
      const y = this.sweepArrays(k, s, log).y;
      if (!byBias) {
        data.push([s.v, y]);
        continue;
      }
      const order = Array.from(s.v, (_, j) => j).sort((a, b) => s.v[a] - s.v[b]);
      data.push([order.map((j) => s.v[j]), order.map((j) => y[j])]);
    }
    // The envelope as two invisible series, so the axes take it in.
    const ev = envelope?.v ?? [];
    const eLo = envelope ? (log ? envelope.lo : envelope.min) : [];
    const eHi = envelope ? (log ? envelope.hi : envelope.max) : [];
    data.push([ev, eLo], [ev, eHi]);
    this.data = data;
    const shape = `${log}:${keys.join(',')}`;
    if (!this.plot || shape !== this.shape) {
      this.plot?.destroy();
      this.el.textContent = '';
      const series: uPlot.Series[] = [{}];
      keys.forEach((k, n) =>
        series.push({
          label: `sweep ${k}`,
          stroke: sweepColour(n, keys.length),
          width: 1.5,
          points: { show: false },
          paths: uPlot.paths.linear?.(),
        } as uPlot.Series),
      );
      series.push({ label: 'envelope low', stroke: 'transparent', paths: () => null, points: { show: false } } as uPlot.Series);
      series.push({ label: 'envelope high', stroke: 'transparent', paths: () => null, points: { show: false } } as uPlot.Series);
      const nSweeps = keys.length;
      this.plot = new uPlot(
        {
          mode: 2,
          ...size(this.el, 340),
          legend: { show: false },
          cursor: { drag: { x: true, y: true, setScale: true } },
          scales: { x: { time: false, range: linearRange }, y: log ? { distr: 3, range: logRange } : { range: linearRange } },
          hooks: {
            drawClear: [(u: uPlot) => this.drawEnvelope(u)],
            draw: [
              (u: uPlot) => {
                // Small dots on the readings while they are few enough to tell apart; lines beyond.
                let total = 0;
                for (const c of this.cache.values()) total += c.n;
                for (let n = 0; n < nSweeps; n++) {
                  const c = this.cache.get(keys[n]);
                  if (!c) continue;
                  const d = u.data[n + 1] as unknown as [number[], (number | null)[]];
                  if (total <= DOT_LIMIT) drawPoints(u, d[0], d[1], 'dot', sweepColour(n, nSweeps), 1.6);
                  if (c.negX.length) drawPoints(u, c.negX, c.negY, 'cross', OKABE_ITO.vermillion);
                  if (c.compX.length) drawPoints(u, c.compX, c.compY, 'square', OKABE_ITO.black);
                }
              },
            ],
          },
          axes: [
            { label: this.xLabel, stroke: '#1b1b1b', splits: linearSplits(), values: linearValues },
            log
              ? { label: '|I| (A)', stroke: '#1b1b1b', size: 78, splits: logSplits, values: logValues }
              : { label: 'I (A)', stroke: '#1b1b1b', size: 78, splits: linearSplits(), values: linearValues },
          ],
          series,
        },
        data as unknown as uPlot.AlignedData,
        this.el,
      );
    } else {
      this.plot.setData(data as unknown as uPlot.AlignedData);
    }
    this.shape = shape;
  }

  private drawEnvelope(u: uPlot): void {
    const e = this.envelope;
    if (!e || e.v.length === 0) return;
    const lo = this.log ? e.lo : e.min;
    const hi = this.log ? e.hi : e.max;
    const ctx = u.ctx;
    ctx.save();
    ctx.beginPath();
    ctx.rect(u.bbox.left, u.bbox.top, u.bbox.width, u.bbox.height);
    ctx.clip();
    ctx.fillStyle = 'rgba(120, 120, 120, 0.22)';
    ctx.strokeStyle = 'rgba(90, 90, 90, 0.6)';
    ctx.lineWidth = devicePixelRatio;
    // One polygon per run of bins that hold readings.
    let k = 0;
    while (k < e.v.length) {
      while (k < e.v.length && (lo[k] === null || hi[k] === null)) k++;
      const start = k;
      while (k < e.v.length && lo[k] !== null && hi[k] !== null) k++;
      if (k - start < 1) continue;
      ctx.beginPath();
      for (let j = start; j < k; j++) {
        const px = u.valToPos(e.v[j], 'x', true);
        const py = u.valToPos(hi[j] as number, 'y', true);
        if (j === start) ctx.moveTo(px, py);
        else ctx.lineTo(px, py);
      }
      for (let j = k - 1; j >= start; j--) ctx.lineTo(u.valToPos(e.v[j], 'x', true), u.valToPos(lo[j] as number, 'y', true));
      ctx.closePath();
      ctx.fill();
      ctx.stroke();
    }
    ctx.restore();
  }
}

/**
 * The linearized view with its fit line, window band and regimes, and the residuals under it. While
 * a new sweep has too few points in the window, the previous complete sweep is drawn dimmed under
 * it (`under`), so the plot never empties between sweeps.
 */
export class LinearizedChart {
  plot: uPlot | null = null;
  resid: uPlot | null = null;
  /** The view drawn (as the daemon sent it, SI) and in display units. */
  view: PlotViewData | null = null;
  shown: DisplayView | null = null;
  under: DisplayView | null = null;
  private key = '';

  /** Whole curve, or (default) the fit window with a margin: the axes then follow the window's points. */
  wholeCurve = false;

  constructor(
    private readonly el: HTMLElement,
    private readonly residEl: HTMLElement,
    private readonly onWindow: (from: number, to: number) => void,
  ) {}

  update(view: PlotViewData | undefined, under: PlotViewData | null = null): void {
    this.view = view ?? null;
    const main = view ? displayView(view) : null;
    const dim = under ? displayView(under) : null;
    this.shown = main;
    this.under = dim;
    // The plot's axes follow the view with points: the sweep's own, else the one standing in.
    // No view, or a sweep with no point on the mechanism's plot (every reading at compliance, at
    // the floor or at zero bias), and nothing to stand in: no plot (never one of another sweep
    // under this sweep's title); the page says why beside it.
    const ref = main?.x.length ? main : dim?.x.length ? dim : null;
    if (!ref) {
      this.clear();
      return;
    }
    const split = (v: DisplayView | null) => {
      const o = {
        inX: [] as number[],
        inY: [] as number[],
        outX: [] as number[],
        outY: [] as number[],
        rInX: [] as number[],
        rInY: [] as number[],
        rOutX: [] as number[],
        rOutY: [] as number[],
      };
      if (!v) return o;
      for (let k = 0; k < v.x.length; k++) {
        const win = v.inWindow[k] === 1;
        (win ? o.inX : o.outX).push(v.x[k]);
        (win ? o.inY : o.outY).push(v.y[k]);
        const r = v.residual[k];
        if (r !== null) {
          (win ? o.rInX : o.rOutX).push(v.x[k]);
          (win ? o.rInY : o.rOutY).push(r);
        }
      }
      return o;
    };
    const a = split(main);
    const b = split(dim);
    const line = main?.line ? [main.line.x, main.line.y] : [[], []];
    const regimes = main?.regimes ?? [];
    const data = [null, [a.inX, a.inY], [a.outX, a.outY], line, [b.inX, b.inY], [b.outX, b.outY], ...regimes.map((g) => [g.x, g.y])];
    const rdata = [null, [a.rInX, a.rInY], [a.rOutX, a.rOutY], [b.rInX, b.rInY], [b.rOutX, b.rOutY]];
    const key = `${ref.model}:${regimes.length}:${ref.axes.x.kind}:${ref.axes.y.kind}:${ref.xUnit}:${ref.yUnit}:${ref.axes.x.label}:${ref.axes.y.label}`;
    const xlog = ref.axes.x.kind === 'log';
    const ylog = ref.axes.y.kind === 'log';
    if (!this.plot || key !== this.key) {
      this.plot?.destroy();
      this.resid?.destroy();
      this.el.textContent = '';
      this.residEl.textContent = '';
      const hidden = { paths: () => null, points: { show: false } };
      const series: uPlot.Series[] = [
        {},
        { label: 'in window', stroke: OKABE_ITO.blue, ...hidden },
        { label: 'outside window', stroke: OKABE_ITO.orange, ...hidden },
        { label: 'fit', stroke: OKABE_ITO.black, width: 2, points: { show: false } },
        { label: 'previous sweep, in window', stroke: '#999', ...hidden },
        { label: 'previous sweep, outside', stroke: '#999', ...hidden },
        ...regimes.map((_, n) => ({ label: `regime ${n + 1}`, stroke: OKABE_ITO.purple, width: 1.5, dash: [6, 4], points: { show: false } })),
      ];
      const xAxis: uPlot.Axis = xlog
        ? { label: axisText(ref.axes.x.label, ref.xUnit), stroke: '#1b1b1b', splits: logSplits, values: logValues }
        : { label: axisText(ref.axes.x.label, ref.xUnit), stroke: '#1b1b1b', splits: linearSplits(), values: linearValues };
      this.plot = new uPlot(
        {
          mode: 2,
          ...size(this.el, 320),
          legend: { show: false },
          cursor: { drag: { x: true, y: false, setScale: false } },
          select: { show: true, left: 0, top: 0, width: 0, height: 0 },
          scales: {
            x: xlog ? { time: false, distr: 3, range: logRange } : { time: false, range: linearRange },
            y: ylog ? { distr: 3, range: logRange } : { range: linearRange },
          },
          axes: [
            xAxis,
            ylog
              ? { label: axisText(ref.axes.y.label, ref.yUnit), stroke: '#1b1b1b', size: 80, splits: logSplits, values: logValues }
              : { label: axisText(ref.axes.y.label, ref.yUnit), stroke: '#1b1b1b', size: 80, splits: linearSplits(), values: linearValues },
          ],
          series,
          hooks: {
            drawClear: [(u: uPlot) => this.drawWindow(u)],
            draw: [
              (u: uPlot) => {
                const d = u.data as unknown as [null, ...[number[], number[]][]];
                // The previous sweep first, dimmed; then the live points over it.
                if (this.under) {
                  drawPoints(u, d[5][0], d[5][1], 'ring', '#8a8a8a', 3, 0.55);
                  drawPoints(u, d[4][0], d[4][1], 'dot', '#8a8a8a', 3, 0.55);
                  if (this.under.line) drawSegment(u, this.under.line.x, this.under.line.y, '#6b6b6b', 2, [5, 4], 0.8);
                }
                drawPoints(u, d[2][0], d[2][1], 'ring', OKABE_ITO.orange, 3.5);
                drawPoints(u, d[1][0], d[1][1], 'dot', OKABE_ITO.blue, 3.5);
                // The fit line again, on top of the points.
                const l = this.shown?.line;
                if (l) drawSegment(u, l.x, l.y, OKABE_ITO.black, 2);
              },
            ],
            setSelect: [
              (u: uPlot) => {
                if (u.select.width < 4) return;
                const x0 = u.posToVal(u.select.left, 'x');
                const x1 = u.posToVal(u.select.left + u.select.width, 'x');
                u.setSelect({ left: 0, top: 0, width: 0, height: 0 }, false);
                this.selected(Math.min(x0, x1), Math.max(x0, x1));
              },
            ],
          },
        },
        data as unknown as uPlot.AlignedData,
        this.el,
      );
      this.resid = new uPlot(
        {
          mode: 2,
          ...size(this.residEl, 170),
          legend: { show: false },
          cursor: { drag: { x: false, y: false } },
          scales: {
            x: xlog ? { time: false, distr: 3, range: logRange } : { time: false, range: linearRange },
            y: {
              range: (_u, min, max) => {
                const r = Math.max(Math.abs(min), Math.abs(max)) * 1.15 || 1;
                return [-r, r];
              },
            },
          },
          axes: [
            { ...xAxis },
            { label: ylog ? 'ln residual' : axisText('residual', ref.yUnit), stroke: '#1b1b1b', size: 80, splits: linearSplits(4), values: linearValues },
          ],
          series: [
            {},
            { label: 'in window', stroke: OKABE_ITO.blue, ...hidden },
            { label: 'outside', stroke: OKABE_ITO.orange, ...hidden },
            { label: 'previous, in window', stroke: '#999', ...hidden },
            { label: 'previous, outside', stroke: '#999', ...hidden },
          ],
          hooks: {
            draw: [
              (u: uPlot) => {
                const y0 = u.valToPos(0, 'y', true);
                u.ctx.save();
                u.ctx.strokeStyle = '#1b1b1b';
                u.ctx.beginPath();
                u.ctx.moveTo(u.bbox.left, y0);
                u.ctx.lineTo(u.bbox.left + u.bbox.width, y0);
                u.ctx.stroke();
                u.ctx.restore();
                const d = u.data as unknown as [null, ...[number[], number[]][]];
                if (this.under) {
                  drawPoints(u, d[4][0], d[4][1], 'ring', '#8a8a8a', 2.5, 0.55);
                  drawPoints(u, d[3][0], d[3][1], 'dot', '#8a8a8a', 2.5, 0.55);
                }
                drawPoints(u, d[2][0], d[2][1], 'ring', OKABE_ITO.orange, 3);
                drawPoints(u, d[1][0], d[1][1], 'dot', OKABE_ITO.blue, 3);
              },
            ],
          },
        },
        rdata as unknown as uPlot.AlignedData,
        this.residEl,
      );
      this.key = key;
    } else {
      this.plot.setData(data as unknown as uPlot.AlignedData);
      this.resid?.setData(rdata as unknown as uPlot.AlignedData);
    }
    this.focus(main?.window ? main : dim?.window ? dim : (main ?? dim));
  }

  /** Removes the plots (they are built again, with the next view's axes, by the next update). */
  private clear(): void {
    this.plot?.destroy();
    this.resid?.destroy();
    this.plot = null;
    this.resid = null;
    this.key = '';
    this.el.textContent = '';
    this.residEl.textContent = '';
  }

  private focus(view: DisplayView | null): void {
    const u = this.plot;
    if (!u || !view) return;
    const xlog = view.axes.x.kind === 'log';
    const ylog = view.axes.y.kind === 'log';
    if (!view.window || this.wholeCurve) {
      // Everything: let uPlot range over all the data again.
      u.setData(u.data, true);
      this.resid?.setData(this.resid.data, true);
      return;
    }
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
    for (const v of [this.shown, this.under]) {
      if (!v) continue;
      for (let k = 0; k < v.x.length; k++) {
        if (v.x[k] < x0 || v.x[k] > x1) continue;
        lo = Math.min(lo, v.y[k]);
        hi = Math.max(hi, v.y[k]);
        const r = v.residual[k];
        if (r !== null) {
          rlo = Math.min(rlo, r);
          rhi = Math.max(rhi, r);
        }
      }
    }
    if (!Number.isFinite(lo)) return;
    u.batch(() => {
      u.setScale('x', { min: x0, max: x1 });
      const [ya, yb] = (ylog ? logRange : linearRange)(u, lo, hi, 'y') as [number, number];
      u.setScale('y', { min: ya, max: yb });
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
    const w = this.shown?.window ?? this.under?.window;
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
  selected(x0: number, x1: number): void {
    let lo = Infinity;
    let hi = -Infinity;
    for (const v of [this.shown, this.under]) {
      if (!v) continue;
      for (let k = 0; k < v.x.length; k++) {
        if (v.x[k] >= x0 && v.x[k] <= x1) {
          lo = Math.min(lo, v.bias[k]);
          hi = Math.max(hi, v.bias[k]);
        }
      }
    }
    if (Number.isFinite(lo) && hi > lo) this.onWindow(lo, hi);
  }
}

type Drift = Extract<WireEvent, { type: 'drift' }>;

/** Where the drift watch started a new baseline: the sweep, and why. */
export interface DriftBreak {
  readonly sweep: number;
  readonly reason: string;
}

/**
 * Splits the drift events into baselines: a new one starts when the charted parameter or the chart
 * method changes, when the daemon's phase goes back to 'baseline' after monitoring, or when the
 * analysis settings changed the model or its inputs in between (`restarts`: sequence numbers of
 * such settings events; the daemon restarts the baseline then).
 */
export function driftSegments(drift: readonly Drift[], restarts: readonly number[] = []): { points: Drift[]; breaks: DriftBreak[] }[] {
  const d = [...drift].sort((a, b) => a.sweep - b.sweep);
  const out: { points: Drift[]; breaks: DriftBreak[] }[] = [];
  let cur: Drift[] = [];
  const breaks: DriftBreak[] = [];
  for (const p of d) {
    const prev = cur.at(-1);
    const settings = prev !== undefined && restarts.some((r) => r > prev.seq && r < p.seq);
    const restart =
      prev !== undefined && (settings || p.parameter !== prev.parameter || p.method !== prev.method || (p.phase === 'baseline' && prev.phase === 'monitor'));
    if (restart && prev) {
      out.push({ points: cur, breaks: [] });
      breaks.push({
        sweep: p.sweep,
        reason:
          p.parameter !== prev.parameter
            ? `now ${parameterLabel(p.parameter)}`
            : p.method !== prev.method
              ? `now ${p.method.toUpperCase()}`
              : 'analysis changed',
      });
      cur = [];
    }
    cur.push(p);
  }
  if (cur.length) out.push({ points: cur, breaks: [] });
  if (out.length) out[out.length - 1].breaks.push(...breaks);
  return out;
}

/**
 * The drift chart: the charted parameter per sweep, the EWMA (or CUSUM) statistic and its limits,
 * in the parameter's display unit. A new baseline (model or parameter changed) is drawn as a break:
 * a dashed vertical line, and only the current baseline's parameter is plotted.
 */
export class DriftChart {
  plot: uPlot | null = null;
  private key = '';
  breaks: DriftBreak[] = [];
  private xRange: [number, number] = [0, 1];
  /** The x positions of the points drawn (sweep numbers), for tests. */
  drawnSweeps: number[] = [];

  constructor(private readonly el: HTMLElement) {}

  update(drift: Drift[], unitOf: (parameter: string) => string, restarts: readonly number[] = []): void {
    if (drift.length === 0) {
      // A new session (or one without drift): no chart of another session's sweeps stays up.
      this.plot?.destroy();
      this.plot = null;
      this.key = '';
      this.breaks = [];
      this.drawnSweeps = [];
      this.el.textContent = '';
      return;
    }
    const segs = driftSegments(drift, restarts);
    const last = segs[segs.length - 1];
    const ref = last.points[0];
    const same = segs.filter((s) => s.points[0].parameter === ref.parameter && s.points[0].method === ref.method);
    const cusum = ref.method === 'cusum';
    const du = displayUnit(unitOf(ref.parameter), ref.parameter);
    const sc = (x: number | null) => (x === null ? null : x * du.scale);
    const xs: number[] = [];
    const cols: (number | null)[][] = [[], [], [], []];
    for (const s of same) {
      if (xs.length) {
        // A gap between baselines: no line runs across the break.
        xs.push(s.points[0].sweep - 0.5);
        for (const c of cols) c.push(null);
      }
      for (const p of s.points) {
        xs.push(p.sweep);
        cols[0].push(cusum ? null : sc(p.value));
        cols[1].push(sc(p.statistic));
        cols[2].push(sc(p.upper));
        cols[3].push(sc(p.lower));
      }
    }
    this.breaks = last.breaks;
    this.drawnSweeps = xs.filter((x) => Number.isInteger(x));
    // Sweeps on x: from the current baseline's first break (or the first point) to the last, at
    // least six sweeps wide so one point does not fill the axis.
    const x0 = Math.min(xs[0], ...this.breaks.map((b) => b.sweep - 0.5)) - 0.5;
    const x1 = Math.max(xs[xs.length - 1] + 0.5, x0 + 6);
    this.xRange = [x0, x1];
    const data = [xs, ...cols];
    const key = `${ref.parameter}:${ref.method}:${du.unit}`;
    const yLabel = axisText(cusum ? `CUSUM of ${parameterLabel(ref.parameter)}` : parameterLabel(ref.parameter), du.unit);
    if (!this.plot || key !== this.key) {
      this.plot?.destroy();
      this.el.textContent = '';
      this.plot = new uPlot(
        {
          ...size(this.el, 200),
          legend: { show: false },
          scales: { x: { time: false, range: () => this.xRange }, y: { range: linearRange } },
          axes: [
            { label: 'sweep', stroke: '#1b1b1b', splits: (_u, _a, min, max) => intTicks(min, max), values: (_u, v) => v.map((x) => String(Math.round(x))) },
            { label: yLabel, stroke: '#1b1b1b', size: 72, splits: linearSplits(4), values: linearValues },
          ],
          series: [
            {},
            { label: ref.parameter, stroke: OKABE_ITO.blue, points: { show: true, size: 7 }, width: 1 },
            { label: cusum ? 'CUSUM' : 'EWMA', stroke: OKABE_ITO.black, width: 2, points: { show: true, size: 5 } },
            { label: 'upper limit', stroke: OKABE_ITO.vermillion, dash: [6, 4], width: 1.5, points: { show: false } },
            { label: 'lower limit', stroke: OKABE_ITO.vermillion, dash: [6, 4], width: 1.5, points: { show: false } },
          ],
          hooks: {
            draw: [
              (u: uPlot) => {
                const ctx = u.ctx;
                for (const b of this.breaks) {
                  const x = u.valToPos(b.sweep - 0.5, 'x', true);
                  if (x < u.bbox.left || x > u.bbox.left + u.bbox.width) continue;
                  ctx.save();
                  ctx.strokeStyle = '#1b1b1b';
                  ctx.setLineDash([3 * devicePixelRatio, 3 * devicePixelRatio]);
                  ctx.lineWidth = 1.5 * devicePixelRatio;
                  ctx.beginPath();
                  ctx.moveTo(x, u.bbox.top);
                  ctx.lineTo(x, u.bbox.top + u.bbox.height);
                  ctx.stroke();
                  ctx.setLineDash([]);
                  ctx.fillStyle = '#1b1b1b';
                  ctx.textAlign = 'left';
                  ctx.textBaseline = 'top';
                  ctx.font = `${11 * devicePixelRatio}px system-ui, sans-serif`;
                  ctx.fillText(`new baseline (${b.reason})`, x + 4 * devicePixelRatio, u.bbox.top + 3 * devicePixelRatio);
                  ctx.restore();
                }
              },
            ],
          },
        },
        data as uPlot.AlignedData,
        this.el,
      );
      this.key = key;
    } else this.plot.setData(data as uPlot.AlignedData);
  }
}

/** Whole-number ticks (sweeps), about six of them. */
function intTicks(min: number, max: number): number[] {
  const a = Math.ceil(min);
  const b = Math.floor(max);
  const step = [1, 2, 5, 10, 20, 50, 100, 200, 500, 1000, 2000, 5000, 10000].find((s) => (b - a) / s <= 6) ?? 20000;
  const out: number[] = [];
  for (let x = Math.ceil(a / step) * step; x <= b; x += step) out.push(x);
  return out;
}

/**
 * An illuminated cell's I–V in the generator convention (delivered current positive): the measured
 * readings ●, the fitted single-diode model (line), and the maximum-power point ■ with its
 * rectangle (V_mp × I_mp, the area that is P_max). All numbers are the daemon's; the readings are
 * only flipped in sign when the instrument recorded them in the load convention.
 */
export class SolarChart {
  plot: uPlot | null = null;
  solar: SolarSummary | null = null;

  constructor(private readonly el: HTMLElement) {}

  update(solar: SolarSummary, measured: SweepPoints | undefined): void {
    this.solar = solar;
    const sign = solar.convention === 'load' ? -1 : 1;
    const mv = measured?.v ?? [];
    const mi = (measured?.i ?? []).map((i, k) => ((measured?.flags[k] ?? 0) & 1 ? null : sign * i));
    const curve = solar.curve ?? { v: [], i: [] };
    const data = [null, [mv, mi], [curve.v, curve.i]];
    if (!this.plot) {
      this.el.textContent = '';
      this.plot = new uPlot(
        {
          mode: 2,
          ...size(this.el, 260),
          legend: { show: false },
          cursor: { drag: { x: true, y: true, setScale: true } },
          scales: { x: { time: false, range: linearRange }, y: { range: linearRange } },
          axes: [
            { label: 'bias (V)', stroke: '#1b1b1b', splits: linearSplits(), values: linearValues },
            { label: 'delivered current I (A)', stroke: '#1b1b1b', size: 78, splits: linearSplits(), values: linearValues },
          ],
          series: [
            {},
            { label: 'measured', stroke: OKABE_ITO.blue, paths: () => null, points: { show: false } },
            { label: 'single-diode fit', stroke: OKABE_ITO.black, width: 2, points: { show: false } },
          ],
          hooks: {
            draw: [
              (u: uPlot) => {
                const d = u.data as unknown as [null, [number[], (number | null)[]]];
                drawPoints(u, d[1][0], d[1][1], 'dot', OKABE_ITO.blue, 2.5);
                const f = this.solar?.figures;
                if (!f?.vmp || !f.imp) return;
                const ctx = u.ctx;
                const x0 = u.valToPos(0, 'x', true);
                const y0 = u.valToPos(0, 'y', true);
                const x1 = u.valToPos(f.vmp.value, 'x', true);
                const y1 = u.valToPos(f.imp.value, 'y', true);
                ctx.save();
                ctx.fillStyle = 'rgba(230, 159, 0, 0.15)';
                ctx.strokeStyle = OKABE_ITO.orange;
                ctx.setLineDash([5 * devicePixelRatio, 3 * devicePixelRatio]);
                ctx.fillRect(Math.min(x0, x1), Math.min(y0, y1), Math.abs(x1 - x0), Math.abs(y1 - y0));
                ctx.strokeRect(Math.min(x0, x1), Math.min(y0, y1), Math.abs(x1 - x0), Math.abs(y1 - y0));
                ctx.restore();
                drawPoints(u, [f.vmp.value], [f.imp.value], 'square', OKABE_ITO.vermillion, 5);
              },
            ],
          },
        },
        data as unknown as uPlot.AlignedData,
        this.el,
      );
    } else this.plot.setData(data as unknown as uPlot.AlignedData);
  }
}
