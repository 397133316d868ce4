/** Readable (non-JSON) renderings of analysis results for the terminal. */
import type { FitReport } from '../analysis/analyze.js';
import { describeReasons } from '../analysis/analyze.js';
import type { Ranking } from '../analysis/ranking.js';
import type { DiodeReport, SolarReport } from '../analysis/diode-fit.js';
import { axisLabel, displayUnit, formatInputs, formatParameterText, prettyUnit } from '../../protocols/display-units.js';
import { formatNumber } from '../../protocols/number-format.js';
import type { FitSummary } from '../../protocols/wire.js';

/** Numbers in text output: the formatter the page and the report use too. */
export function num(v: number, digits = 5): string {
  return formatNumber(v, digits);
}

function pad(s: string, n: number): string {
  return s.length >= n ? s : s + ' '.repeat(n - s.length);
}

/**
 * "value ± total unit (statistical ± s, window ± w)" in the display unit, the window-choice part
 * shown when it is not zero.
 */
function withParts(p: { value: number; stdErr: number; unit: string; statStdErr?: number; windowStdErr?: number }, quantity: string): string {
  const text = formatParameterText(p, quantity);
  if (p.statStdErr === undefined || !p.windowStdErr) return text;
  const scale = displayUnit(p.unit, quantity).scale;
  return `${text} (statistical ± ${num(p.statStdErr * scale, 2)}, window ± ${num(p.windowStdErr * scale, 2)})`;
}

/** "1/V", "V/m" (the inverse of m/V), "1/(A/m^2)": one over an SI unit, printed. */
function inverse(u: string): string {
  if (u === '' || u === '1') return '';
  const m = /^([^/()*^]+)\/([^/()*^]+)$/.exec(u);
  return prettyUnit(m ? `${m[2]}/${m[1]}` : /^[A-Za-z]+(\^\d+)?$/.test(u) ? `1/${u}` : `1/(${u})`);
}

/** SI units of the fitted line's slope, intercept and y (each with a leading space, or empty). */
function lineUnits(x: string, y: string, logY: boolean): { slope: string; intercept: string; y: string } {
  const sp = (t: string) => (t ? ` ${t}` : '');
  const xi = inverse(x);
  const yu = y === '1' ? '' : prettyUnit(y);
  if (logY) return { slope: sp(xi), intercept: yu ? ` (ln of ${yu})` : '', y: '' };
  const xs = x === '1' ? '' : x;
  const simple = (u: string) => /^[A-Za-z]+(\^\d+)?$/.test(u);
  const per = !xs ? yu : prettyUnit(`${y === '1' ? '1' : simple(y) ? y : `(${y})`}/${simple(xs) ? xs : `(${xs})`}`);
  return { slope: sp(per), intercept: sp(yu), y: sp(yu) };
}

/**
 * The last line under an implausible fit, wherever fits are printed (fit, refit): a wrong answer is
 * never silent. `which` names the sweeps it concerns when there are several.
 */
export function notPlausibleLine(which?: string): string {
  return `NOT PLAUSIBLE${which ? ` (${which})` : ''}: the parameters above do not describe this device as fitted (see the warnings)`;
}

/**
 * One sweep's fit on one line, as `run` and `refit` print it: the model, the points fitted, the
 * first three parameters (a missing uncertainty named) and " — NOT PLAUSIBLE" when the analysis
 * marks the fit so; the warnings that say why follow it, as each command lays them out.
 */
export function formatSweepFit(label: string, fit: Pick<FitSummary, 'model' | 'line' | 'parameters' | 'plausible'>): string {
  const p = Object.entries(fit.parameters)
    .slice(0, 3)
    .map(([k, v]) => `${k} = ${formatParameterText(v, k)}${v.stdErr === null || !Number.isFinite(v.stdErr) ? ' (uncertainty not determined)' : ''}`);
  return `${label}: ${fit.model} fit on ${fit.line.n} points${p.length ? `, ${p.join(', ')}` : ''}${fit.plausible ? '' : ' — NOT PLAUSIBLE'}`;
}

