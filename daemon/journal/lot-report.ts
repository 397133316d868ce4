/**
 * `plumbline lot`: one self-contained HTML file across devices (no script, no network; inline SVG):
 * a table of every device's fitted parameters ± error with its site, the distribution of each
 * parameter per wafer (box and strip plots), a wafer map of a chosen parameter on the sequential
 * colour-blind-safe ramp, the Weibull plot of the breakdown results with its fit and bounds,
 * outliers by robust z-score, and the cautions the sessions raised.
 */
import { writeFileSync } from 'node:fs';
import { boxSummary, gridResolution, modifiedZ, OUTLIER_Z } from '../analysis/robust.js';
import { analyzeWeibull, weibullPlotY, weibullQuantile, type WeibullReport } from '../analysis/weibull.js';
import { OKABE_ITO, sequential } from '../../protocols/palette.js';
import { formatLogTicks, formatTicks, logTicks, niceTicks } from '../../protocols/number-format.js';
import { resultQuantity } from '../../protocols/device-results.js';
import { displayUnit, formatQuantity } from '../../protocols/display-units.js';
import { breakdownSample, defaultQuantity, LotRequestError, lotResults, type BreakdownSample, type DeviceSummary, type LotSource } from './lot.js';

const esc = (s: unknown) => String(s).replace(/&/g, '&amp;').replace(/</g, '&lt;').replace(/>/g, '&gt;').replace(/"/g, '&quot;');
const num = (v: number | undefined, d = 4) =>
  v === undefined || !Number.isFinite(v) ? '—' : Math.abs(v) >= 1e4 || (Math.abs(v) < 1e-2 && v !== 0) ? v.toExponential(d - 1) : String(+v.toPrecision(d));

export interface LotOptions {
  /** Parameter (or breakdown quantity: field, voltage, charge, time) for the wafer map. */
  readonly map?: string;
  /** Breakdown quantity for the Weibull plot (default: defaultQuantity's choice for the results' kind of test). */
  readonly quantity?: string;
  readonly confidence?: number;
  readonly area?: number;
  /** Kind of test whose results the Weibull plot takes ('all' pools every kind); needed when the lot holds several. */
  readonly test?: string;
}

/** One row of the lot: a device with its values (parameters and breakdown results). */
export interface LotRow {
  readonly session: string;
  readonly device: string;
  readonly wafer: string;
  readonly site: string;
  readonly x: number | undefined;
  readonly y: number | undefined;
  /**
   * `censored`: a breakdown quantity of a device that survived its test — the value it reached, a
   * lower bound on its breakdown value, not a breakdown value (shown as "> value", kept out of the
   * distributions and the outlier test; the Weibull fit takes it as right-censored).
   */
  readonly values: Record<string, { value: number; stdErr?: number; unit: string; censored?: boolean }>;
  readonly outcome: string | null;
}

export interface ParameterStats {
  readonly name: string;
  readonly unit: string;
  readonly n: number;
  /** The robust z-scores were taken of ln(value) (a positive quantity spanning more than a decade). */
  readonly logScale: boolean;
  /** The grid step the values sit on (ties on a ramp's levels), which floors the MAD; else null. */
  readonly resolution: number | null;
  readonly box: ReturnType<typeof boxSummary> | null;
  /** Devices that survived the test: their values are lower bounds, left out of n, the box and the outlier test. */
  readonly survivors: number;
  /** Devices with |modified z| > 3.5 (Iglewicz & Hoaglin 1993). */
  readonly outliers: readonly { session: string; device: string; value: number; z: number }[];
}

export interface LotAnalysis {
  readonly description: string;
  readonly rows: LotRow[];
  readonly parameters: ParameterStats[];
  readonly weibull: (WeibullReport & { quantity: string; notes: string[] }) | null;
  readonly weibullError: string | null;
  readonly cautions: { kind: string; count: number; sessions: number; message: string }[];
  readonly problems: string[];
  /** The Weibull sample behind `weibull` (values, survivors, area factors). */
  readonly sample: BreakdownSample | null;
}

const BREAKDOWN_KEYS: Record<string, string> = {
  breakdownField: 'breakdown field',
  breakdownVoltage: 'breakdown voltage',
  chargeToBreakdown: 'charge to breakdown',
  timeToBreakdown: 'time to breakdown',
};
const BREAKDOWN_UNITS: Record<string, string> = { breakdownField: 'V/m', breakdownVoltage: 'V', chargeToBreakdown: 'C/m^2', timeToBreakdown: 's' };

/** The lot's rows: one per session, or one per results row when a session tested several devices. */
export function lotRows(devices: readonly DeviceSummary[]): LotRow[] {
  const rows: LotRow[] = [];
  const results = lotResults(devices);
  for (const d of devices) {
    const params: LotRow['values'] = {};
    for (const [k, p] of Object.entries(d.parameters)) params[k] = { value: p.value, stdErr: p.stdErr, unit: p.unit };
    const mine = results.filter((r) => r.session === d.session);
    const id = d.identity;
    if (mine.length === 0) {
      rows.push({
        session: d.session,
        device: id.device ?? d.session,
        wafer: id.wafer ?? '',
        site: id.site ?? '',
        x: id.x,
        y: id.y,
        values: params,
        outcome: d.outcome,
      });
      continue;
    }
    for (const r of mine) {
      const values = { ...params };
      for (const [key, title] of Object.entries(BREAKDOWN_KEYS)) {
        const v = r[key as keyof typeof r];
        if (typeof v === 'number') values[title] = { value: v, unit: BREAKDOWN_UNITS[key], ...(r.outcome === 'survived' ? { censored: true } : {}) };
      }
      rows.push({
        session: d.session,
        device: r.device,
        wafer: r.wafer ?? id.wafer ?? '',
        site: r.site ?? id.site ?? '',
        x: r.x ?? id.x,
        y: r.y ?? id.y,
        values,
        outcome: r.outcome,
      });
    }
  }
  return rows;
}

export async function analyzeLot(source: LotSource, o: LotOptions = {}): Promise<LotAnalysis> {
  const devices = await source.devices();
  const rows = lotRows(devices);
  const names = new Map<string, string>();
  for (const r of rows) for (const [k, v] of Object.entries(r.values)) if (!names.has(k)) names.set(k, v.unit);
  const parameters: ParameterStats[] = [];
  for (const [name, unit] of names) {
    const have = rows.filter((r) => r.values[name] && Number.isFinite(r.values[name].value) && !r.values[name].censored);
    const survivors = rows.filter((r) => r.values[name]?.censored).length;
    const vals = have.map((r) => r.values[name].value);
    // Quantities spanning decades (charge to breakdown, leakage) are compared on a log scale.
    const log = vals.length > 0 && vals.every((v) => v > 0) && Math.max(...vals) / Math.min(...vals) > 10;
    // Values read on a grid (a ramp's levels) tie; the grid step floors the MAD so that devices one
    // step from a tied majority are not all called outliers.
    const resolution = log ? undefined : gridResolution(vals);
    const z = vals.length >= 3 ? modifiedZ(log ? vals.map(Math.log) : vals, resolution) : vals.map(() => 0);
    parameters.push({
      name,
      unit,
      n: vals.length,
      logScale: log,
      resolution: resolution ?? null,
      box: vals.length ? boxSummary(vals) : null,
      survivors,
      outliers: have.map((r, k) => ({ session: r.session, device: r.device, value: vals[k], z: z[k] })).filter((q) => Math.abs(q.z) > OUTLIER_Z),
    });
  }
  let weibull: LotAnalysis['weibull'] = null;
  let weibullError: string | null = null;
  let sample: BreakdownSample | null = null;
  const results = lotResults(devices);
  if (results.length) {
    try {
      const q = resultQuantity(o.quantity ?? defaultQuantity(results, o.test));
      if (!q) throw new LotRequestError(`--quantity '${o.quantity}': expected field, voltage, charge or time`);
      const s: BreakdownSample = breakdownSample(results, q, o.area, o.test);
      sample = s;
      const fit = analyzeWeibull(
        { values: s.values, censored: s.censored, areaFactor: s.areaFactor },
        { confidence: o.confidence ?? 0.9, unit: s.unit, area: s.area, display: (v) => formatQuantity(v, s.unit, undefined, 4) },
      );
      weibull = { ...fit, warnings: [...(s.warnings ?? []), ...fit.warnings], quantity: s.title, notes: s.notes };
    } catch (e) {
      weibullError = (e as Error).message;
    }
  }
  const cautions = new Map<string, { kind: string; count: number; sessions: number; message: string }>();
  for (const d of devices) {
    for (const c of d.cautions) {
      const e = cautions.get(c.kind);
      if (e) {
        e.count += c.count;
        e.sessions++;
      } else cautions.set(c.kind, { kind: c.kind, count: c.count, sessions: 1, message: c.message });
    }
  }
  return {
    description: source.description,
    rows,
    parameters,
    weibull,
    weibullError,
    cautions: [...cautions.values()],
    problems: devices.flatMap((d) => d.problems.map((p) => `${d.session}: ${p}`)),
    sample,
  };
}

/** Box and strip plot of one parameter, one row per wafer; outliers drawn as open diamonds. */
function boxStrip(p: ParameterStats, rows: LotRow[]): string {
  const d = displayUnit(p.unit);
  const groups = new Map<string, { v: number; out: boolean; label: string }[]>();
  const outKeys = new Set(p.outliers.map((o) => `${o.session}/${o.device}`));
  for (const r of rows) {
    const v = r.values[p.name];
    if (!v || !Number.isFinite(v.value) || v.censored) continue;
    const g = r.wafer || '(no wafer)';
    if (!groups.has(g)) groups.set(g, []);
    groups.get(g)?.push({ v: v.value * d.scale, out: outKeys.has(`${r.session}/${r.device}`), label: `${r.device}${r.site ? ` @ ${r.site}` : ''}` });
  }
  const all = [...groups.values()].flat().map((q) => q.v);
  if (all.length === 0) return '';
  let lo = Math.min(...all);
  let hi = Math.max(...all);
  if (hi === lo) {
    lo -= Math.abs(lo) * 0.05 || 1;
    hi += Math.abs(hi) * 0.05 || 1;
  }
  const pad = (hi - lo) * 0.05;
  lo -= pad;
  hi += pad;
  const W = 900;
  const L = 150;
  const R = 20;
  const rowH = 44;
  const H = 40 + groups.size * rowH + 30;
  const px = (v: number) => L + ((v - lo) / (hi - lo)) * (W - L - R);
  const parts = [
    `<svg class="chart" xmlns="http://www.w3.org/2000/svg" width="${W}" height="${H}" viewBox="0 0 ${W} ${H}" role="img" aria-label="${esc(p.name)} distribution">`,
  ];
  parts.push(
    `<text x="8" y="16" class="t">${esc(p.name)}${d.unit ? ` (${esc(d.unit)})` : ''} · box: quartiles · bar: median · whiskers: 1.5 IQR · ● device · ◇ outlier (|z| &gt; ${OUTLIER_Z})</text>`,
  );
  let k = 0;
  for (const [g, pts] of groups) {
    const yc = 40 + k * rowH + rowH / 2;
    const b = boxSummary(pts.map((q) => q.v));
    parts.push(`<text x="${L - 8}" y="${yc}" text-anchor="end" dominant-baseline="middle">${esc(g)} (${pts.length})</text>`);
    parts.push(`<line x1="${px(b.lowWhisker).toFixed(1)}" x2="${px(b.highWhisker).toFixed(1)}" y1="${yc}" y2="${yc}" stroke="#555"/>`);
    parts.push(
      `<rect x="${px(b.q1).toFixed(1)}" y="${yc - 12}" width="${Math.max(1, px(b.q3) - px(b.q1)).toFixed(1)}" height="24" fill="rgba(86,180,233,0.25)" stroke="${OKABE_ITO.blue}"/>`,
    );
    parts.push(
      `<line x1="${px(b.median).toFixed(1)}" x2="${px(b.median).toFixed(1)}" y1="${yc - 12}" y2="${yc + 12}" stroke="${OKABE_ITO.black}" stroke-width="2.5"/>`,
    );
    pts.forEach((q, j) => {
      const X = px(q.v).toFixed(1);
      const Y = (yc - 9 + ((j * 7) % 19)).toFixed(1);
      parts.push(
        q.out
          ? `<path d="M${X} ${+Y - 5}l5 5l-5 5l-5 -5z" fill="#fff" stroke="${OKABE_ITO.vermillion}" stroke-width="1.6"><title>${esc(q.label)}: ${num(q.v)} (outlier)</title></path>`
          : `<circle cx="${X}" cy="${Y}" r="2.8" fill="${OKABE_ITO.orange}" stroke="#333" stroke-width="0.4"><title>${esc(q.label)}: ${num(q.v)}</title></circle>`,
      );
    });
    k++;
  }
  const ty = H - 22;
  parts.push(`<line x1="${L}" x2="${W - R}" y1="${ty}" y2="${ty}" stroke="#888"/>`);
  const ticks = niceTicks(lo, hi, 6);
  const labels = formatTicks(ticks);
  ticks.forEach((v, k) => {
    parts.push(`<text class="xtick" x="${px(v).toFixed(1)}" y="${ty + 14}" text-anchor="middle">${esc(labels[k])}</text>`);
  });
  parts.push('</svg>');
  return parts.join('');
}

/** Wafer map: each site a square at (x, y) coloured on the sequential ramp, its value written in it. */
function waferMap(name: string, rows: LotRow[], outliers: Set<string>): string {
  const have = rows.filter((r) => r.x !== undefined && r.y !== undefined);
  if (have.length === 0)
    return '<p class="note">No site has x, y coordinates: give them with the run (--x, --y) or in the results file to draw a wafer map.</p>';
  const wafers = new Map<string, LotRow[]>();
  for (const r of have) {
    const w = r.wafer || '(no wafer)';
    if (!wafers.has(w)) wafers.set(w, []);
    wafers.get(w)?.push(r);
  }
  const siteValue = (r: LotRow) => (r.values[name]?.censored ? undefined : r.values[name]?.value);
  const finite = (v: number | undefined): v is number => v !== undefined && Number.isFinite(v);
  const vals = have.map(siteValue).filter(finite);
  // The colour scale spans the sites that are not outliers: one far value would otherwise squeeze
  // the real spread into a single colour. Outliers (marked) take the scale's end colour.
  const inliers = have
    .filter((r) => !outliers.has(`${r.session}/${r.device}`))
    .map(siteValue)
    .filter(finite);
  const scaleVals = inliers.length >= 2 ? inliers : vals;
  const clamped = scaleVals.length < vals.length;
  const unit = have.find((r) => r.values[name])?.values[name].unit ?? '';
  const d = displayUnit(unit);
  const vlo = Math.min(...scaleVals);
  const vhi = Math.max(...scaleVals);
  const t = (v: number) => (vhi > vlo ? Math.min(1, Math.max(0, (v - vlo) / (vhi - vlo))) : 0.5);
  const out: string[] = [];
  // Devices given one position on one wafer are drawn on top of each other: say which.
  const shared: string[] = [];
  for (const [w, rs] of wafers) {
    const at = new Map<string, string[]>();
    for (const r of rs) {
      const k = `${r.x}, ${r.y}`;
      at.set(k, [...(at.get(k) ?? []), r.device]);
    }
    for (const [k, ds] of at)
      if (ds.length > 1) shared.push(`${ds.length} devices at (${k}) on wafer ${w}: ${ds.slice(0, 4).join(', ')}${ds.length > 4 ? ', …' : ''}`);
  }
  for (const [w, rs] of wafers) {
    const xs = rs.map((r) => r.x as number);
    const ys = rs.map((r) => r.y as number);
    const x0 = Math.min(...xs);
    const x1 = Math.max(...xs);
    const y0 = Math.min(...ys);
    const y1 = Math.max(...ys);
    const cols = x1 - x0 + 1;
    const rws = y1 - y0 + 1;
    const cell = Math.max(26, Math.min(60, Math.floor(420 / Math.max(cols, rws))));
    const W = cols * cell + 40;
    const H = rws * cell + 60;
    const parts = [
      `<svg class="chart" xmlns="http://www.w3.org/2000/svg" width="${W}" height="${H}" viewBox="0 0 ${W} ${H}" role="img" aria-label="wafer ${esc(w)}">`,
    ];
    parts.push(`<text x="20" y="16" class="t">wafer ${esc(w)}</text>`);
    const cx = 20 + (cols * cell) / 2;
    const cy = 30 + (rws * cell) / 2;
    parts.push(`<circle cx="${cx}" cy="${cy}" r="${(Math.hypot(cols, rws) * cell) / 2 + 4}" fill="none" stroke="#bbb" stroke-dasharray="3 3"/>`);
    for (const r of rs) {
      const X = 20 + ((r.x as number) - x0) * cell;
      // y grows upwards on a wafer map.
      const Y = 30 + (y1 - (r.y as number)) * cell;
      const raw = r.values[name]?.value;
      // A survivor's value is a lower bound: drawn like a site without a value, labelled "> value".
      const bound = r.values[name]?.censored && raw !== undefined && Number.isFinite(raw) ? raw : undefined;
      const v = bound === undefined ? raw : undefined;
      const has = v !== undefined && Number.isFinite(v);
      const isOut = outliers.has(`${r.session}/${r.device}`);
      const fill = has ? sequential(t(v)) : '#eeeeee';
      const textColour = has && t(v) > 0.55 ? '#000' : has ? '#fff' : '#555';
      // (a style, not a fill attribute: the report's stylesheet sets the chart text colour)
      parts.push(
        `<g><title>${esc(r.device)}${r.site ? ` @ ${esc(r.site)}` : ''} (${r.x}, ${r.y}): ${has ? esc(formatQuantity(v, unit, undefined, 4)) : bound !== undefined ? `survived, beyond ${esc(formatQuantity(bound, unit, undefined, 4))}` : 'no value'}${isOut ? ' — outlier' : ''}</title>`,
      );
      parts.push(
        `<rect class="site" x="${X + 1}" y="${Y + 1}" width="${cell - 2}" height="${cell - 2}" fill="${fill}" stroke="${isOut ? OKABE_ITO.vermillion : '#fff'}" stroke-width="${isOut ? 3 : 1}"${has ? '' : ' stroke-dasharray="2 2"'}/>`,
      );
      parts.push(
        `<text x="${X + cell / 2}" y="${Y + cell / 2}" text-anchor="middle" dominant-baseline="middle" style="fill:${textColour}" font-size="${cell < 34 ? 8 : 10}">${has ? esc(num(v * d.scale, 3)) : bound !== undefined ? `&gt;${esc(num(bound * d.scale, 3))}` : '—'}${isOut ? '!' : ''}</text></g>`,
      );
    }
    parts.push('</svg>');
    out.push(parts.join(''));
  }
  // Colour bar.
  const bar = [`<svg class="chart" xmlns="http://www.w3.org/2000/svg" width="320" height="46" viewBox="0 0 320 46" role="img" aria-label="colour scale">`];
  for (let k = 0; k < 60; k++) bar.push(`<rect x="${10 + k * 5}" y="6" width="5.5" height="14" fill="${sequential(k / 59)}"/>`);
  bar.push(
    `<text x="10" y="34">${esc(num(vlo * d.scale, 4))}</text><text x="310" y="34" text-anchor="end">${esc(num(vhi * d.scale, 4))} ${esc(d.unit)}</text></svg>`,
  );
  const overlap = shared.length
    ? `<p class="note warn">Only the last device drawn shows at a position several devices share — ${esc(shared.slice(0, 5).join('; '))}${shared.length > 5 ? `; and ${shared.length - 5} more` : ''}. Correct their x, y (plumbline annotate --device …, or the results file) to see each.</p>`
    : '';
  return `<div class="plots">${out.join('')}</div>${bar.join('')}${overlap}<p class="note">Squares: sites, coloured from the lowest value (dark) to the highest (light) and labelled with the value; a thick vermillion border and "!" mark an outlier${clamped ? ' (the colour scale spans the other sites; an outlier beyond it takes its end colour)' : ''}; dashed grey: no value.</p>`;
}

/**
 * The Weibull plot as on Weibull probability paper: x on a log axis fitted to the data (1-2-5
 * ticks), the ordinate W = ln(−ln(1 − F)) labelled in F; median-rank points, the ML line and the
 * pointwise bounds of the quantiles.
 */
function weibullPlot(w: WeibullReport & { quantity: string }, values: number[], censored: boolean[], areaFactor: number[] | undefined): string {
  const d = displayUnit(w.scale.unit);
  const pts = w.points;
  const Fs = [0.001, 0.002, 0.005, 0.01, 0.02, 0.05, 0.1, 0.2, 0.3, 0.5, 0.632, 0.8, 0.9, 0.95, 0.99, 0.999].filter(
    (F) => F >= Math.min(pts[0]?.F ?? 0.01, 0.01) * 0.5 && F <= Math.max(pts[pts.length - 1]?.F ?? 0.99, 0.99),
  );
  const q = Fs.map((F) => weibullQuantile({ values, censored, areaFactor }, F, w.bounds.confidence, w.bounds.method));
  const pct = `${+(w.bounds.confidence * 100).toPrecision(3)} %`;
  const xs = [...pts.map((p) => p.x), ...q.map((p) => p.low), ...q.map((p) => p.high)].filter((v) => v > 0 && Number.isFinite(v)).map((v) => v * d.scale);
  const xlo = Math.min(...xs) / 1.08;
  const xhi = Math.max(...xs) * 1.08;
  const ylo = weibullPlotY(Fs[0]) - 0.2;
  const yhi = weibullPlotY(Fs[Fs.length - 1]) + 0.2;
  const W = 900;
  const H = 440;
  const L = 70;
  const R = 20;
  const T = 28;
  const B = 46;
  const px = (v: number) => L + ((Math.log(v) - Math.log(xlo)) / (Math.log(xhi) - Math.log(xlo))) * (W - L - R);
  const py = (y: number) => H - B - ((y - ylo) / (yhi - ylo)) * (H - T - B);
  const parts = [
    `<svg class="chart" xmlns="http://www.w3.org/2000/svg" width="${W}" height="${H}" viewBox="0 0 ${W} ${H}" role="img" aria-label="Weibull plot">`,
  ];
  parts.push(
    `<text x="${L}" y="16" class="t">${esc(w.quantity)}: ● devices (median ranks) · solid: ML fit, β = ${+w.shape.value.toPrecision(3)}, η = ${esc(formatQuantity(w.scale.value, w.scale.unit, undefined, 4))} · dashed: ${pct} bounds</text>`,
  );
  parts.push(`<rect x="${L}" y="${T}" width="${W - L - R}" height="${H - T - B}" fill="none" stroke="#888"/>`);
  const xt = logTicks(xlo, xhi);
  const xl = formatLogTicks(xt);
  xt.forEach((t, k) => {
    const X = px(t).toFixed(1);
    parts.push(
      `<line class="xtick" x1="${X}" y1="${T}" x2="${X}" y2="${H - B}" stroke="#e4e1d8"/><text x="${X}" y="${H - B + 14}" text-anchor="middle">${esc(xl[k])}</text>`,
    );
  });
  for (const F of Fs) {
    const Y = py(weibullPlotY(F)).toFixed(1);
    parts.push(
      `<line x1="${L}" y1="${Y}" x2="${W - R}" y2="${Y}" stroke="${F === 0.632 ? '#bbb' : '#e4e1d8'}"/><text x="${L - 4}" y="${Y}" text-anchor="end" dominant-baseline="middle">${+(F * 100).toPrecision(3)} %</text>`,
    );
  }
  parts.push(`<text x="${(L + W - R) / 2}" y="${H - 8}" text-anchor="middle" class="ax">${esc(w.quantity)} (${esc(d.unit)}), log scale</text>`);
  parts.push(
    `<text transform="translate(14 ${(T + H - B) / 2}) rotate(-90)" text-anchor="middle" class="ax">fraction broken down F (on ln(−ln(1 − F)))</text>`,
  );
  const line = (xsv: number[], stroke: string, extra: string) =>
    `<polyline fill="none" stroke="${stroke}" ${extra} points="${xsv.map((x, k) => `${px(x * d.scale).toFixed(1)},${py(weibullPlotY(Fs[k])).toFixed(1)}`).join(' ')}"/>`;
  parts.push(
    line(
      q.map((p) => p.low),
      OKABE_ITO.sky,
      'stroke-dasharray="5 4" stroke-width="1.4"',
    ),
  );
  parts.push(
    line(
      q.map((p) => p.high),
      OKABE_ITO.sky,
      'stroke-dasharray="5 4" stroke-width="1.4"',
    ),
  );
  parts.push(
    line(
      q.map((p) => p.value),
      OKABE_ITO.black,
      'stroke-width="2"',
    ),
  );
  for (const p of pts)
    parts.push(
      `<circle class="device" cx="${px(p.x * d.scale).toFixed(1)}" cy="${py(weibullPlotY(p.F)).toFixed(1)}" r="3" fill="${OKABE_ITO.vermillion}"><title>${esc(formatQuantity(p.x, w.scale.unit, undefined, 4))}, F = ${p.F.toFixed(3)}</title></circle>`,
    );
  parts.push('</svg>');
  return parts.join('');
}

export function renderLot(a: LotAnalysis, o: LotOptions = {}): string {
  const sample = a.sample;
  const out: string[] = [];
  out.push(`<!doctype html><html lang="en"><head><meta charset="utf-8"><title>plumbline lot report — ${esc(a.description)}</title><style>
body{font-family:system-ui,"DejaVu Sans",sans-serif;color:#1b1b1b;margin:1.5rem auto;max-width:1000px;padding:0 1rem}
h1{font-size:1.4rem}h2{font-size:1.15rem;margin-top:1.6rem;border-bottom:1px solid #ccc}
table{border-collapse:collapse;font-variant-numeric:tabular-nums;font-size:.8rem}td,th{border-bottom:1px solid #ddd;padding:.15rem .4rem;text-align:left;vertical-align:top}
.chart text{font-size:10px;fill:#333}.chart .t{font-size:12px;font-weight:600}.chart .ax{font-size:11px}
.note{color:#555;font-size:.85rem}.caution{border:2px solid #7a1010;background:#fde3de;padding:.4rem .6rem;margin:.6rem 0}
.out{font-weight:700;color:#8a2b00}.nw{white-space:nowrap}.plots{display:flex;flex-wrap:wrap;gap:.5rem}
@media print{body{margin:0}h2{page-break-after:avoid}}
</style></head><body>`);
  out.push(`<h1>plumbline lot report: ${esc(a.description)}</h1>`);
  out.push(
    `<p>${a.rows.length} device(s) from ${new Set(a.rows.map((r) => r.session)).size} session(s); wafers: ${esc([...new Set(a.rows.map((r) => r.wafer || '(none)'))].join(', '))}.</p>`,
  );
  out.push(
    '<p class="caution">Breakdown tests destroy devices at high field and can leave hazardous voltages on fixtures. The cautions below record what the software saw; your lab\'s safety rules, the instrument\'s manual and licensed practice govern.</p>',
  );
  // Cautions.
  out.push('<h2>Cautions</h2>');
  if (a.cautions.length === 0) out.push('<p class="note">No cautions were raised.</p>');
  else
    out.push(
      `<table><tr><th>caution</th><th>times</th><th>sessions</th><th>first message</th></tr>${a.cautions.map((c) => `<tr><td>${esc(c.kind)}</td><td>${c.count}</td><td>${c.sessions}</td><td>${esc(c.message)}</td></tr>`).join('')}</table>`,
    );
  if (a.problems.length) out.push(`<p class="note">Could not read: ${a.problems.map(esc).join('; ')}</p>`);
  // Devices table.
  const outKey = new Map<string, Set<string>>();
  for (const p of a.parameters) outKey.set(p.name, new Set(p.outliers.map((q) => `${q.session}/${q.device}`)));
  out.push('<h2>Devices</h2><table><tr><th>session</th><th>device</th><th>wafer</th><th>site</th><th>x, y</th><th>outcome</th>');
  for (const p of a.parameters) out.push(`<th>${esc(p.name)}${displayUnit(p.unit).unit ? ` (${esc(displayUnit(p.unit).unit)})` : ''}</th>`);
  out.push('</tr>');
  for (const r of a.rows) {
    out.push(
      `<tr><td>${esc(r.session)}</td><td>${esc(r.device)}</td><td>${esc(r.wafer)}</td><td>${esc(r.site)}</td><td class="nw">${r.x ?? '—'}, ${r.y ?? '—'}</td><td>${esc(r.outcome ?? '—')}</td>`,
    );
    for (const p of a.parameters) {
      const v = r.values[p.name];
      const f = displayUnit(p.unit).scale;
      const isOut = outKey.get(p.name)?.has(`${r.session}/${r.device}`);
      out.push(
        `<td${isOut ? ' class="out"' : ''}>${v ? `${v.censored ? '&gt; ' : ''}${num(v.value * f, 5)}${v.stdErr !== undefined ? ` ± ${num(v.stdErr * f, 2)}` : ''}${isOut ? ' ◇ outlier' : ''}` : '—'}</td>`,
      );
    }
    out.push('</tr>');
  }
  out.push(
    '</table><p class="note">Fitted parameters are those of each device\'s first complete sweep with a plausible fit (the device as found); ± one standard error. Outliers: |modified z| = |0.6745 (x − median)/MAD| &gt; 3.5 within the lot (Iglewicz &amp; Hoaglin 1993).</p>',
  );
  // Distributions.
  out.push('<h2>Distributions</h2>');
  for (const p of a.parameters) {
    if (!p.box) continue;
    const d = displayUnit(p.unit);
    out.push(boxStrip(p, a.rows));
    out.push(
      `<p class="note">${esc(p.name)}: n = ${p.n}${p.survivors ? ` (${p.survivors} survivor${p.survivors === 1 ? '' : 's'} left out: their values are lower bounds)` : ''}, median ${num(p.box.median * d.scale)} ${esc(d.unit)}, quartiles ${num(p.box.q1 * d.scale)} … ${num(p.box.q3 * d.scale)}${p.logScale ? '; spans more than a decade, so outliers are judged on ln(value)' : ''}${p.resolution !== null ? `; values sit on a grid of ${num(p.resolution * d.scale)} ${esc(d.unit)} (ties), so no spread below one step counts` : ''}${p.outliers.length ? `; outliers: ${p.outliers.map((q) => `${esc(q.device)} (z = ${q.z.toFixed(1)})`).join(', ')}` : ''}.</p>`,
    );
  }
  // Wafer map.
  const mapName = mapParameter(a, o.map);
  out.push(`<h2>Wafer map${mapName ? `: ${esc(mapName)}` : ''}</h2>`);
  if (o.map !== undefined && !mapName)
    out.push(`<p class="note">No parameter named '${esc(o.map)}' in this lot (have: ${a.parameters.map((p) => esc(p.name)).join(', ')}).</p>`);
  else if (mapName) out.push(waferMap(mapName, a.rows, outKey.get(mapName) ?? new Set()));
  // Weibull.
  out.push('<h2>Breakdown statistics</h2>');
  if (a.weibull && sample) {
    const w = a.weibull;
    const pct = `${+(w.bounds.confidence * 100).toPrecision(3)} %`;
    out.push(weibullPlot(w, sample.values, sample.censored, sample.areaFactor));
    out.push(`<table><tr><th>devices</th><td>${w.n} (${w.failures} broke down, ${w.censored} survived)</td></tr>
<tr><th>shape β</th><td>${num(w.shape.value)} (${pct}: ${num(w.shape.low)} … ${num(w.shape.high)})</td></tr>
<tr><th>scale η</th><td>${esc(formatQuantity(w.scale.value, w.scale.unit, undefined, 5))} (${pct}: ${esc(formatQuantity(w.scale.low, w.scale.unit, undefined, 4))} … ${esc(formatQuantity(w.scale.high, w.scale.unit, undefined, 4))})${w.area !== null ? `, devices of ${esc(formatQuantity(w.area, 'm^2', undefined, 4))}` : ''}</td></tr>
<tr><th>1 % point</th><td>${esc(formatQuantity(w.onePercent.value, w.onePercent.unit, undefined, 4))} (${esc(formatQuantity(w.onePercent.low, w.onePercent.unit, undefined, 4))} … ${esc(formatQuantity(w.onePercent.high, w.onePercent.unit, undefined, 4))})</td></tr>
<tr><th>goodness of fit</th><td>${w.goodnessOfFit ? `Anderson–Darling A²·(1 + 0.2/√n) = ${w.goodnessOfFit.modified.toFixed(3)} (5 % critical ${w.goodnessOfFit.critical['0.05']})` : 'not computed with survivors'}</td></tr>
<tr><th>method</th><td>maximum likelihood, ${w.bounds.method} bounds (IEC 61649)</td></tr></table>`);
    for (const n of w.notes) out.push(`<p class="note">${esc(n)}</p>`);
    for (const x of w.warnings) out.push(`<p class="caution">${esc(x)}</p>`);
  } else if (a.weibullError) out.push(`<p class="note">No Weibull fit: ${esc(a.weibullError)}</p>`);
  else out.push('<p class="note">No breakdown results in these sessions (ramp and constant-stress tests write them).</p>');
  out.push(
    `<p class="note">Generated by plumbline on ${new Date().toISOString()}. Values in the trade's units (MV/cm, C/cm², cm², nm); files and JSON hold SI.</p></body></html>`,
  );
  return out.join('\n');
}

/** The parameter the wafer map shows: the one asked for (by name or breakdown quantity), else the breakdown field, else the first. */
export function mapParameter(a: LotAnalysis, map: string | undefined): string | undefined {
  if (map === undefined) return (a.parameters.find((p) => p.name === 'breakdown field') ?? a.parameters[0])?.name;
  return (a.parameters.find((p) => p.name === map) ?? a.parameters.find((p) => p.name === resultQuantity(map)?.title))?.name;
}

/** Analyses the lot and writes its report; a --map naming no parameter of the lot is refused before anything is written. */
export async function writeLotReport(source: LotSource, file: string, o: LotOptions = {}): Promise<LotAnalysis> {
  const a = await analyzeLot(source, o);
  if (o.map !== undefined && mapParameter(a, o.map) === undefined) {
    throw new LotRequestError(
      `--map '${o.map}': no such parameter in this lot (have: ${a.parameters.map((p) => p.name).join(', ') || 'none'}; or field | voltage | charge | time for breakdown results)`,
    );
  }
  writeFileSync(file, renderLot(a, o));
  return a;
}
