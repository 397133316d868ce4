/**
 * `plumbline report`: one self-contained HTML file for a session — no script, no network, inline SVG
 * charts and CSS that print to PDF — with the settings and annotations, every sweep's raw and
 * linearized plots with fits, parameter trends with the drift limits, cautions and decisions in
 * time order, and a table of results with uncertainties. The physics comes from daemon/analysis
 * (the linearized views are the same plotView the page draws).
 */
import { writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { plotView } from '../analysis/plot.js';
import { analysisSchema } from '../pipeline/settings.js';
import { OKABE_ITO } from '../../protocols/palette.js';
import { loadSession, type SessionData } from './sessions.js';
import { sequential, svgChart, type SvgSeries } from './svg.js';

const esc = (s: unknown) => String(s).replace(/&/g, '&amp;').replace(/</g, '&lt;').replace(/>/g, '&gt;').replace(/"/g, '&quot;');
const num = (v: number | null | undefined, d = 5) => (v === null || v === undefined || !Number.isFinite(v) ? '—' : Math.abs(v) >= 1e4 || (Math.abs(v) < 1e-2 && v !== 0) ? v.toExponential(d - 1) : String(+v.toPrecision(d)));

/** Sweeps drawn one by one (the overview and the table always hold them all). */
export const MAX_SWEEP_SECTIONS = 200;

export function renderReport(s: SessionData): string {
  const se = s.session;
  const plan = se?.plan as { description?: string } | null | undefined;
  const analysisParsed = analysisSchema.safeParse(s.analysis);
  const analysis = analysisParsed.success ? analysisParsed.data : undefined;
  const n = s.sweeps.length;
  const out: string[] = [];
  out.push(`<!doctype html><html lang="en"><head><meta charset="utf-8"><title>plumbline report — ${esc(s.id)}</title><style>
body{font-family:system-ui,"DejaVu Sans",sans-serif;color:#1b1b1b;margin:1.5rem auto;max-width:1000px;padding:0 1rem}
h1{font-size:1.4rem}h2{font-size:1.15rem;margin-top:1.6rem;border-bottom:1px solid #ccc}h3{font-size:1rem}
table{border-collapse:collapse;font-variant-numeric:tabular-nums;font-size:.85rem}td,th{border-bottom:1px solid #ddd;padding:.15rem .4rem;text-align:left;vertical-align:top}
.chart text{font-size:10px;fill:#333}.chart .t{font-size:12px;font-weight:600}.chart .ax{font-size:11px}
.note{color:#555;font-size:.85rem}.caution{border:2px solid #7a1010;background:#fde3de;padding:.4rem .6rem;margin:.6rem 0}
.sweep{page-break-inside:avoid;break-inside:avoid;margin-bottom:1rem}.plots{display:flex;flex-wrap:wrap;gap:.5rem}
@media print{body{margin:0}h2{page-break-after:avoid}}
</style></head><body>`);
  out.push(`<h1>plumbline session report: ${esc(s.id)}</h1>`);
  out.push(`<p>Started ${esc(se?.startedAt ?? 'unknown')}; source: ${esc(se?.source.detail ?? 'unknown')}${se?.source.control === false ? ' (watched; plumbline did not control the instrument)' : ''}; instrument: ${esc(se?.instrument ?? 'unknown')}.<br>`);
  out.push(`Ended: <b>${esc(s.runEnd?.outcome ?? 'not ended')}</b>${s.runEnd ? ` — ${esc(s.runEnd.reason)}` : ''}. ${n} sweep(s).</p>`);
  out.push('<p class="caution">Cautions and decisions below record what the software saw. They do not replace your lab\'s safety rules, the instrument\'s manual or licensed practice.</p>');
  // Settings.
  out.push('<h2>Settings</h2><table>');
  out.push(`<tr><th>plan</th><td>${esc(plan?.description ?? (plan === null ? 'passive source (no plan)' : JSON.stringify(plan)))}</td></tr>`);
  if (analysis) out.push(`<tr><th>analysis</th><td>model ${esc(analysis.model)}; window ${esc(typeof analysis.window === 'object' ? `${analysis.window.from ?? '−∞'} … ${analysis.window.to ?? '∞'} V` : analysis.window)}; inputs ${esc(Object.entries(analysis.inputs).map(([k, v]) => `${k} = ${v}`).join(', ') || 'none')} (SI)</td></tr>`);
  if (se?.drift) out.push(`<tr><th>drift watch</th><td>${esc(JSON.stringify(se.drift))}</td></tr>`);
  if (se?.limits) out.push(`<tr><th>station limits</th><td>${esc(JSON.stringify(se.limits))}</td></tr>`);
  out.push('</table>');
  if (s.badLines.length) out.push(`<p class="note">${s.badLines.length} damaged journal line(s) were skipped: ${s.badLines.map((b) => `line ${b.line} (${esc(b.problem)})`).join('; ')}.</p>`);
  // Annotations.
  out.push('<h2>Notes</h2>');
  if (s.annotations.length === 0) out.push('<p class="note">No notes.</p>');
  else out.push(`<ul>${s.annotations.map((a) => `<li>${a.sweep !== undefined ? `sweep ${a.sweep}: ` : 'session: '}${esc(a.text)}${a.tags.length ? ` <span class="note">[${a.tags.map(esc).join(', ')}]</span>` : ''}</li>`).join('')}</ul>`);
  // Timeline.
  out.push('<h2>Cautions and decisions</h2>');
  if (s.timeline.length === 0) out.push('<p class="note">None.</p>');
  else {
    out.push('<table><tr><th>t (s)</th><th>event</th><th>text</th></tr>');
    for (const e of s.timeline) {
      const what = e.type === 'caution' ? `caution: ${e.kind}` : e.type === 'decision' ? `decision: ${e.action}` : e.type === 'output' ? `output ${e.on ? 'on' : 'off'}${e.queried ? (e.confirmed ? ' (confirmed by the instrument)' : ' (NOT confirmed)') : e.sent === false ? ' (could not be sent)' : ' (sent)'}` : e.type;
      const text = e.type === 'caution' ? e.message : e.type === 'decision' || e.type === 'output' || e.type === 'run-end' ? e.reason : e.type === 'recovery' ? e.message : '';
      out.push(`<tr><td>${(e.t / 1000).toFixed(3)}</td><td>${esc(what)}</td><td>${esc(text)}</td></tr>`);
    }
    out.push('</table>');
  }
  // Overview of all sweeps.
  out.push('<h2>All sweeps</h2>');
  out.push(svgChart({
    width: 900,
    height: 360,
    title: `|I| against V, ${n} sweep(s): colour from the first (dark) to the last (light)`,
    xLabel: 'bias V (V)',
    yLabel: '|I| (A)',
    yLog: true,
    series: s.sweeps.map((sw, k) => ({ x: sw.v, y: sw.i.map((i) => (Math.abs(i) > 0 ? Math.abs(i) : null)), color: sequential(n > 1 ? k / (n - 1) : 1), label: `sweep ${sw.sweep}` })),
  }));
  // Parameter trends.
  const names = new Map<string, string>();
  for (const sw of s.sweeps) for (const [k, p] of Object.entries(sw.fit?.parameters ?? {})) if (!names.has(k)) names.set(k, p.unit);
  out.push('<h2>Parameters across sweeps</h2><div class="plots">');
  for (const [name, unit] of names) {
    const xs = s.sweeps.filter((sw) => sw.fit?.parameters[name]).map((sw) => sw.sweep);
    const val = s.sweeps.filter((sw) => sw.fit?.parameters[name]).map((sw) => sw.fit?.parameters[name].value as number);
    const drifts = s.sweeps.filter((sw) => sw.drift && sw.drift.parameter === name && sw.drift.upper !== null);
    const series: SvgSeries[] = [
      { x: xs, y: val, color: OKABE_ITO.blue, marker: 'dot' as const, label: name },
      { x: xs, y: xs.map((_, k) => val[k] + 2 * (s.sweeps.find((sw) => sw.sweep === xs[k])?.fit?.parameters[name].stdErr ?? 0)), color: OKABE_ITO.sky, dash: '2 2', label: '+2σ' },
      { x: xs, y: xs.map((_, k) => val[k] - 2 * (s.sweeps.find((sw) => sw.sweep === xs[k])?.fit?.parameters[name].stdErr ?? 0)), color: OKABE_ITO.sky, dash: '2 2', label: '−2σ' },
    ];
    if (drifts.length && drifts[0].drift?.method === 'ewma') {
      series.push(
        { x: drifts.map((sw) => sw.sweep), y: drifts.map((sw) => sw.drift?.statistic ?? null) as number[], color: OKABE_ITO.black, marker: 'dot' as const, label: 'EWMA' },
        { x: drifts.map((sw) => sw.sweep), y: drifts.map((sw) => sw.drift?.upper ?? null) as number[], color: OKABE_ITO.vermillion, dash: '6 4', label: 'upper limit' },
        { x: drifts.map((sw) => sw.sweep), y: drifts.map((sw) => sw.drift?.lower ?? null) as number[], color: OKABE_ITO.vermillion, dash: '6 4', label: 'lower limit' },
      );
    }
    out.push(svgChart({ width: 900, title: `${name}${unit ? ` (${unit})` : ''}: value ● ± 2σ (dotted)${drifts.length ? '; EWMA ● (black) and its control limits (dashed)' : ''}`, xLabel: 'sweep', yLabel: `${name}${unit ? ` (${unit})` : ''}`, series }));
  }
  out.push('</div>');
  // Results table.
  out.push('<h2>Results</h2><table><tr><th>sweep</th><th>points</th><th>complete</th><th>model</th><th>window</th>');
  for (const [name, unit] of names) out.push(`<th>${esc(name)}${unit ? ` (${esc(unit)})` : ''}</th>`);
  out.push('<th>R²</th><th>drift</th><th>notes</th></tr>');
  for (const sw of s.sweeps) {
    const f = sw.fit;
    out.push(`<tr><td>${sw.sweep}</td><td>${sw.v.length}</td><td>${sw.complete === null ? '—' : sw.complete ? 'yes' : 'no'}</td><td>${esc(f?.model ?? '—')}</td><td>${f ? `${num(f.window.from, 4)} … ${num(f.window.to, 4)}` : esc(sw.fitError ?? '—')}</td>`);
    for (const name of names.keys()) {
      const p = f?.parameters[name];
      out.push(`<td>${p ? `${num(p.value, 5)} ± ${num(p.stdErr, 2)}` : '—'}</td>`);
    }
    out.push(`<td>${f ? f.line.r2.toFixed(5) : '—'}</td><td>${esc(sw.drift?.state ?? '—')}</td><td>${esc(sw.annotations.map((a) => a.text).join('; '))}</td></tr>`);
  }
  out.push('</table>');
  // Each sweep.
  out.push('<h2>Each sweep</h2>');
  const shown = s.sweeps.slice(-MAX_SWEEP_SECTIONS);
  if (shown.length < n) out.push(`<p class="note">The last ${shown.length} of ${n} sweeps are drawn one by one; the overview and the table hold them all.</p>`);
  for (const sw of shown) {
    const notes: string[] = [];
    out.push(`<div class="sweep"><h3>Sweep ${sw.sweep}${sw.complete === false ? ' (incomplete)' : ''}</h3><div class="plots">`);
    out.push(svgChart({ title: 'measured', xLabel: 'bias V (V)', yLabel: '|I| (A)', yLog: true, series: [{ x: sw.v, y: sw.i.map((i) => (Math.abs(i) > 0 ? Math.abs(i) : null)), color: OKABE_ITO.blue, marker: 'dot', line: true }] }));
    if (analysis) {
      try {
        const v = plotView({ x: sw.v, y: sw.i, compliance: sw.c }, { model: analysis.model, inputs: analysis.inputs, window: analysis.window, complianceLimit: s.complianceLimit });
        // The view follows the fit window (±35 % of its width), as the page does by default.
        const xlog = v.axes.x.kind === 'log';
        const tx = (x: number) => (xlog ? Math.log10(x) : x);
        let keep = (_x: number) => true;
        let hidden = 0;
        if (v.window) {
          const a = tx(v.window.x[0]);
          const b = tx(v.window.x[1]);
          const mg = 0.35 * (b - a || Math.abs(a) || 1);
          keep = (x: number) => tx(x) >= a - mg && tx(x) <= b + mg;
          hidden = v.x.filter((x) => !keep(x)).length;
        }
        const sel = (inside: boolean) => v.x.map((_x, k) => k).filter((k) => (v.inWindow[k] === 1) === inside && keep(v.x[k]));
        const inX = sel(true).map((k) => v.x[k]);
        const inY = sel(true).map((k) => v.y[k]);
        const outX = sel(false).map((k) => v.x[k]);
        const outY = sel(false).map((k) => v.y[k]);
        const series = [
          { x: outX, y: outY, color: OKABE_ITO.orange, marker: 'ring' as const, line: false, label: 'outside window' },
          { x: inX, y: inY, color: OKABE_ITO.blue, marker: 'dot' as const, line: false, label: 'in window' },
          ...(v.line ? [{ x: v.line.x, y: v.line.y, color: OKABE_ITO.black, width: 2, label: 'fit' }] : []),
        ];
        out.push(svgChart({
          title: `${analysis.model}: ● in the window, ○ outside, line: fit`,
          xLabel: `${v.axes.x.label} (${v.axes.x.unit})`,
          yLabel: `${v.axes.y.label} (${v.axes.y.unit})`,
          xLog: v.axes.x.kind === 'log',
          yLog: v.axes.y.kind === 'log',
          bands: v.window ? [{ x0: v.window.x[0], x1: v.window.x[1], color: 'rgba(86,180,233,0.15)' }] : [],
          series,
        }));
        if (hidden) notes.push(`${hidden} transformable point(s) far from the fit window are not drawn in the linearized plot`);
      } catch (e) {
        out.push(`<p class="note">No linearized view: ${esc((e as Error).message)}</p>`);
      }
    }
    out.push('</div>');
    if (sw.fit) out.push(`<p class="note">${Object.entries(sw.fit.parameters).map(([k, p]) => `${esc(k)} = ${num(p.value, 6)} ± ${num(p.stdErr, 2)} ${esc(p.unit)}`).join('; ')}; R² ${sw.fit.line.r2.toFixed(6)}; ${sw.fit.line.n} points in the window.${sw.fit.warnings.length ? ` Warnings: ${sw.fit.warnings.map(esc).join('; ')}` : ''}</p>`);
    else if (sw.fitError) out.push(`<p class="note">No fit: ${esc(sw.fitError)}</p>`);
    if (notes.length) out.push(`<p class="note">${notes.map(esc).join('; ')}.</p>`);
    out.push('</div>');
  }
  out.push(`<p class="note">Generated by plumbline from ${esc(s.dir)} on ${new Date().toISOString()}. SI units; energies in eV.</p></body></html>`);
  return out.join('\n');
}

export function writeReport(dir: string, out?: string): { file: string; sweeps: number } {
  const s = loadSession(dir);
  const file = out ?? join(s.dir, 'report.html');
  writeFileSync(file, renderReport(s));
  return { file, sweeps: s.sweeps.length };
}
