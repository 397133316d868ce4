/**
 * Reads a report chart (daemon/journal/svg.ts output) back as a reader of the printed page would:
 * the axes from their tick labels and positions (linear, or log with labels such as 10⁻⁸ and
 * 2×10⁻⁵), then every marker and polyline vertex turned back from pixels into the values on the
 * axes. A test compares those with the journal's SI numbers converted by the unit's definition, so
 * a wrong scale, a wrong axis or a point drawn where it should not be shows up as a number.
 */

const SUP: Record<string, string> = { '⁻': '-', '⁰': '0', '¹': '1', '²': '2', '³': '3', '⁴': '4', '⁵': '5', '⁶': '6', '⁷': '7', '⁸': '8', '⁹': '9' };

/** A tick label as a number: "0.08", "-1e-5", "10⁻¹⁰", "2×10⁻⁵". */
export function tickValue(label: string): number {
  const t = label.replace(/[⁻⁰¹²³⁴⁵⁶⁷⁸⁹]/g, (c) => SUP[c]).replace(/−/g, '-');
  const m = /^(?:([-\d.e]+)×)?10(-?\d+)$/.exec(t);
  if (m) return (m[1] ? Number(m[1]) : 1) * 10 ** Number(m[2]);
  const n = Number(t);
  if (!Number.isFinite(n)) throw new Error(`tick label '${label}' is not a number`);
  return n;
}

interface Axis {
  readonly log: boolean;
  /** Pixel → value. */
  readonly value: (px: number) => number;
  /** Value → pixel. */
  readonly pixel: (v: number) => number;
  readonly ticks: { px: number; value: number }[];
}

function axis(ticks: { px: number; value: number }[], log: boolean): Axis {
  if (ticks.length < 2) throw new Error(`an axis with ${ticks.length} tick(s) cannot be read`);
  const f = (v: number) => (log ? Math.log10(v) : v);
  const a = ticks[0];
  const b = ticks[ticks.length - 1];
  const slope = (b.px - a.px) / (f(b.value) - f(a.value));
  const value = (px: number) => {
    const u = f(a.value) + (px - a.px) / slope;
    return log ? 10 ** u : u;
  };
  return { log, value, pixel: (v: number) => a.px + (f(v) - f(a.value)) * slope, ticks };
}

export interface ReadChart {
  readonly title: string;
  readonly xLabel: string;
  readonly yLabel: string;
  readonly x: Axis;
  readonly y: Axis;
  /** Markers by shape, pixel centre and value. */
  readonly markers: { shape: 'dot' | 'ring' | 'cross' | 'square'; color: string; px: number; py: number; x: number; y: number }[];
  /** Each polyline's vertices (pixels and values) with its series label. */
  readonly lines: { label: string; points: { px: number; py: number; x: number; y: number }[] }[];
}

/** Whether ticks rise by a constant factor (log) rather than a constant step (linear). */
function looksLog(values: number[]): boolean {
  if (values.length < 3 || values.some((v) => !(v > 0))) return false;
  const d = values.slice(1).map((v, k) => v - values[k]);
  const same = d.every((x) => Math.abs(x - d[0]) <= 1e-9 * Math.abs(d[0]));
  return !same;
}

/** Reads one `<svg class="chart">…</svg>`; `log` forces the axes' kind when the ticks cannot tell. */
export function readChart(svg: string, log: { x?: boolean; y?: boolean } = {}): ReadChart {
  const num = (s: string) => Number(s);
  const title = /<text x="[\d.]+" y="16" class="t">([^<]*)<\/text>/.exec(svg)?.[1] ?? '';
  const xLabel = /<text x="[\d.]+" y="[\d.]+" text-anchor="middle" class="ax">([^<]*)<\/text>/.exec(svg)?.[1] ?? '';
  const yLabel = /rotate\(-90\)" text-anchor="middle" class="ax">([^<]*)<\/text>/.exec(svg)?.[1] ?? '';
  const xt = [...svg.matchAll(/<text x="([\d.]+)" y="[\d.]+" text-anchor="middle">([^<]*)<\/text>/g)].map((m) => ({ px: num(m[1]), value: tickValue(m[2]) }));
  const yt = [...svg.matchAll(/<text x="[\d.]+" y="([\d.]+)" text-anchor="end" dominant-baseline="middle">([^<]*)<\/text>/g)].map((m) => ({
    px: num(m[1]),
    value: tickValue(m[2]),
  }));
  const x = axis(xt, log.x ?? looksLog(xt.map((t) => t.value)));
  const y = axis(yt, log.y ?? looksLog(yt.map((t) => t.value)));
  const markers: ReadChart['markers'] = [];
  const at = (shape: ReadChart['markers'][number]['shape'], color: string, px: number, py: number) =>
    markers.push({ shape, color, px, py, x: x.value(px), y: y.value(py) });
  for (const m of svg.matchAll(/<circle cx="([-\d.]+)" cy="([-\d.]+)" r="2.6" fill="([^"]+)"( stroke="([^"]+)")?\/>/g))
    at(m[4] ? 'ring' : 'dot', m[5] ?? m[3], num(m[1]), num(m[2]));
  for (const m of svg.matchAll(/<rect x="([-\d.]+)" y="([-\d.]+)" width="6" height="6" fill="#fff" stroke="([^"]+)"/g))
    at('square', m[3], num(m[1]) + 3, num(m[2]) + 3);
  for (const m of svg.matchAll(/<path d="M([-\d.]+),([-\d.]+)l6,6m0,-6l-6,6" stroke="([^"]+)"/g)) at('cross', m[3], num(m[1]) + 3, num(m[2]) + 3);
  const lines = [...svg.matchAll(/<polyline class="series" data-label="([^"]*)"[^>]* points="([^"]*)"\/>/g)].map((m) => ({
    label: m[1],
    points: m[2]
      .trim()
      .split(/\s+/)
      .map((p) => {
        const [px, py] = p.split(',').map(num);
        return { px, py, x: x.value(px), y: y.value(py) };
      }),
  }));
  return { title, xLabel, yLabel, x, y, markers, lines };
}

/** Every `<svg class="chart">` in a piece of HTML, in order. */
export function charts(html: string): string[] {
  return [...html.matchAll(/<svg class="chart"[\s\S]*?<\/svg>/g)].map((m) => m[0]);
}
