/**
 * A fit the analysis marked not plausible is marked so in the report, as on the page: in the
 * Results table (with the deciding check's warning), in the sweep's notes, and as an open ring
 * without a ± 2σ band on the parameters plot. Sessions made by the real CLI on the simulator: a
 * silicon-nitride film that conducts by Poole–Frenkel emission (config/scenarios/nitride-pf.json),
 * fitted live as Poole–Frenkel (plausible) and as Schottky emission, whose slope then gives a
 * dynamic permittivity of about n²/4 = 1 for n = 2 — below the plausible range (the Poole–Frenkel and
 * Schottky barrier lowerings differ by a factor 2, β_PF = 2β_S: Sze & Ng 2007, Physics of
 * Semiconductor Devices, on conduction in insulators, from memory).
 */
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { renderReport } from '../../daemon/journal/report.js';
import { loadSession } from '../../daemon/journal/sessions.js';
import { runCli } from '../helpers/cli.js';
import { tempDir } from '../helpers/daemon.js';
import { charts, readChart } from '../helpers/svg-read.js';

function session(model: string): string {
  const data = join(tempDir(), 'data');
  const r = runCli(['run', '--scenario', 'nitride-pf', '--sweeps', '3', '--fast', '--model', model, '--data', data, '--json']);
  expect(r.code, r.stderr).toBe(0);
  return JSON.parse(r.stdout).dir as string;
}

const esc = (t: string) => t.replace(/&/g, '&amp;').replace(/</g, '&lt;').replace(/>/g, '&gt;').replace(/"/g, '&quot;');

function resultsRows(html: string): string[] {
  const table = html.slice(html.indexOf('<h2>Results</h2>'), html.indexOf('</table>', html.indexOf('<h2>Results</h2>')));
  return table.split('<tr').slice(2);
}

describe('report: fits marked not plausible', () => {
  it('a not-plausible fit is marked in the Results table and the sweep notes with its deciding warning, and drawn as a ring without a band', () => {
    const s = loadSession(session('schottky'));
    const fits = s.sweeps.map((sw) => sw.fit);
    expect(fits.every((f) => f !== null && !f.plausible)).toBe(true);
    const html = renderReport(s);
    const rows = resultsRows(html);
    expect(rows).toHaveLength(3);
    for (const [k, row] of rows.entries()) {
      const reason = fits[k]?.failed?.[0] as string;
      expect(reason).toMatch(/permittivity/);
      expect(row).toContain(`not plausible: ${esc(reason)}`);
      expect(row).toMatch(/^ class="implausible"/);
    }
    const sweep1 = html.slice(html.indexOf('<h3>Sweep 1'), html.indexOf('<h3>Sweep 2'));
    expect(sweep1).toContain('Not plausible for this mechanism:');
    // The parameters plot: every sweep's value as an open ring at the journal's value, no line, no band.
    const trend = charts(html.slice(html.indexOf('<h2>Parameters across sweeps</h2>')))[0];
    const c = readChart(trend, { x: false, y: false });
    expect(c.title).toMatch(/not plausible \(3 sweeps\), no band/);
    expect(c.markers.filter((m) => m.shape === 'dot')).toHaveLength(0);
    const rings = c.markers.filter((m) => m.shape === 'ring');
    expect(rings.map((m) => Math.round(m.x))).toEqual([1, 2, 3]);
    for (const [k, m] of rings.entries())
      expect(Math.abs(m.py - c.y.pixel(fits[k]?.parameters[Object.keys(fits[k]?.parameters ?? {})[0]].value as number))).toBeLessThanOrEqual(0.15);
    expect(c.lines.filter((l) => /σ/.test(l.label) && l.points.length > 0)).toHaveLength(0);
  });

  it('plausible fits carry no mark and keep their dots and band', () => {
    const s = loadSession(session('poole-frenkel'));
    expect(s.sweeps.every((sw) => sw.fit?.plausible)).toBe(true);
    const html = renderReport(s);
    expect(html).not.toContain('not plausible');
    expect(html).not.toContain('Not plausible');
    for (const row of resultsRows(html)) expect(row).not.toMatch(/^ class="implausible"/);
    const c = readChart(charts(html.slice(html.indexOf('<h2>Parameters across sweeps</h2>')))[0], { x: false, y: false });
    expect(c.markers.filter((m) => m.shape === 'dot').length).toBe(3);
    expect(c.markers.filter((m) => m.shape === 'ring')).toHaveLength(0);
  });
});
