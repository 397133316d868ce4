/**
 * What the report plots and tabulates is what the journal holds, in the trade's units: parameters
 * in the results table as the shared formatter prints them, negative currents and compliance marked
 * as on the page, residuals under each linearized plot, a new drift baseline drawn as a break,
 * distinct tick labels on narrow ranges, settings as tables. Readings come from the
 * Fowler–Nordheim forward model (Lenzlinger & Snow 1969; constants from Forbes 2006).
 */
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { fowlerNordheim } from '../../daemon/analysis/mechanisms/fowler-nordheim.js';
import { analyze } from '../../daemon/analysis/analyze.js';
import { JournalWriter } from '../../daemon/journal/journal.js';
import { renderReport } from '../../daemon/journal/report.js';
import { loadSession } from '../../daemon/journal/sessions.js';
import { summarizeFit } from '../../daemon/pipeline/chain.js';
import { formatParameter } from '../../protocols/display-units.js';
import { tempDir } from '../helpers/daemon.js';

const d = 7e-9;
const fn = { model: 'fowler-nordheim', window: { from: 5, to: 9 }, inputs: { thickness: d, area: 1e-8, massRatio: 0.42 } };
const limits = { maxVoltage: 20, maxCompliance: 0.01, maxPower: 0.1, hazardVoltage: 30, rampStep: 1, rampDelay: 0.01 };
const drift = { enabled: true, method: 'ewma', baseline: 2, lambda: 0.2, L: 3, warnL: 2, k: 0.5, h: 4, minRelativeSigma: 0, action: 'warn' };

/** A session: noise-floor readings of both signs, the FN regime, a compliance reading at the top. */
function session(sweeps: number, modelChangeAt?: number): string {
  const data = join(tempDir(), 'data');
  const { writer, id } = JournalWriter.create(data, 'report');
  writer.event({ type: 'session', id, startedAt: new Date().toISOString(), source: { kind: 'simulator', detail: 'test', control: true }, instrument: 'test', plan: { kind: 'linear', start: 0, stop: 9.5, points: 40, repeat: sweeps, compliance: 1e-3, description: 'linear 0 → 9.5 V' }, analysis: fn, drift, limits });
  let analysis: { model: string; window: unknown; inputs: Record<string, number> } = fn;
  let monitor = 0;
  for (let s = 1; s <= sweeps; s++) {
    if (s === modelChangeAt) {
      analysis = { ...fn, model: 'trap-assisted-tunneling' };
      writer.event({ type: 'settings', analysis, source: 'api' });
      monitor = 0;
    }
    writer.event({ type: 'sweep-start', sweep: s, planned: 40, label: '' });
    const v: number[] = [];
    const i: number[] = [];
    const c: number[] = [];
    for (let k = 0; k < 40; k++) {
      const bias = (9.5 * (k + 1)) / 40;
      const floor = (k % 3 === 0 ? -1 : 1) * 2e-14;
      const top = k === 39;
      const current = top ? 1e-3 : fowlerNordheim(bias / d, 3.1 + 0.002 * s, 0.42) * 1e-8 * (k % 2 ? 1.002 : 0.998) + floor;
      writer.reading(s, k, bias, current, top ? 1 : 0);
      v.push(bias);
      i.push(current);
      c.push(top ? 1 : 0);
    }
    writer.event({ type: 'sweep-end', sweep: s, points: 40, complete: true });
    const fit = summarizeFit(analyze({ x: v, y: i, compliance: c }, { ...(analysis as typeof fn), complianceLimit: 1e-3, regimes: false }));
    writer.event({ type: 'fit', sweep: s, final: true, fit });
    const name = Object.keys(fit.parameters)[0];
    const p = fit.parameters[name];
    monitor++;
    const base = monitor <= 2;
    writer.event({ type: 'drift', sweep: s, parameter: name, value: p.value, method: 'ewma', phase: base ? 'baseline' : 'monitor', statistic: p.value, center: p.value, lower: base ? null : p.value - 0.05, upper: base ? null : p.value + 0.05, sigma: 0.01, state: base ? 'baseline' : 'in-control' });
  }
  writer.event({ type: 'run-end', outcome: 'completed', reason: 'test', sweeps });
  writer.close();
  return join(data, id);
}

