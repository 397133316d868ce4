/**
 * Small, dependency-free SVG charts for the offline report: scatter and line series on linear or
 * log axes (a log axis shows the quantity on a log scale, with decade ticks), shaded x bands,
 * dashed lines and two marker shapes, so no cue rests on colour alone. Output is a string.
 */

export interface SvgSeries {
  readonly x: readonly number[];
  readonly y: readonly (number | null)[];
  readonly color: string;
  readonly line?: boolean;
  readonly dash?: string;
  readonly marker?: 'dot' | 'ring' | 'cross' | 'square' | 'none';
  readonly label?: string;
  readonly width?: number;
}

export interface SvgChart {
  readonly width?: number;
  readonly height?: number;
  readonly xLabel: string;
  readonly yLabel: string;
  readonly xLog?: boolean;
  readonly yLog?: boolean;
  readonly series: readonly SvgSeries[];
  readonly bands?: readonly { x0: number; x1: number; color: string }[];
  readonly title?: string;
  /** Horizontal reference lines (e.g. control limits). */
  readonly hlines?: readonly { y: number; color: string; dash?: string; label?: string }[];
  /** Vertical reference lines with a label (e.g. where a drift baseline starts again). */
  readonly vlines?: readonly { x: number; color: string; dash?: string; label?: string }[];
  /** Whole-number ticks only on x (sweep numbers). */
  readonly xInteger?: boolean;
  /** Filled rectangles in data coordinates (e.g. V_mp × I_mp). */
  readonly rects?: readonly { x0: number; y0: number; x1: number; y1: number; fill: string; stroke: string }[];
}

import { formatLogTicks, formatTicks, logTicks, niceTicks } from '../../protocols/number-format.js';

