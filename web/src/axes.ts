/**
 * Axis ticks and the trade's units for the charts. Ticks come from the shared number formatter
 * (protocols/number-format.ts, as in the report and the CLI): linear axes get round steps with at
 * least three labels that never repeat; log axes get decades, or 1-2-5 steps on narrow ranges
 * (uPlot's own log increments end near 1e-16, far above a Fowler–Nordheim J/E²).
 * A view from the daemon (SI) is converted to display units here — a change of unit, no physics.
 */
import type uPlot from 'uplot';
import { displayUnit } from '../../protocols/display-units.js';
import { formatLogTicks, formatTicks, logTicks, niceTicks } from '../../protocols/number-format.js';
import type { PlotViewData } from '../../protocols/wire.js';

export const linearSplits =
  (count = 5) =>
  (_u: uPlot, _axis: number, min: number, max: number): number[] =>
    niceTicks(min, max, count);
export const linearValues = (_u: uPlot, splits: number[]): string[] => formatTicks(splits);
export const logSplits = (_u: uPlot, _axis: number, min: number, max: number): number[] => logTicks(min, max);
export const logValues = (_u: uPlot, splits: number[]): string[] => formatLogTicks(splits);

/** Log-axis range: whole decades around the data, or 1-2-5 steps when it spans less than one. */
export const logRange: uPlot.Range.Function = (_u, min, max) => {
  if (!(max > 0)) return [1e-15, 1e-3];
  const lo = min > 0 ? min : max / 1e6;
  const a = Math.floor(Math.log10(lo) + 1e-9);
  const b = Math.ceil(Math.log10(max) - 1e-9);
  if (b - a >= 2) return [10 ** a, 10 ** b];
  // Narrow: snap to the 1-2-5 steps around the data so the axis keeps three labelled ticks.
  const steps = [1, 2, 5, 10];
  const down = (x: number) => {
    const e = Math.floor(Math.log10(x));
    const m = x / 10 ** e;
    return [...steps].reverse().find((s) => s <= m * (1 + 1e-9))! * 10 ** e;
  };
  const up = (x: number) => {
    const e = Math.floor(Math.log10(x));
    const m = x / 10 ** e;
    return steps.find((s) => s >= m * (1 - 1e-9))! * 10 ** e;
  };
  const l = down(lo);
  const h = up(max);
  return [l, h > l ? h : l * 10];
};

/** Linear range with a 5 % margin; a single value gets ±5 % (or ±1) instead of a zero-width axis. */
export const linearRange: uPlot.Range.Function = (_u, min, max) => {
  if (!Number.isFinite(min) || !Number.isFinite(max)) return [0, 1];
  if (max === min) {
    const d = Math.abs(max) * 0.05 || 1;
    return [min - d, max + d];
  }
  const pad = 0.05 * (max - min);
  return [min - pad, max + pad];
};

/** A view in display units: x, y, line, window and regimes scaled; residuals in ln units stay. */
export interface DisplayView extends PlotViewData {
  readonly xUnit: string;
  readonly yUnit: string;
}

export function displayView(v: PlotViewData): DisplayView {
  const dx = displayUnit(v.axes.x.unit);
  const dy = displayUnit(v.axes.y.unit);
  const sx = (x: number) => x * dx.scale;
  const sy = (y: number) => y * dy.scale;
  const pair = (p: [number, number], f: (x: number) => number): [number, number] => [f(p[0]), f(p[1])];
  return {
    ...v,
    xUnit: dx.unit,
    yUnit: dy.unit,
    x: v.x.map(sx),
    y: v.y.map(sy),
    // Residuals of log plots are in ln units (unchanged by a unit); of linear plots, in y's unit.
    residual: v.axes.y.kind === 'log' ? v.residual : v.residual.map((r) => (r === null ? null : sy(r))),
    line: v.line ? { x: pair(v.line.x, sx), y: pair(v.line.y, sy) } : null,
    window: v.window ? { x: pair(v.window.x, sx), bias: v.window.bias } : null,
    regimes: v.regimes.map((g) => ({ x: pair(g.x, sx), y: pair(g.y, sy) })),
  };
}

export function axisText(label: string, unit: string): string {
  return unit ? `${label} (${unit})` : label;
}