/** Text labels of the n-th chart's y axis (right-aligned labels left of the plot). */
function yLabels(svg: string): string[] {
  return [...svg.matchAll(/<text x="[\d.]+" y="[\d.]+" text-anchor="end" dominant-baseline="middle">([^<]*)<\/text>/g)].map((m) => m[1]);
}

describe('the session report', () => {
  it('tabulates each sweep\'s parameters as the journal holds them, in the trade\'s units', () => {
    const dir = session(4);
    const html = renderReport(loadSession(dir));
    const s = loadSession(dir);
    const results = html.slice(html.indexOf('<h2>Results</h2>'), html.indexOf('<h2>Each sweep</h2>'));
    expect(results).toContain('barrier height φ_B (eV)');
    for (const sw of s.sweeps) expect(results).toContain(`<td>${formatParameter(sw.fit?.parameters.barrierHeight as never, 'barrierHeight').text}</td>`);
    // Settings as tables, in units: the plan's compliance, the limits, the analysis inputs.
    expect(html).toMatch(/<th>compliance<\/th><td>0\.001 A<\/td>/);
    expect(html).toMatch(/<th>largest \|V\|<\/th><td>20 V<\/td>/);
    expect(html).toMatch(/<th>inputs<\/th><td>thickness 7 nm, area 1e-4 cm², mass ratio m\*\/m₀ 0\.42<\/td>/);
    expect(html).not.toMatch(/\{"|\(SI\)/);
  });

  it('marks negative currents and compliance as the page does, and draws the residuals', () => {
    const s = loadSession(session(1));
    const html = renderReport(s);
    const sweep = html.slice(html.indexOf('<h3>Sweep 1'));
    const measured = sweep.slice(0, sweep.indexOf('</svg>'));
    // Every negative reading not at compliance: one cross; the compliance reading: one square.
    const sw = s.sweeps[0];
    const negatives = sw.i.filter((i, k) => i < 0 && !sw.c[k]).length;
    expect(negatives).toBeGreaterThan(3);
    expect((measured.match(/<path d="M[^"]*l6,6m0,-6l-6,6"/g) ?? []).length).toBe(negatives);
    expect((measured.match(/<rect x="[\d.]+" y="[\d.]+" width="6" height="6"/g) ?? []).length).toBe(1);
    expect(sweep).toContain('residuals of the fit');
    expect(sweep).toContain('ln residual');
    // The linearized plot in cm/MV and (A/cm²)/(MV/cm)².
    expect(sweep).toContain('1/E (cm/MV)');
    expect(sweep).toContain('J/E² ((A/cm²)/(MV/cm)²)');
  });

  it('a one-sweep session still gets distinct tick labels on its trend chart', () => {
    const html = renderReport(loadSession(session(1)));
    const trend = html.slice(html.indexOf('<h2>Parameters across sweeps</h2>'));
    const labels = yLabels(trend.slice(0, trend.indexOf('</svg>')));
    expect(labels.length).toBeGreaterThanOrEqual(3);
    expect(new Set(labels).size).toBe(labels.length);
  });

  it('a model change starts a new drift baseline, drawn as a break on the trend', () => {
    const html = renderReport(loadSession(session(6, 4)));
    expect(html).toContain('new baseline (now trapEnergy)');
    expect(html).toContain('Analysis changes during the session');
    expect(html).toMatch(/trap-assisted-tunneling; window 5 … 9 V/);
  });

  it('re-analyses kept beside the journal are listed with their settings', async () => {
    const { reanalyze } = await import('../../daemon/journal/reanalysis.js');
    const { writeReport } = await import('../../daemon/journal/report.js');
    const { readFileSync } = await import('node:fs');
    const dir = session(2);
    const r = reanalyze(dir, { ...fn, model: 'trap-assisted-tunneling', window: 'auto' } as never, [2], []);
    const out = join(tempDir(), 'r.html');
    writeReport(dir, out);
    const html = readFileSync(out, 'utf8');
    const kept = html.slice(html.indexOf('<h2>Re-analyses</h2>'), html.indexOf('<h2>Each sweep</h2>'));
    expect(kept).toContain('trap-assisted-tunneling; window automatic');
    expect(kept).toContain(formatParameter(r.fits[0].fit?.parameters.trapEnergy as never, 'trapEnergy').text);
  });
});