const esc = (s: string) => s.replace(/&/g, '&amp;').replace(/</g, '&lt;').replace(/>/g, '&gt;').replace(/"/g, '&quot;');

export function svgChart(c: SvgChart): string {
  const W = c.width ?? 460;
  const H = c.height ?? 280;
  const L = 72;
  const R = 12;
  const T = c.title ? 26 : 12;
  const B = 44;
  const fx = (v: number) => (c.xLog ? (v > 0 ? Math.log10(v) : Number.NaN) : v);
  const fy = (v: number) => (c.yLog ? (v > 0 ? Math.log10(v) : Number.NaN) : v);
  let x0 = Infinity;
  let x1 = -Infinity;
  let y0 = Infinity;
  let y1 = -Infinity;
  for (const s of c.series) {
    for (let k = 0; k < s.x.length; k++) {
      const y = s.y[k];
      if (y === null || y === undefined) continue;
      const a = fx(s.x[k]);
      const b = fy(y);
      if (!Number.isFinite(a) || !Number.isFinite(b)) continue;
      x0 = Math.min(x0, a);
      x1 = Math.max(x1, a);
      y0 = Math.min(y0, b);
      y1 = Math.max(y1, b);
    }
  }
  for (const h of c.hlines ?? []) {
    const b = fy(h.y);
    if (Number.isFinite(b)) {
      y0 = Math.min(y0, b);
      y1 = Math.max(y1, b);
    }
  }
  if (!Number.isFinite(x0))
    return `<svg class="chart" width="${W}" height="${H}" role="img"><text x="${W / 2}" y="${H / 2}" text-anchor="middle">no data to plot</text></svg>`;
  if (c.yLog) {
    y0 = Math.floor(y0);
    y1 = Math.max(y0 + 1, Math.ceil(y1));
  } else {
    const pad = (y1 - y0 || Math.abs(y1) || 1) * 0.05;
    y0 -= pad;
    y1 += pad;
  }
  if (c.xLog) {
    x0 = Math.floor(x0);
    x1 = Math.max(x0 + 1, Math.ceil(x1));
  } else if (x1 === x0) {
    x0 -= 0.5;
    x1 += 0.5;
  }
  const px = (a: number) => L + ((a - x0) / (x1 - x0)) * (W - L - R);
  const py = (b: number) => H - B - ((b - y0) / (y1 - y0)) * (H - T - B);
  const parts: string[] = [];
  parts.push(
    `<svg class="chart" xmlns="http://www.w3.org/2000/svg" width="${W}" height="${H}" viewBox="0 0 ${W} ${H}" role="img"${c.title ? ` aria-label="${esc(c.title)}"` : ''}>`,
  );
  if (c.title) parts.push(`<text x="${L}" y="16" class="t">${esc(c.title)}</text>`);
  for (const b of c.bands ?? []) {
    const a = px(fx(b.x0));
    const z = px(fx(b.x1));
    if (Number.isFinite(a) && Number.isFinite(z))
      parts.push(
        `<rect x="${Math.min(a, z).toFixed(1)}" y="${T}" width="${Math.abs(z - a).toFixed(1)}" height="${H - T - B}" fill="${b.color}" stroke="#0072B2" stroke-dasharray="4 3"/>`,
      );
  }
  // Axes and ticks.
  // Ticks in value space (log axes: decades, or 1-2-5 steps on narrow ranges), labelled so that no
  // two labels on an axis read the same.
  const ticks = (lo: number, hi: number, log: boolean): { at: number; label: string }[] => {
    if (log) {
      const t = logTicks(10 ** lo, 10 ** hi);
      const labels = formatLogTicks(t);
      return t.map((v, k) => ({ at: Math.log10(v), label: labels[k] }));
    }
    const t = niceTicks(lo, hi);
    const labels = formatTicks(t);
    return t.map((v, k) => ({ at: v, label: labels[k] }));
  };
  parts.push(`<rect x="${L}" y="${T}" width="${W - L - R}" height="${H - T - B}" fill="none" stroke="#888"/>`);
  let xticks = ticks(x0, x1, Boolean(c.xLog));
  if (c.xInteger && !c.xLog) {
    const whole = xticks.filter((t) => Math.abs(t.at - Math.round(t.at)) < 1e-9);
    xticks =
      whole.length >= 2
        ? whole.map((t) => ({ at: t.at, label: String(Math.round(t.at)) }))
        : Array.from({ length: Math.floor(x1) - Math.ceil(x0) + 1 }, (_x, k) => ({ at: Math.ceil(x0) + k, label: String(Math.ceil(x0) + k) }));
  }
  for (const t of xticks) {
    const X = px(t.at).toFixed(1);
    parts.push(
      `<line x1="${X}" y1="${T}" x2="${X}" y2="${H - B}" stroke="#e4e1d8"/><text x="${X}" y="${H - B + 14}" text-anchor="middle">${esc(t.label)}</text>`,
    );
  }
  for (const t of ticks(y0, y1, Boolean(c.yLog))) {
    const Y = py(t.at).toFixed(1);
    parts.push(
      `<line x1="${L}" y1="${Y}" x2="${W - R}" y2="${Y}" stroke="#e4e1d8"/><text x="${L - 4}" y="${Y}" text-anchor="end" dominant-baseline="middle">${esc(t.label)}</text>`,
    );
  }
  parts.push(`<text x="${(L + W - R) / 2}" y="${H - 8}" text-anchor="middle" class="ax">${esc(c.xLabel)}</text>`);
  parts.push(`<text transform="translate(14 ${(T + H - B) / 2}) rotate(-90)" text-anchor="middle" class="ax">${esc(c.yLabel)}</text>`);
  parts.push(`<g clip-path="none">`);
  for (const r of c.rects ?? []) {
    const xa = px(fx(r.x0));
    const xb = px(fx(r.x1));
    const ya = py(fy(r.y0));
    const yb = py(fy(r.y1));
    if ([xa, xb, ya, yb].every(Number.isFinite))
      parts.push(
        `<rect x="${Math.min(xa, xb).toFixed(1)}" y="${Math.min(ya, yb).toFixed(1)}" width="${Math.abs(xb - xa).toFixed(1)}" height="${Math.abs(yb - ya).toFixed(1)}" fill="${r.fill}" stroke="${r.stroke}" stroke-dasharray="5 3"/>`,
      );
  }
  for (const v of c.vlines ?? []) {
    const X = px(fx(v.x));
    if (!Number.isFinite(X)) continue;
    parts.push(
      `<line x1="${X.toFixed(1)}" y1="${T}" x2="${X.toFixed(1)}" y2="${H - B}" stroke="${v.color}" stroke-dasharray="${v.dash ?? '3 3'}" stroke-width="1.4"/>`,
    );
    if (v.label) parts.push(`<text x="${(X + 3).toFixed(1)}" y="${T + 11}">${esc(v.label)}</text>`);
  }
  for (const h of c.hlines ?? []) {
    const Y = py(fy(h.y));
    if (Number.isFinite(Y))
      parts.push(`<line x1="${L}" y1="${Y.toFixed(1)}" x2="${W - R}" y2="${Y.toFixed(1)}" stroke="${h.color}" stroke-dasharray="${h.dash ?? '6 4'}"/>`);
  }
  for (const s of c.series) {
    const pts: string[] = [];
    const marks: string[] = [];
    for (let k = 0; k < s.x.length; k++) {
      const y = s.y[k];
      if (y === null || y === undefined) {
        if (pts.length && pts[pts.length - 1] !== 'M') pts.push('M');
        continue;
      }
      const X = px(fx(s.x[k]));
      const Y = py(fy(y));
      if (!Number.isFinite(X) || !Number.isFinite(Y)) continue;
      pts.push(`${X.toFixed(1)},${Y.toFixed(1)}`);
      if (s.marker === 'dot') marks.push(`<circle cx="${X.toFixed(1)}" cy="${Y.toFixed(1)}" r="2.6" fill="${s.color}"/>`);
      else if (s.marker === 'ring') marks.push(`<circle cx="${X.toFixed(1)}" cy="${Y.toFixed(1)}" r="2.6" fill="#fff" stroke="${s.color}"/>`);
      else if (s.marker === 'cross')
        marks.push(`<path d="M${(X - 3).toFixed(1)},${(Y - 3).toFixed(1)}l6,6m0,-6l-6,6" stroke="${s.color}" stroke-width="1.4" fill="none"/>`);
      else if (s.marker === 'square')
        marks.push(`<rect x="${(X - 3).toFixed(1)}" y="${(Y - 3).toFixed(1)}" width="6" height="6" fill="#fff" stroke="${s.color}" stroke-width="1.4"/>`);
    }
    if (s.line !== false) {
      const runs = pts
        .join(' ')
        .split('M')
        .map((r) => r.trim())
        .filter((r) => r.includes(' ') || r.includes(','));
      for (const r of runs)
        parts.push(
          `<polyline class="series" data-label="${esc(s.label ?? '')}" fill="none" stroke="${s.color}" stroke-width="${s.width ?? 1.4}"${s.dash ? ` stroke-dasharray="${s.dash}"` : ''} points="${r}"/>`,
        );
    }
    parts.push(...marks);
  }
  parts.push('</g></svg>');
  return parts.join('');
}