export function formatFit(r: FitReport): string {
  const out: string[] = [];
  out.push(`${r.title}  [model ${r.model}]`);
  out.push(
    `axes:       x = ${axisLabel(r.axes.x)} ${r.axes.x.kind}, y = ${axisLabel(r.axes.y)} ${r.axes.y.kind}${r.axes.y.kind === 'log' ? ', fitted as ln' : ''} (the line's slope and intercept are in SI, as in --json)`,
  );
  out.push(`points:     ${r.points.used} used, ${r.points.excluded} excluded (${describeReasons(r.points.reasons)})`);
  if (r.branch) out.push(`branch:     ${r.branch} bias${r.branches.length > 1 ? ` (${r.branches.length} branches analysed; see below)` : ''}`);
  const nz = r.noise;
  out.push(
    `noise:      floor ${nz.floorSource === 'not reached' ? 'not reached' : `${num(nz.floor, 3)} A (${nz.floorSource}; readings below ${num(nz.floorLevel, 3)} A left out of log plots)`}, relative ${num(100 * nz.relative, 3)} % (${nz.relativeSource})`,
  );
  // The x column's unit: volts, kelvin for an Arrhenius plot, the column's own for a custom model.
  const xu = r.model === 'arrhenius' ? ' K' : r.model === 'custom' ? '' : ' V';
  out.push(`window:     ${num(r.window.from)} to ${num(r.window.to)}${xu} in the x column (${r.window.mode})`);
  const L = r.line;
  const u = lineUnits(r.axes.x.unit, r.axes.y.unit, r.axes.y.kind === 'log');
  out.push(
    `line:       slope ${num(L.slope, 7)} ± ${num(L.slopeStdErr, 3)}${u.slope}, intercept ${num(L.intercept, 7)} ± ${num(L.interceptStdErr, 3)}${u.intercept}`,
  );
  // Weighted residuals are in units of each reading's own σ; unweighted ones in y's unit.
  const sd = L.chi2Reduced !== null ? ' σ (weighted residuals)' : u.y;
  out.push(
    `            R² ${L.r2.toFixed(6)}, residual SD ${num(L.residualStdDev, 4)}${sd}${L.chi2Reduced !== null ? `, χ²/dof ${num(L.chi2Reduced, 4)}` : ''}`,
  );
  const params = Object.entries(r.parameters);
  if (params.length) {
    out.push('parameters:');
    const w = Math.max(...params.map(([k]) => k.length));
    for (const [k, p] of params) out.push(`  ${pad(k, w)}  ${withParts(p, k)}`);
  }
  for (const b of r.branches.slice(1)) {
    const ps = Object.entries(b.parameters)
      .map(([k, p]) => `${k} ${withParts(p, k)}`)
      .join('; ');
    out.push(
      `${b.polarity} branch: ${b.points} points, ${num(b.window.from)} to ${num(b.window.to)}: ${ps}${b.plausible ? '' : ` (implausible: ${b.warnings.join('; ')})`}`,
    );
  }
  if (Object.keys(r.inputs).length) out.push(`inputs:     ${formatInputs(r.inputs)}`);
  if (r.regimes.length > 1) {
    out.push('regimes:');
    for (const g of r.regimes) out.push(`  ${num(g.from)} to ${num(g.to)}${xu}: slope ${num(g.slope)} on the plot's axes (${g.n} points)`);
  }
  for (const n of r.notes) out.push(`note:       ${n}`);
  for (const w of r.warnings) out.push(`warning:    ${w}`);
  // A wrong answer is never silent: the last line says so when the analysis marks the fit implausible.
  if (!r.plausible) out.push(notPlausibleLine());
  return out.join('\n');
}

