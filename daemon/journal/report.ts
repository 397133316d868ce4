/**
 * `plumbline report`: one self-contained HTML file for a session — no script, no network, inline SVG
 * charts and CSS that print to PDF — with a breakdown test's result (outcome, the criterion that
 * fired with its numbers, V_bd, E_bd, Q_bd ± its uncertainty, t_bd, leakage before and after, named
 * as on the page: protocols/breakdown-display.ts), the device under test, the settings (plan,
 * analysis, drift watch, limits) as tables in the trade's units, the notes, cautions and decisions
 * in time order, all sweeps on one plot, each parameter across sweeps with the drift chart's limits
 * and baseline breaks, a results table with uncertainties, a solar cell's figures of merit, and
 * every sweep's measured, linearized and residual plots (the marks the page draws: ✕ negative
 * current, □ compliance, a reading at compliance joined to no line since the bias was not held).
 * The physics comes from daemon/analysis (the linearized views are the same plotView the page
 * draws); numbers and units go through protocols/display-units.ts and number-format.ts, as on the
 * page and the CLI.
 */
import { existsSync, readFileSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { STOP_MEANING, type StopReason } from '../analysis/adaptive-sweep.js';
import { plotView, type PlotView } from '../analysis/plot.js';
import { READING_COLUMNS } from '../analysis/mechanism.js';
import { atOneBias } from '../analysis/sweep-points.js';
import { analysisSchema, type AnalysisSettings } from '../pipeline/settings.js';
import { deviceLine, deviceRows, type FigureRow, numberRows, OUTCOME_LABELS, resultFigureRows, TEST_TITLES } from '../../protocols/breakdown-display.js';
import { axisLabel, displayUnit, formatInputs, formatParameter, formatParameterText, formatQuantity, parameterLabel } from '../../protocols/display-units.js';
import { formatNumber } from '../../protocols/number-format.js';
import { OKABE_ITO, sweepColour } from '../../protocols/palette.js';
import type { FitSummary, SolarSummary, WireEvent } from '../../protocols/wire.js';
import { noRunEndNote } from './reader.js';
import { loadSession, type SessionData, type SweepData } from './sessions.js';
import { svgChart, type SvgSeries } from './svg.js';

const esc = (s: unknown) => String(s).replace(/&/g, '&amp;').replace(/</g, '&lt;').replace(/>/g, '&gt;').replace(/"/g, '&quot;');
const num = (v: number | null | undefined, d = 5) => (v === null || v === undefined || !Number.isFinite(v) ? '—' : formatNumber(v, d));

/** Sweeps drawn one by one (the overview and the table always hold them all). */
export const MAX_SWEEP_SECTIONS = 200;

type Drift = Extract<WireEvent, { type: 'drift' }>;

function settingsOf(raw: unknown): AnalysisSettings | undefined {
  const r = analysisSchema.safeParse(raw);
  return r.success ? r.data : undefined;
}

function describeWindow(w: AnalysisSettings['window']): string {
  return typeof w === 'object'
    ? `${w.from !== undefined ? num(w.from) : '−∞'} … ${w.to !== undefined ? num(w.to) : '∞'} V`
    : w === 'auto'
      ? 'automatic'
      : 'all points';
}

function describeAnalysis(a: AnalysisSettings | undefined): string {
  if (!a) return 'not recorded';
  return `${a.model}; window ${describeWindow(a.window)}; ${formatInputs(a.inputs) || 'no inputs'}${a.solar ? `; solar cell at ${num(a.solar.irradiance ?? 1000)} W/m²` : ''}`;
}

/** Rows of a two-column table (name, value), skipping absent values. */
function table(rows: [string, string | undefined][]): string {
  return `<table class="kv">${rows
    .filter(([, v]) => v !== undefined && v !== '')
    .map(([k, v]) => `<tr><th>${esc(k)}</th><td>${esc(v)}</td></tr>`)
    .join('')}</table>`;
}

/** A table of figures (name, number and unit), each row marked with the key it came from. */
function figureTable(rows: readonly FigureRow[], cls: string): string {
  return `<table class="kv ${cls}">${rows.map((r) => `<tr data-figure="${esc(r.key)}"><th>${esc(r.label)}</th><td><span class="num">${esc(r.text)}</span>${r.unit ? ` <span class="unit">${esc(r.unit)}</span>` : ''}</td></tr>`).join('')}</table>`;
}

/**
 * A breakdown test (voltage ramp, current ramp, constant-voltage stress): what was run, the
 * outcome, the criterion that fired with its numbers, and the result figures in the trade's units
 * with the page's names (protocols/breakdown-display.ts). Empty for a session that is no test.
 */
function breakdownSection(s: SessionData): string {
  const plan = s.session?.plan as { kind?: unknown; description?: unknown } | null | undefined;
  const kind = typeof plan?.kind === 'string' && plan.kind in TEST_TITLES ? plan.kind : s.testResult?.test;
  if (!kind) return '';
  const out = [`<h2>Breakdown test: ${esc(TEST_TITLES[kind] ?? kind)}</h2>`];
  if (typeof plan?.description === 'string') out.push(`<p>${esc(plan.description)}.</p>`);
  const r = s.testResult;
  if (!r) return `${out.join('')}<p class="note">No result recorded: the test ended before it gave one (how the run ended is below).</p>`;
  const criterion = typeof r.result.criterion === 'string' ? r.result.criterion : undefined;
  out.push(`<p class="outcome" data-outcome="${esc(r.outcome)}"><b>${esc(OUTCOME_LABELS[r.outcome] ?? r.outcome)}</b> — ${esc(r.reason)}.</p>`);
  const crit = numberRows(r.numbers, 'criterion');
  const pace = numberRows(r.numbers, 'pace');
  out.push('<div class="settings">');
  out.push(
    `<div><h3>Result</h3>${figureTable([{ key: 'outcome', label: 'outcome', text: r.outcome, unit: '' }, ...(criterion ? [{ key: 'criterion', label: 'criterion', text: criterion, unit: '' }] : []), ...resultFigureRows(r)], 'test-result')}</div>`,
  );
  out.push(
    `<div><h3>Numbers of the criterion${criterion ? ` (${esc(criterion)})` : ''}</h3>${crit.length ? figureTable(crit, 'criterion') : '<p class="note">None recorded.</p>'}${pace.length ? `<h3>Pace of the test</h3>${figureTable(pace, 'pace')}` : ''}</div>`,
  );
  out.push('</div>');
  const missing = [
    r.result.breakdownField === undefined ? 'no field without the film thickness' : '',
    r.result.chargeToBreakdown === undefined ? 'no charge per area without the device area' : '',
  ].filter(Boolean);
  if (missing.length && typeof r.result.breakdownVoltage === 'number') out.push(`<p class="note">${esc(missing.join('; '))}.</p>`);
  const where = deviceLine(r.result);
  out.push(
    `<p class="note">${where ? `${esc(where)}. ` : ''}The same figures in SI, full precision, are one row of device-results.csv beside the journal. Breakdown tests follow the wafer-level procedures of JEDEC JESD35-A.</p>`,
  );
  return out.join('');
}

/** An adaptive plan's sweeps: readings, the largest |bias|, the charge passed, the parameter reached and why each stopped. */
function adaptiveSection(s: SessionData): string {
  if (s.adaptive.length === 0) return '';
  const rows = s.adaptive.map((a) => {
    const p = a.parameter;
    const value = p ? formatParameterText({ value: p.value, stdErr: p.stdErr, unit: p.unit }, p.name) : '—';
    const why = STOP_MEANING[a.stopReason as StopReason] ?? a.stopReason;
    return `<tr><td>${a.sweep}</td><td>${a.readings}</td><td>${esc(formatQuantity(a.maxAbsBias, 'V', undefined, 4))}</td><td>${esc(formatQuantity(a.charge, 'C', undefined, 3))}</td><td>${esc(value)}</td><td>${esc(why)}</td></tr>`;
  });
  const total = s.adaptive.reduce((n, a) => n + a.readings, 0);
  const name = s.adaptive.find((a) => a.parameter)?.parameter?.name;
  return `<h2>Adaptive sweeps</h2><table><tr><th>sweep</th><th>readings</th><th>largest |V|</th><th>charge ∫|I|dt</th><th>${esc(name ? parameterLabel(name) : 'parameter')}</th><th>stopped because</th></tr>${rows.join('')}</table><p class="note">${total} readings in all; each sweep chose its own levels and stopped once the target was met or a limit reached.</p>`;
}

function planTable(plan: Record<string, unknown> | null | undefined): string {
  if (plan === null) return '<p class="note">Passive source: no plan (plumbline watched readings another program produced).</p>';
  if (!plan) return '<p class="note">No plan recorded.</p>';
  const n = (k: string) => (typeof plan[k] === 'number' ? (plan[k] as number) : undefined);
  const values = Array.isArray(plan.values) ? (plan.values as number[]) : undefined;
  return table([
    ['sweep', typeof plan.description === 'string' ? plan.description : undefined],
    ['kind', typeof plan.kind === 'string' ? plan.kind : undefined],
    // A current ramp forces currents: its range is in amperes.
    [
      'from … to',
      n('start') !== undefined && n('stop') !== undefined
        ? `${num(n('start'))} … ${num(n('stop'))} ${plan.kind === 'current-ramp' ? 'A' : 'V'}`
        : values
          ? `${values.length} listed levels, ${num(Math.min(...values))} … ${num(Math.max(...values))} V`
          : undefined,
    ],
    ['points per sweep', n('points') !== undefined ? String(n('points')) : undefined],
    ['step', n('step') !== undefined ? formatQuantity(n('step') as number, 'V') : undefined],
    ['steps per decade', n('stepsPerDecade') !== undefined ? String(n('stepsPerDecade')) : undefined],
    ['time per step', n('stepTime') !== undefined ? formatQuantity(n('stepTime') as number, 's') : undefined],
    ['voltage limit', n('voltageLimit') !== undefined ? formatQuantity(n('voltageLimit') as number, 'V') : undefined],
    ['stress', n('stress') !== undefined ? formatQuantity(n('stress') as number, 'V') : undefined],
    ['duration', n('duration') !== undefined ? formatQuantity(n('duration') as number, 's') : undefined],
    ['reading every', n('sampleEvery') !== undefined ? formatQuantity(n('sampleEvery') as number, 's') : undefined],
    ['use-condition check at', n('useVoltage') !== undefined ? formatQuantity(n('useVoltage') as number, 'V') : undefined],
    ['out and back', plan.dual === undefined ? undefined : plan.dual ? 'yes' : 'no'],
    ['sweeps', n('repeat') !== undefined ? String(n('repeat')) : undefined],
    ['compliance', n('compliance') !== undefined ? formatQuantity(n('compliance') as number, 'A') : undefined],
    ['settling delay per point', n('delay') ? `${num(n('delay'))} s` : undefined],
    ['dwell between sweeps (at 0 V)', n('dwell') ? `${num(n('dwell'))} s` : undefined],
    ['integration', n('nplc') !== undefined ? `${num(n('nplc'))} power-line cycles` : undefined],
    ['pacing', typeof plan.pacing === 'string' ? plan.pacing : undefined],
  ]);
}

function analysisTable(a: AnalysisSettings | undefined): string {
  if (!a) return '<p class="note">No analysis settings recorded.</p>';
  return table([
    ['model', a.model],
    ['fit window', describeWindow(a.window)],
    ['inputs', formatInputs(a.inputs) || 'none (defaults assumed where a model needs them)'],
    ['solar cell', a.solar ? `figures of merit and single-diode fit at ${num(a.solar.irradiance ?? 1000)} W/m²` : undefined],
  ]);
}

function driftTable(d: Record<string, unknown> | null | undefined): string {
  if (!d || Object.keys(d).length === 0) return '<p class="note">Drift watch: settings not recorded.</p>';
  const n = (k: string) => (typeof d[k] === 'number' ? num(d[k] as number) : undefined);
  const ewma = d.method !== 'cusum';
  return table([
    ['watch', d.enabled === false ? 'off' : 'on'],
    ['parameter charted', typeof d.parameter === 'string' ? d.parameter : "the model's first parameter"],
    ['chart', ewma ? 'EWMA (NIST/SEMATECH e-Handbook §6.3.2.4)' : 'tabular CUSUM (NIST/SEMATECH e-Handbook §6.3.2.3)'],
    ['baseline sweeps', n('baseline')],
    ['λ (EWMA weight)', ewma ? n('lambda') : undefined],
    ['control limit L (σ of the EWMA)', ewma ? n('L') : undefined],
    ['warning line', ewma ? n('warnL') : undefined],
    ['k (allowance, σ)', ewma ? undefined : n('k')],
    ['h (decision interval, σ)', ewma ? undefined : n('h')],
    ['action beyond the limit', typeof d.action === 'string' ? d.action : undefined],
  ]);
}

function limitsTable(l: Record<string, unknown> | null | undefined): string {
  if (!l) return '<p class="note">Station limits not recorded.</p>';
  const q = (k: string, unit: string) => (typeof l[k] === 'number' ? formatQuantity(l[k] as number, unit) : undefined);
  return table([
    ['largest |V|', q('maxVoltage', 'V')],
    ['largest compliance', q('maxCompliance', 'A')],
    ['largest |V| × compliance', q('maxPower', 'W')],
    ['high-voltage caution above', q('hazardVoltage', 'V')],
    ['ramp step between levels', q('rampStep', 'V')],
    ['wait per ramp step', q('rampDelay', 's')],
  ]);
}

/** Sequence numbers of settings changes that changed the model or its inputs (the drift baseline restarts). */
function restarts(s: SessionData): Set<number> {
  const out = new Set<number>();
  let prev = settingsOf(s.session?.analysis);
  for (const e of s.timelineSettings) {
    const a = settingsOf(e.analysis);
    if (prev && a && (a.model !== prev.model || JSON.stringify(a.inputs) !== JSON.stringify(prev.inputs))) out.add(e.seq);
    prev = a ?? prev;
  }
  return out;
}

/** The sweep at which each drift baseline starts (after the first), and why. */
function driftBreaks(points: Drift[], restartSeqs: Set<number>): { sweep: number; reason: string }[] {
  const out: { sweep: number; reason: string }[] = [];
  for (let k = 1; k < points.length; k++) {
    const a = points[k - 1];
    const b = points[k];
    const settings = [...restartSeqs].some((r) => r > a.seq && r < b.seq);
    if (b.parameter !== a.parameter) out.push({ sweep: b.sweep, reason: `now ${b.parameter}` });
    else if (settings || (b.phase === 'baseline' && a.phase === 'monitor')) out.push({ sweep: b.sweep, reason: 'analysis changed' });
  }
  return out;
}

/** The measured curve with the page's marks: ✕ negative current (as |I|), □ at compliance. */
function measuredSeries(sw: SweepData, color: string, label?: string, x: readonly number[] = sw.v): SvgSeries[] {
  const y = sw.i.map((i, k) => (sw.c[k] ? null : Math.abs(i) > 0 ? Math.abs(i) : null));
  const neg = sw.i.map((_i, k) => k).filter((k) => sw.i[k] < 0 && !sw.c[k]);
  const comp = sw.i.map((_i, k) => k).filter((k) => sw.c[k]);
  const out: SvgSeries[] = [{ x, y, color, marker: 'dot', line: true, label }];
  if (neg.length)
    out.push({ x: neg.map((k) => x[k]), y: neg.map((k) => -sw.i[k]), color: OKABE_ITO.vermillion, marker: 'cross', line: false, label: 'negative current' });
  if (comp.length)
    out.push({
      x: comp.map((k) => x[k]),
      y: comp.map((k) => Math.abs(sw.i[k])),
      color: OKABE_ITO.black,
      marker: 'square',
      line: false,
      label: 'at compliance',
    });
  return out;
}

/** The linearized plot and its residuals, in display units, following the fit window as the page does. */
function linearizedCharts(v: PlotView, model: string): { charts: string[]; hidden: number } {
  const dx = displayUnit(v.axes.x.unit);
  const dy = displayUnit(v.axes.y.unit);
  const xs = v.x.map((x) => x * dx.scale);
  const ys = v.y.map((y) => y * dy.scale);
  const xlog = v.axes.x.kind === 'log';
  const ylog = v.axes.y.kind === 'log';
  const tx = (x: number) => (xlog ? Math.log10(x) : x);
  let keep = (_x: number) => true;
  let hidden = 0;
  if (v.window) {
    const a = tx(v.window.x[0] * dx.scale);
    const b = tx(v.window.x[1] * dx.scale);
    const mg = 0.35 * (b - a || Math.abs(a) || 1);
    keep = (x: number) => tx(x) >= a - mg && tx(x) <= b + mg;
    hidden = xs.filter((x) => !keep(x)).length;
  }
  const sel = (inside: boolean) => xs.map((_x, k) => k).filter((k) => (v.inWindow[k] === 1) === inside && keep(xs[k]));
  const inK = sel(true);
  const outK = sel(false);
  const band = v.window ? [{ x0: v.window.x[0] * dx.scale, x1: v.window.x[1] * dx.scale, color: 'rgba(86,180,233,0.15)' }] : [];
  const charts = [
    svgChart({
      title: `${model}: ● in the window, ○ outside, line: fit`,
      xLabel: axisLabel(v.axes.x),
      yLabel: axisLabel(v.axes.y),
      xLog: xlog,
      yLog: ylog,
      bands: band,
      series: [
        { x: outK.map((k) => xs[k]), y: outK.map((k) => ys[k]), color: OKABE_ITO.orange, marker: 'ring', line: false, label: 'outside window' },
        { x: inK.map((k) => xs[k]), y: inK.map((k) => ys[k]), color: OKABE_ITO.blue, marker: 'dot', line: false, label: 'in window' },
        ...(v.line ? [{ x: v.line.x.map((x) => x * dx.scale), y: v.line.y.map((y) => y * dy.scale), color: OKABE_ITO.black, width: 2, label: 'fit' }] : []),
      ],
    }),
  ];
  // Residuals: ln units on log plots, the y quantity's unit on linear ones.
  const r = v.residual.map((x) => (x === null ? null : ylog ? x : x * dy.scale));
  const rin = inK.filter((k) => r[k] !== null);
  const rout = outK.filter((k) => r[k] !== null);
  if (rin.length + rout.length > 0) {
    charts.push(
      svgChart({
        title: 'residuals of the fit',
        height: 200,
        xLabel: axisLabel(v.axes.x),
        yLabel: ylog ? 'ln residual' : axisLabel({ label: 'residual', unit: v.axes.y.unit }),
        xLog: xlog,
        bands: band,
        hlines: [{ y: 0, color: '#1b1b1b', dash: '1 0' }],
        series: [
          { x: rout.map((k) => xs[k]), y: rout.map((k) => r[k]), color: OKABE_ITO.orange, marker: 'ring', line: false, label: 'outside window' },
          { x: rin.map((k) => xs[k]), y: rin.map((k) => r[k]), color: OKABE_ITO.blue, marker: 'dot', line: false, label: 'in window' },
        ],
      }),
    );
  }
  return { charts, hidden };
}

function solarChart(sw: SweepData, s: SolarSummary): string {
  const sign = s.convention === 'load' ? -1 : 1;
  const keep = sw.v.map((_v, k) => k).filter((k) => !sw.c[k]);
  const f = s.figures;
  return svgChart({
    title: 'cell: ● measured, line: diode fit, ■ P_max',
    xLabel: 'bias V (V)',
    yLabel: 'delivered current I (A)',
    rects: f.vmp && f.imp ? [{ x0: 0, y0: 0, x1: f.vmp.value, y1: f.imp.value, fill: 'rgba(230,159,0,0.15)', stroke: OKABE_ITO.orange }] : [],
    series: [
      { x: keep.map((k) => sw.v[k]), y: keep.map((k) => sign * sw.i[k]), color: OKABE_ITO.blue, marker: 'dot', line: false, label: 'measured' },
      ...(s.curve ? [{ x: [...s.curve.v], y: [...s.curve.i], color: OKABE_ITO.black, width: 2, label: 'single-diode fit' }] : []),
      ...(f.vmp && f.imp
        ? [{ x: [f.vmp.value], y: [f.imp.value], color: OKABE_ITO.vermillion, marker: 'square' as const, line: false, label: 'maximum power' }]
        : []),
    ],
  });
}

/** Re-analyses kept beside the journal (reanalysis.jsonl), newest last; damaged lines are skipped. */
export interface KeptReanalysis {
  readonly at: string;
  readonly analysis: unknown;
  readonly fits: { sweep: number; fit: { parameters: Record<string, { value: number; stdErr: number; unit: string }> } | null; error: string | null }[];
}

function readReanalyses(dir: string): KeptReanalysis[] {
  const file = join(dir, 'reanalysis.jsonl');
  if (!existsSync(file)) return [];
  const out: KeptReanalysis[] = [];
  for (const line of readFileSync(file, 'utf8').split('\n')) {
    if (!line.trim()) continue;
    try {
      out.push(JSON.parse(line) as KeptReanalysis);
    } catch {
      /* a torn last line: skipped */
    }
  }
  return out;
}

/** Why a fit is not plausible: the deciding check's warning (journals before it was recorded: the warnings). */
function implausibleReason(f: FitSummary): string {
  return f.failed?.[0] ?? (f.warnings.length ? "see the sweep's warnings" : 'no reason recorded');
}

export function renderReport(s: SessionData, reanalyses: readonly KeptReanalysis[] = []): string {
  const se = s.session;
  const plan = se?.plan as Record<string, unknown> | null | undefined;
  const first = settingsOf(se?.analysis);
  const analysis = settingsOf(s.analysis);
  const n = s.sweeps.length;
  const out: string[] = [];
  out.push(`<!doctype html><html lang="en"><head><meta charset="utf-8"><title>plumbline report — ${esc(s.id)}</title><style>
body{font-family:system-ui,"DejaVu Sans",sans-serif;color:#1b1b1b;margin:1.5rem auto;max-width:1000px;padding:0 1rem}
h1{font-size:1.4rem}h2{font-size:1.15rem;margin-top:1.6rem;border-bottom:1px solid #ccc}h3{font-size:1rem}
table{border-collapse:collapse;font-variant-numeric:tabular-nums;font-size:.85rem}td,th{border-bottom:1px solid #ddd;padding:.15rem .4rem;text-align:left;vertical-align:top}
table.kv th{font-weight:600;color:#444;width:16rem}.settings{display:grid;grid-template-columns:1fr 1fr;gap:.3rem 1.5rem}
.chart text{font-size:10px;fill:#333}.chart .t{font-size:12px;font-weight:600}.chart .ax{font-size:11px}
.note{color:#555;font-size:.85rem}tr.implausible td{color:#7a1010}.implausible{color:#7a1010;font-weight:600}.caution{border:2px solid #7a1010;background:#fde3de;padding:.4rem .6rem;margin:.6rem 0}
.sweep{page-break-inside:avoid;break-inside:avoid;margin-bottom:1rem}.plots{display:flex;flex-wrap:wrap;gap:.5rem}
@media print{body{margin:0}h2{page-break-after:avoid}}
</style></head><body>`);
  out.push(`<h1>plumbline session report: ${esc(s.id)}</h1>`);
  out.push(
    `<p>Started ${esc(se?.startedAt ?? 'unknown')}; source: ${esc(se?.source.detail ?? 'unknown')}${se?.source.control === false ? ' (watched; plumbline did not control the instrument)' : ''}; instrument: ${esc(se?.instrument ?? 'unknown')}.<br>`,
  );
  out.push(
    s.runEnd
      ? `Ended: <b>${esc(s.runEnd.outcome)}</b> — ${esc(s.runEnd.reason)}. ${n} sweep(s).</p>`
      : `Ended: <b>no run end yet</b>. ${n} sweep(s).</p><p class="caution">${esc(upperFirst(noRunEndNote(s.dir)))}.</p>`,
  );
  out.push(
    '<p class="caution">Cautions and decisions below record what the software saw. They do not replace your lab\'s safety rules, the instrument\'s manual or licensed practice.</p>',
  );
  out.push(breakdownSection(s));
  out.push(adaptiveSection(s));
  // Settings, as tables in the trade's units.
  out.push('<h2>Settings</h2><div class="settings">');
  out.push(`<div><h3>Sweep plan</h3>${planTable(plan)}</div>`);
  out.push(`<div><h3>Analysis at the start</h3>${analysisTable(first)}</div>`);
  out.push(`<div><h3>Drift watch</h3>${driftTable(se?.drift as Record<string, unknown> | null | undefined)}</div>`);
  out.push(`<div><h3>Station limits</h3>${limitsTable(se?.limits as Record<string, unknown> | null | undefined)}</div>`);
  const dev = deviceRows(s.device as Record<string, unknown> | null);
  if (dev.length) {
    const corrected = s.annotations.some((a) => a.device);
    out.push(
      `<div><h3>Device under test</h3>${figureTable(dev, 'device')}${corrected ? '<p class="note">With the corrections made in notes after the start (later values win).</p>' : ''}</div>`,
    );
  }
  out.push('</div>');
  if (s.timelineSettings.length) {
    out.push('<h3>Analysis changes during the session</h3><table><tr><th>t (s)</th><th>from</th><th>settings from then on</th></tr>');
    for (const e of s.timelineSettings)
      out.push(`<tr><td>${(e.t / 1000).toFixed(3)}</td><td>${esc(e.source)}</td><td>${esc(describeAnalysis(settingsOf(e.analysis)))}</td></tr>`);
    out.push('</table>');
  }
  if (s.badLines.length)
    out.push(
      `<p class="note">${s.badLines.length} damaged journal line(s) were skipped: ${s.badLines.map((b) => `line ${b.line} (${esc(b.problem)})`).join('; ')}.</p>`,
    );
  // Annotations.
  out.push('<h2>Notes</h2>');
  if (s.annotations.length === 0) out.push('<p class="note">No notes.</p>');
  else
    out.push(
      `<ul>${s.annotations.map((a) => `<li>${a.sweep !== undefined ? `sweep ${a.sweep}: ` : 'session: '}${esc(a.text)}${a.tags.length ? ` <span class="note">[${a.tags.map(esc).join(', ')}]</span>` : ''}</li>`).join('')}</ul>`,
    );
  // Timeline.
  out.push('<h2>Cautions and decisions</h2>');
  if (s.timeline.length === 0) out.push('<p class="note">None.</p>');
  else {
    out.push('<table><tr><th>t (s)</th><th>event</th><th>text</th></tr>');
    for (const e of s.timeline) {
      const what =
        e.type === 'caution'
          ? `caution: ${e.kind}`
          : e.type === 'decision'
            ? `decision: ${e.action}`
            : e.type === 'output'
              ? `output ${e.on ? 'on' : 'off'}${e.queried ? (e.confirmed ? ' (confirmed by the instrument)' : ' (NOT confirmed)') : e.sent === false ? ' (could not be sent)' : ' (sent)'}`
              : e.type;
      const text =
        e.type === 'caution'
          ? e.message
          : e.type === 'decision' || e.type === 'output' || e.type === 'run-end'
            ? e.reason
            : e.type === 'recovery'
              ? e.message
              : '';
      out.push(`<tr><td>${(e.t / 1000).toFixed(3)}</td><td>${esc(what)}</td><td>${esc(text)}</td></tr>`);
    }
    out.push('</table>');
  }
  // Overview of all sweeps.
  out.push('<h2>All sweeps</h2>');
  out.push(
    svgChart({
      width: 900,
      height: 360,
      title: `|I| against V, ${n} sweep(s): colour from the first (dark) to the last (light); ✕ negative current, □ at compliance`,
      xLabel: 'bias V (V)',
      yLabel: '|I| (A)',
      yLog: true,
      // Curves as lines; a sweep of a single reading (a breakdown test's use-condition check) as a dot.
      series: s.sweeps.flatMap((sw, k) =>
        measuredSeries(sw, sweepColour(k, n), `sweep ${sw.sweep}`).map((x, j) =>
          j === 0 && x.y.filter((y) => y !== null).length > 1 ? { ...x, marker: 'none' as const } : x,
        ),
      ),
    }),
  );
  // Parameter trends, in display units, with the drift chart of the charted parameter.
  const names = new Map<string, string>();
  for (const sw of s.sweeps) for (const [k, p] of Object.entries(sw.fit?.parameters ?? {})) if (!names.has(k)) names.set(k, p.unit);
  const drift = s.sweeps
    .map((sw) => sw.drift)
    .filter((d): d is Drift => d !== null)
    .sort((a, b) => a.sweep - b.sweep);
  const breaks = driftBreaks(drift, restarts(s));
  out.push('<h2>Parameters across sweeps</h2><div class="plots">');
  if (names.size === 0) out.push('<p class="note">No fitted parameters.</p>');
  for (const [name, unit] of names) {
    const du = displayUnit(unit, name);
    // Plausible fits as dots joined by a line with their ± 2σ band; fits marked not plausible as
    // open rings, unjoined and without a band (their uncertainty is not to be trusted).
    const with_ = s.sweeps.filter((sw) => sw.fit?.parameters[name] && sw.fit.plausible);
    const odd = s.sweeps.filter((sw) => sw.fit?.parameters[name] && !sw.fit.plausible);
    const xs = with_.map((sw) => sw.sweep);
    const val = with_.map((sw) => (sw.fit?.parameters[name].value as number) * du.scale);
    const se_ = with_.map((sw) => (sw.fit?.parameters[name].stdErr ?? 0) * du.scale);
    const mine = drift.filter((d) => d.parameter === name && d.upper !== null);
    const series: SvgSeries[] = [
      { x: xs, y: val, color: OKABE_ITO.blue, marker: 'dot', label: name },
      { x: xs, y: val.map((v, k) => v + 2 * se_[k]), color: OKABE_ITO.sky, dash: '2 2', label: '+2σ' },
      { x: xs, y: val.map((v, k) => v - 2 * se_[k]), color: OKABE_ITO.sky, dash: '2 2', label: '−2σ' },
    ];
    if (odd.length)
      series.push({
        x: odd.map((sw) => sw.sweep),
        y: odd.map((sw) => (sw.fit?.parameters[name].value as number) * du.scale),
        color: OKABE_ITO.vermillion,
        marker: 'ring',
        line: false,
        label: `${name} (not plausible)`,
      });
    const ewma = mine.length > 0 && mine[0].method === 'ewma';
    if (ewma) {
      // One line per baseline: no line runs across a break.
      const cut = new Set(breaks.map((b) => b.sweep));
      const seg = (pick: (d: Drift) => number | null) =>
        mine.flatMap((d, k) =>
          k > 0 && cut.has(d.sweep)
            ? [
                { x: d.sweep - 0.5, y: null },
                { x: d.sweep, y: pick(d) },
              ]
            : [{ x: d.sweep, y: pick(d) }],
        );
      const line = (pick: (d: Drift) => number | null, color: string, dash: string | undefined, label: string, marker?: 'dot') => {
        const pts = seg((d) => (pick(d) === null ? null : (pick(d) as number) * du.scale));
        series.push({ x: pts.map((p) => p.x), y: pts.map((p) => p.y), color, dash, label, marker });
      };
      line((d) => d.statistic, OKABE_ITO.black, undefined, 'EWMA', 'dot');
      line((d) => d.upper, OKABE_ITO.vermillion, '6 4', 'upper limit');
      line((d) => d.lower, OKABE_ITO.vermillion, '6 4', 'lower limit');
    }
    const label = du.unit ? `${parameterLabel(name)} (${du.unit})` : parameterLabel(name);
    out.push(
      svgChart({
        width: 900,
        title: `${parameterLabel(name)}${du.unit ? ` (${du.unit})` : ''}: value ● ± 2σ (dotted)${odd.length ? `; ○ (red) a fit marked not plausible (${odd.length} sweep${odd.length > 1 ? 's' : ''}), no band: see the Results table` : ''}${ewma ? '; EWMA ● (black) and its control limits (dashed)' : ''}${breaks.length && mine.length ? '; vertical dashes: a new drift baseline' : ''}`,
        xLabel: 'sweep',
        xInteger: true,
        yLabel: label,
        series,
        vlines: mine.length ? breaks.map((b) => ({ x: b.sweep - 0.5, color: '#1b1b1b', label: `new baseline (${b.reason})` })) : [],
      }),
    );
  }
  out.push('</div>');
  // A solar cell's figures of merit.
  const solar = s.sweeps.filter((sw) => sw.solar && Object.keys(sw.solar.figures).length);
  if (solar.length) {
    const keys = [...new Set(solar.flatMap((sw) => Object.keys(sw.solar?.figures ?? {})))];
    const ref = solar[0].solar as SolarSummary;
    out.push(
      `<h2>Solar cell: figures of merit</h2><p class="note">From local least-squares fits of each measured curve (± one standard uncertainty); G = ${num(ref.irradiance)} W/m²${ref.area !== null ? `, area ${formatQuantity(ref.area, 'm^2')}` : ''}, T = ${num(ref.temperature.value)} K${ref.temperature.assumed ? ' (assumed)' : ''}; currents in the generator convention. Standard test conditions are 1000 W/m², 25 °C, AM1.5G (IEC 60904-3; measurement per IEC 60904-1).</p>`,
    );
    out.push(
      `<table><tr><th>sweep</th>${keys.map((k) => `<th>${esc(parameterLabel(k))}${displayUnit(ref.figures[k]?.unit ?? '', k).unit ? ` (${esc(displayUnit(ref.figures[k]?.unit ?? '', k).unit)})` : ''}</th>`).join('')}<th>single-diode fit</th></tr>`,
    );
    for (const sw of solar) {
      const f = sw.solar as SolarSummary;
      const m = f.model?.parameters ?? {};
      out.push(
        `<tr><td>${sw.sweep}</td>${keys.map((k) => `<td>${f.figures[k] ? esc(formatParameter(f.figures[k], k).text) : '—'}</td>`).join('')}<td>${esc(
          Object.entries(m)
            .map(([k, p]) => `${parameterLabel(k)} ${formatParameterText(p, k)}`)
            .join('; '),
        )}</td></tr>`,
      );
    }
    out.push('</table>');
  }
  // Results table.
  out.push('<h2>Results</h2><table><tr><th>sweep</th><th>points</th><th>complete</th><th>model</th><th>window (V)</th>');
  for (const [name, unit] of names) {
    const u = displayUnit(unit, name).unit;
    out.push(`<th>${esc(parameterLabel(name))}${u ? ` (${esc(u)})` : ''}</th>`);
  }
  out.push('<th>R²</th><th>drift</th><th>notes</th></tr>');
  for (const sw of s.sweeps) {
    const f = sw.fit;
    const odd = f && !f.plausible ? ` <span class="implausible">not plausible: ${esc(implausibleReason(f))}</span>` : '';
    out.push(
      `<tr${odd ? ' class="implausible"' : ''}><td>${sw.sweep}${sw.label ? ` <span class="note">${esc(sw.label)}</span>` : ''}</td><td>${sw.v.length}</td><td>${sw.complete === null ? '—' : sw.complete ? 'yes' : 'no'}</td><td>${esc(f?.model ?? '—')}${odd}</td><td>${f ? `${num(f.window.from, 4)} … ${num(f.window.to, 4)}` : esc(sw.fitError ?? '—')}</td>`,
    );
    for (const [name] of names) {
      const p = f?.parameters[name];
      out.push(`<td>${p ? esc(formatParameter(p, name).text) : '—'}</td>`);
    }
    out.push(
      `<td>${f ? f.line.r2.toFixed(5) : '—'}</td><td>${esc(sw.drift?.state ?? '—')}</td><td>${esc(sw.annotations.map((a) => a.text).join('; '))}</td></tr>`,
    );
  }
  out.push('</table>');
  // Re-analyses made on the page, kept beside the journal.
  if (reanalyses.length) {
    out.push(
      '<h2>Re-analyses</h2><p class="note">Fits made again with other settings after the run (the page, or POST /api/sessions/…/reanalyze), kept in reanalysis.jsonl beside the journal; the journal\'s own fits above are unchanged.</p>',
    );
    out.push('<table><tr><th>when</th><th>settings</th><th>sweep</th><th>result</th></tr>');
    for (const r of reanalyses.slice(-50)) {
      for (const f of r.fits) {
        const res = f.fit
          ? Object.entries(f.fit.parameters)
              .map(([k, p]) => `${parameterLabel(k)} ${formatParameterText(p, k)}`)
              .join('; ') || 'line only'
          : `no fit: ${f.error ?? ''}`;
        out.push(`<tr><td>${esc(r.at)}</td><td>${esc(describeAnalysis(settingsOf(r.analysis)))}</td><td>${f.sweep}</td><td>${esc(res)}</td></tr>`);
      }
    }
    out.push('</table>');
  }
  // Each sweep.
  out.push('<h2>Each sweep</h2>');
  const shown = s.sweeps.slice(-MAX_SWEEP_SECTIONS);
  if (shown.length < n) out.push(`<p class="note">The last ${shown.length} of ${n} sweeps are drawn one by one; the overview and the table hold them all.</p>`);
  for (const sw of shown) {
    const notes: string[] = [];
    out.push(
      `<div class="sweep"><h3>Sweep ${sw.sweep}${sw.label ? `: ${esc(sw.label)}` : ''}${sw.complete === false ? ' (incomplete)' : ''}</h3><div class="plots">`,
    );
    // A stretch held at one bias (a constant-stress interval) is drawn against time: against the
    // bias it would be a column of points on an axis a millivolt wide.
    const held = sw.v.length > 1 && atOneBias(sw.v, (k) => sw.c[k] === 1 || sw.b[k] === 1);
    const heldAt = held ? sw.v.find((_v, k) => !sw.c[k] && !sw.b[k]) : undefined;
    out.push(
      held
        ? svgChart({
            title: `held at ${formatQuantity(heldAt ?? sw.v[0], 'V', undefined, 4)}: current against time; ✕ negative current (as |I|), □ at compliance`,
            xLabel: 'time since the interval began (s)',
            yLabel: '|I| (A)',
            yLog: true,
            series: measuredSeries(
              sw,
              OKABE_ITO.blue,
              undefined,
              sw.t.map((t) => (t - sw.t[0]) / 1000),
            ),
          })
        : svgChart({
            title: 'measured: ✕ negative current (as |I|), □ at compliance',
            xLabel: 'bias V (V)',
            yLabel: '|I| (A)',
            yLog: true,
            series: measuredSeries(sw, OKABE_ITO.blue),
          }),
    );
    // The sweep is drawn with the settings its recorded fit was made with.
    const a = held ? undefined : (settingsOf(sw.analysis) ?? analysis);
    if (a) {
      try {
        const v = plotView(
          { x: sw.v, y: sw.i, compliance: sw.c, breakdown: sw.b },
          { model: a.model, columns: READING_COLUMNS, inputs: a.inputs, window: a.window, complianceLimit: s.complianceLimit },
        );
        const { charts, hidden } = linearizedCharts(v, a.model);
        out.push(...charts);
        if (hidden) notes.push(`${hidden} transformable point(s) far from the fit window are not drawn in the linearized plot`);
      } catch (e) {
        out.push(`<p class="note">No linearized view: ${esc((e as Error).message)}</p>`);
      }
    }
    if (sw.solar && Object.keys(sw.solar.figures).length) out.push(solarChart(sw, sw.solar));
    out.push('</div>');
    if (sw.fit && !sw.fit.plausible)
      out.push(`<p class="note"><span class="implausible">Not plausible for this mechanism:</span> ${esc(implausibleReason(sw.fit))}.</p>`);
    if (sw.fit)
      out.push(
        `<p class="note">${Object.entries(sw.fit.parameters)
          .map(([k, p]) => `${esc(parameterLabel(k))} = ${esc(formatParameterText(p, k))}`)
          .join(
            '; ',
          )}${Object.keys(sw.fit.parameters).length ? '; ' : ''}R² ${sw.fit.line.r2.toFixed(6)}; ${sw.fit.line.n} points in the window (${esc(describeAnalysis(a))}).${sw.fit.warnings.length ? ` Warnings: ${sw.fit.warnings.map(esc).join('; ')}` : ''}</p>`,
      );
    else if (sw.fitError) out.push(`<p class="note">No fit: ${esc(sw.fitError)}</p>`);
    if (sw.solar)
      out.push(
        `<p class="note">Solar cell: ${Object.entries(sw.solar.figures)
          .map(([k, p]) => `${esc(parameterLabel(k))} ${esc(formatParameterText(p, k))}`)
          .join('; ')}.${sw.solar.warnings.length ? ` Warnings: ${sw.solar.warnings.map(esc).join('; ')}` : ''}</p>`,
      );
    if (notes.length) out.push(`<p class="note">${notes.map(esc).join('; ')}.</p>`);
    out.push('</div>');
  }
  out.push(
    `<p class="note">Generated by plumbline from ${esc(s.dir)} on ${new Date().toISOString()}. Shown in the trade's units (nm, cm², MV/cm, A/cm², cm/MV, eV); the journal and every export keep SI.</p></body></html>`,
  );
  return out.join('\n');
}

/**
 * Writes the report. `unfinished` is set when the journal has no run end (still being written, or
 * cut by a crash): the report's header says so, and so should whoever called.
 */
export function writeReport(dir: string, out?: string): { file: string; sweeps: number; unfinished: string | null } {
  const s = loadSession(dir);
  const file = out ?? join(s.dir, 'report.html');
  writeFileSync(file, renderReport(s, readReanalyses(s.dir)));
  return { file, sweeps: s.sweeps.length, unfinished: s.runEnd ? null : noRunEndNote(s.dir) };
}

const upperFirst = (t: string) => t.charAt(0).toUpperCase() + t.slice(1);