export function formatRanking(r: Ranking): string {
  const out: string[] = [];
  out.push(`points: ${r.points.used} common points of the ${r.branch} branch, ${r.points.excluded} excluded (${describeReasons(r.points.reasons)})`);
  // ΔAICc of a hopeless model runs to 10⁹ and more: three figures are enough there, and the
  // column is as wide as its longest entry, so the columns after it stay aligned.
  const aicc = r.ranking.map((e) => (Math.abs(e.deltaAicc) < 1e5 ? e.deltaAicc.toFixed(1) : e.deltaAicc.toExponential(2)));
  const wa = Math.max(7, ...aicc.map((a) => a.length + 2));
  const wm = Math.max(26, ...r.ranking.map((e) => e.model.length + 2));
  out.push(`${pad('#', 3)}${pad('model', wm)}${pad('weight', 8)}${pad('ΔAICc', wa)}${pad('plausible', 10)}parameters`);
  r.ranking.forEach((e, k) => {
    const params =
      e.noParameters ??
      Object.entries(e.parameters)
        .map(([n, p]) => `${n} ${formatParameterText(p, n)}`)
        .join('; ');
    out.push(`${pad(String(k + 1), 3)}${pad(e.model, wm)}${pad(e.score.toFixed(3), 8)}${pad(aicc[k], wa)}${pad(e.plausible ? 'yes' : 'no', 10)}${params}`);
    for (const why of e.reasons) out.push(`     - ${why}`);
  });
  for (const s of r.skipped) out.push(`skipped ${s.model}: ${s.reason}`);
  for (const n of r.notes) out.push(`note: ${n}`);
  for (const w of r.warnings) out.push(`warning: ${w}`);
  return out.join('\n');
}

export function formatDiode(r: DiodeReport): string {
  const out: string[] = [];
  out.push(`${r.title}  [model ${r.model}]`);
  out.push(
    `points:     ${r.points.used} used, ${r.points.excluded} excluded (${describeReasons(r.points.reasons)}); current read as ${r.convention} convention${r.illuminated ? ', illuminated' : ''}`,
  );
  out.push(`temperature ${num(r.temperature.value)} K${r.temperature.assumed ? ' (assumed)' : ''}`);
  const params = Object.entries(r.parameters);
  out.push('parameters:');
  const w = Math.max(...params.map(([k]) => k.length));
  for (const [k, p] of params) out.push(`  ${pad(k, w)}  ${formatParameterText(p, k)}`);
  if (r.rmse !== null)
    out.push(
      `rmse:       ${num(r.rmse, 5)} A (true current)${r.rmseImplicit !== undefined ? `; implicit-residual RMSE ${num(r.rmseImplicit, 5)} A` : ''}${r.objective === 'implicit' ? ' — fitted on the implicit residual' : ''}`,
    );
  for (const n of r.notes) out.push(`note:       ${n}`);
  for (const x of r.warnings) out.push(`warning:    ${x}`);
  if (!r.plausible) out.push(notPlausibleLine());
  return out.join('\n');
}

export function formatSolar(r: SolarReport & { readonly jsc?: { value: number; stdErr: number; unit: string } | null }): string {
  const f = r.figures;
  const out: string[] = [];
  const line = (key: string, p: { value: number; stdErr: number; unit: string } | null | undefined, missing: string) =>
    out.push(`  ${pad(key, 11)} ${p ? formatParameterText(p, key) : missing}`);
  out.push(
    `solar figures of merit (${r.points.used} points, current read as ${r.convention} convention; G = ${num(r.irradiance)} W/m²${r.area !== null ? `, area ${formatParameterText({ value: r.area, unit: 'm^2' })}` : ''}); ± one standard uncertainty from local fits of the curve`,
  );
  line('isc', f.isc, '');
  line('jsc', r.jsc, 'needs --area');
  line('voc', f.voc, '');
  line('pmax', f.pmax, '');
  line('vmp', f.vmp, '');
  line('imp', f.imp, '');
  line('fillFactor', f.fillFactor, '');
  line('efficiency', f.efficiency, 'needs --area');
  for (const x of r.warnings) out.push(`warning:    ${x}`);
  out.push('note:       STC is 1000 W/m², 25 °C cell, AM1.5G spectrum (IEC 60904-3; measurement per IEC 60904-1): state yours if they differ.');
  return out.join('\n');
}
