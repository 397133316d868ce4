/**
 * What the report plots and tabulates is what the journal holds, in the trade's units: parameters
 * in the results table as the shared formatter prints them, negative currents and compliance marked
 * as on the page, residuals under each linearized plot, a new drift baseline drawn as a break,
 * distinct tick labels on narrow ranges, settings as tables. Plotted values are read back off the
 * charts' own tick labels (test/helpers/svg-read.ts) and tabulated ones parsed from their text, then
 * compared with the journal's SI numbers converted by the units' definitions (1 MV/cm = 1e8 V/m,
 * 1 A/cm² = 1e4 A/m², 1 cm² = 1e-4 m², 1 nm = 1e-9 m), not through our display-unit table.
 * Readings come from the Fowler–Nordheim forward model (Lenzlinger & Snow 1969; constants from
 * Forbes 2006), the Mott–Gurney square law with an ohmic term (Mott & Gurney 1940; Lampert & Mark
 * 1970), and a voltage ramp on the simulated wearing-out oxide (JEDEC JESD35-A procedure).
 */
import { readdirSync } from 'node:fs';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { fowlerNordheim } from '../../daemon/analysis/mechanisms/fowler-nordheim.js';
import { mottGurney } from '../../daemon/analysis/mechanisms/sclc.js';
import { analyze } from '../../daemon/analysis/analyze.js';
import { JournalWriter } from '../../daemon/journal/journal.js';
import { renderReport } from '../../daemon/journal/report.js';
import { loadSession } from '../../daemon/journal/sessions.js';
import { summarizeFit } from '../../daemon/pipeline/chain.js';
import { formatParameter, RESULT_FIGURES } from '../../protocols/display-units.js';
import { AT_FLOOR } from '../../protocols/breakdown-display.js';
import { runCli, tempFile } from '../helpers/cli.js';
import { tempDir } from '../helpers/daemon.js';
import { charts, readChart } from '../helpers/svg-read.js';

const d = 7e-9;
const fn = { model: 'fowler-nordheim', window: { from: 5, to: 9 }, inputs: { thickness: d, area: 1e-8, massRatio: 0.42 } };
const limits = { maxVoltage: 20, maxCompliance: 0.01, maxPower: 0.1, hazardVoltage: 30, rampStep: 1, rampDelay: 0.01 };
const drift = { enabled: true, method: 'ewma', baseline: 2, lambda: 0.2, L: 3, warnL: 2, k: 0.5, h: 4, minRelativeSigma: 0, action: 'warn' };

/** A session: noise-floor readings of both signs, the FN regime, a compliance reading at the top. */
function session(sweeps: number, modelChangeAt?: number): string {
  const data = join(tempDir(), 'data');
  const { writer, id } = JournalWriter.create(data, 'report');
  writer.event({
    type: 'session',
    id,
    startedAt: new Date().toISOString(),
    source: { kind: 'simulator', detail: 'test', control: true },
    instrument: 'test',
    plan: { kind: 'linear', start: 0, stop: 9.5, points: 40, repeat: sweeps, compliance: 1e-3, description: 'linear 0 → 9.5 V' },
    analysis: fn,
    drift,
    limits,
  });
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
    writer.event({
      type: 'drift',
      sweep: s,
      parameter: name,
      value: p.value,
      method: 'ewma',
      phase: base ? 'baseline' : 'monitor',
      statistic: p.value,
      center: p.value,
      lower: base ? null : p.value - 0.05,
      upper: base ? null : p.value + 0.05,
      sigma: 0.01,
      state: base ? 'baseline' : 'in-control',
    });
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
  it("tabulates each sweep's parameters as the journal holds them, in the trade's units", () => {
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

/**
 * A number as the report prints it — "9.1", "3.839e-14", "1.40 ± 0.08", "(1.01 ± 0.03)e-4" — with
 * half a unit of its last printed digit (how far the printed value may lie from the truth).
 */
function printed(text: string): { value: number; u?: number; half: number } {
  const t = text.replace(/−/g, '-');
  const m = /^\(?(-?[\d.]+(?:e-?\d+)?)(?: ± ([\d.]+))?\)?(?:e(-?\d+))?$/.exec(t);
  if (!m) throw new Error(`'${text}' is not a printed number`);
  const [mant, exp] = m[1].split('e');
  const scale = 10 ** Number(m[3] ?? 0) * 10 ** Number(exp ?? 0);
  const decimals = mant.includes('.') ? mant.split('.')[1].length : 0;
  return { value: Number(mant) * scale, u: m[2] === undefined ? undefined : Number(m[2]) * scale, half: 0.5 * 10 ** -decimals * scale * (1 + 1e-9) };
}

/** The rows of the report's figure table of class `cls`: key → number text and unit. */
function figures(html: string, cls: string): Map<string, { label: string; text: string; unit: string }> {
  const t = new RegExp(`<table class="kv ${cls}">([\\s\\S]*?)</table>`).exec(html);
  if (!t) throw new Error(`no table '${cls}' in the report`);
  const out = new Map<string, { label: string; text: string; unit: string }>();
  for (const m of t[1].matchAll(
    /<tr data-figure="([^"]+)"><th>([^<]*)<\/th><td><span class="num">([^<]*)<\/span>(?: <span class="unit">([^<]*)<\/span>)?<\/td><\/tr>/g,
  ))
    out.set(m[1], { label: m[2], text: m[3], unit: m[4] ?? '' });
  return out;
}

describe('what the report plots, read back off its axes', () => {
  it("the linearized plot holds the journal's readings in cm/MV and (A/cm²)/(MV/cm)², and the fit line is the journal's", () => {
    const s = loadSession(session(1));
    const html = renderReport(s);
    const sw = s.sweeps[0];
    const [, lin] = charts(html.slice(html.indexOf('<h3>Sweep 1')));
    const c = readChart(lin, { x: false, y: true });
    expect(c.xLabel).toBe('1/E (cm/MV)');
    expect(c.yLabel).toBe('J/E² ((A/cm²)/(MV/cm)²)');
    // By the units' definitions (1 MV/cm = 1e8 V/m, 1 A/cm² = 1e4 A/m²): 1/E in cm/MV is
    // (d/V)·1e8, and J/E² in (A/cm²)/(MV/cm)² is (I/A)/(V/d)² · 1e-4 · 1e16 (Lenzlinger & Snow 1969 axes).
    const area = fn.inputs.area;
    const expected = (k: number) => ({ x: (d / sw.v[k]) * 1e8, y: (Math.abs(sw.i[k]) / area / (sw.v[k] / d) ** 2) * 1e12 });
    const near = (k: number) => {
      const e = expected(k);
      return c.markers.filter((m) => Math.abs(m.px - c.x.pixel(e.x)) <= 0.15 && Math.abs(m.py - c.y.pixel(e.y)) <= 0.15);
    };
    // Each reading in the fit window is a filled dot exactly where its SI values put it; the fit used as many.
    const inWindow = sw.v.map((_v, k) => k).filter((k) => sw.v[k] >= 5 && sw.v[k] <= 9 && !sw.c[k] && sw.i[k] > 0);
    const dots = c.markers.filter((m) => m.shape === 'dot');
    expect(dots).toHaveLength(sw.fit?.line.n as number);
    expect(inWindow).toHaveLength(dots.length);
    for (const k of inWindow)
      expect(
        near(k).map((m) => m.shape),
        `reading ${k} at ${sw.v[k]} V`,
      ).toEqual(['dot']);
    // The compliance reading (the top one) is on no plot of the mechanism: the bias was not held.
    const top = sw.c.indexOf(1);
    expect(near(top)).toEqual([]);
    // The fit line: ln(J/E²) = intercept + slope·(1/E) in SI, from the journal, at both ends.
    const line = c.lines.find((l) => l.label === 'fit');
    expect(line?.points).toHaveLength(2);
    const f = sw.fit?.line as { slope: number; intercept: number };
    for (const p of line?.points ?? []) {
      const yDisplay = Math.exp(f.intercept + f.slope * (p.x / 1e8)) * 1e12;
      expect(Math.abs(c.y.pixel(yDisplay) - p.py), `fit line at 1/E = ${p.x} cm/MV`).toBeLessThanOrEqual(0.15);
    }
  });

  it("each sweep's barrier height across sweeps sits at the journal's value in eV", () => {
    const s = loadSession(session(4));
    const html = renderReport(s);
    const trend = charts(html.slice(html.indexOf('<h2>Parameters across sweeps</h2>')))[0];
    const c = readChart(trend, { x: false, y: false });
    expect(c.yLabel).toBe('barrier height φ_B (eV)');
    const values = c.lines.find((l) => l.label === 'barrierHeight')?.points ?? [];
    expect(values.map((p) => Math.round(p.x))).toEqual(s.sweeps.map((sw) => sw.sweep));
    for (const [k, p] of values.entries())
      expect(Math.abs(p.py - c.y.pixel(s.sweeps[k].fit?.parameters.barrierHeight.value as number))).toBeLessThanOrEqual(0.15);
  });

  it('a space-charge-limited film: J/V in (A/cm²)/V on the plot, mobility in cm²/(V·s) on its trend and in the table', () => {
    // Mott–Gurney square law plus an ohmic term (Mott & Gurney 1940; Lampert & Mark 1970), forward model from the analysis.
    const th = 100e-9;
    const ar = 1e-6;
    const sclcSettings = { model: 'sclc', window: 'all', inputs: { thickness: th, area: ar, permittivity: 3 } };
    const data = join(tempDir(), 'data');
    const { writer, id } = JournalWriter.create(data, 'sclc');
    writer.event({
      type: 'session',
      id,
      startedAt: new Date().toISOString(),
      source: { kind: 'simulator', detail: 'test', control: true },
      instrument: 'test',
      plan: { kind: 'linear', start: 0.2, stop: 5, points: 25, repeat: 2, compliance: 1e-2 },
      analysis: sclcSettings,
      drift,
      limits,
    });
    for (let sweep = 1; sweep <= 2; sweep++) {
      writer.event({ type: 'sweep-start', sweep, planned: 25, label: '' });
      const v: number[] = [];
      const i: number[] = [];
      for (let k = 0; k < 25; k++) {
        const bias = 0.2 * (k + 1);
        const mu = 1e-8 * (1 + 0.01 * sweep);
        const current = ((1e-6 * bias) / th + mottGurney(bias, mu, 3, th)) * ar * (k % 2 ? 1.001 : 0.999);
        writer.reading(sweep, k, bias, current, 0);
        v.push(bias);
        i.push(current);
      }
      writer.event({ type: 'sweep-end', sweep, points: 25, complete: true });
      const fit = summarizeFit(analyze({ x: v, y: i }, { ...(sclcSettings as never), regimes: false }));
      writer.event({ type: 'fit', sweep, final: true, fit });
    }
    writer.event({ type: 'run-end', outcome: 'completed', reason: 'test', sweeps: 2 });
    writer.close();
    const s = loadSession(join(data, id));
    const html = renderReport(s);
    const [, lin] = charts(html.slice(html.indexOf('<h3>Sweep 2')));
    const c = readChart(lin, { x: false, y: false });
    expect(c.yLabel).toBe('J/V ((A/cm²)/V)');
    const sw = s.sweeps[1];
    // J/V in (A/cm²)/V = (I/area)/V · 1e-4: every reading, where its SI values put it.
    for (let k = 0; k < sw.v.length; k++) {
      const y = (sw.i[k] / ar / sw.v[k]) * 1e-4;
      expect(
        c.markers.some((m) => Math.abs(m.px - c.x.pixel(sw.v[k])) <= 0.15 && Math.abs(m.py - c.y.pixel(y)) <= 0.15),
        `reading at ${sw.v[k]} V`,
      ).toBe(true);
    }
    // Mobility: 1 m²/(V·s) = 1e4 cm²/(V·s).
    const trend = charts(html.slice(html.indexOf('<h2>Parameters across sweeps</h2>')))[0];
    const t = readChart(trend, { x: false, y: false });
    expect(t.yLabel).toBe('mobility μ (cm²/(V·s))');
    const mu = t.lines.find((l) => l.label === 'mobility')?.points ?? [];
    expect(mu).toHaveLength(2);
    for (const [k, p] of mu.entries())
      expect(Math.abs(p.py - t.y.pixel((s.sweeps[k].fit?.parameters.mobility.value as number) * 1e4))).toBeLessThanOrEqual(0.15);
    const results = html.slice(html.indexOf('<h2>Results</h2>'), html.indexOf('<h2>Each sweep</h2>'));
    expect(results).toContain('mobility μ (cm²/(V·s))');
    const head = [...results.matchAll(/<th>([^<]*)<\/th>/g)].map((m) => m[1]);
    const row2 = [...(/<tr><td>2<\/td>[\s\S]*?<\/tr>/.exec(results)?.[0] ?? '').matchAll(/<td>([^<]*)<\/td>/g)].map((m) => m[1]);
    const cell = row2[head.indexOf('mobility μ (cm²/(V·s))')];
    const shown = printed(cell);
    const truth = sw.fit?.parameters.mobility as { value: number; stdErr: number };
    expect(Math.abs(shown.value - truth.value * 1e4), `${cell} against ${truth.value} m²/(V·s)`).toBeLessThanOrEqual(shown.half);
    expect(Math.abs((shown.u as number) - truth.stdErr * 1e4), `${cell} against ± ${truth.stdErr} m²/(V·s)`).toBeLessThanOrEqual(shown.half);
  });

  it('a reading at compliance is a square where the journal has it, joined to no line; the curve breaks around it', () => {
    // A dual sweep 0 → 8 → 0 V whose two top readings are at compliance, the bias collapsed.
    const data = join(tempDir(), 'data');
    const { writer, id } = JournalWriter.create(data, 'comp');
    writer.event({
      type: 'session',
      id,
      startedAt: new Date().toISOString(),
      source: { kind: 'simulator', detail: 'test', control: true },
      instrument: 'test',
      plan: { kind: 'linear', start: 0, stop: 8, points: 17, dual: true, repeat: 1, compliance: 1e-3 },
      analysis: fn,
      drift,
      limits,
    });
    writer.event({ type: 'sweep-start', sweep: 1, planned: 33, label: '' });
    const levels = [...Array.from({ length: 17 }, (_x, k) => 0.5 * k), ...Array.from({ length: 16 }, (_x, k) => 7.5 - 0.5 * k)];
    const top = new Set([15, 16, 17]);
    levels.forEach((bias, k) => {
      const atLimit = top.has(k);
      writer.reading(
        1,
        k,
        atLimit ? 2.1 + 0.1 * k - 1.5 : bias,
        atLimit ? 1e-3 : 1e-12 + fowlerNordheim(Math.max(bias, 0.1) / d, 3.1, 0.42) * 1e-8,
        atLimit ? 1 : 0,
      );
    });
    writer.event({ type: 'sweep-end', sweep: 1, points: 33, complete: true });
    writer.event({ type: 'run-end', outcome: 'completed', reason: 'test', sweeps: 1 });
    writer.close();
    const s = loadSession(join(data, id));
    const sw = s.sweeps[0];
    const html = renderReport(s);
    for (const svg of [charts(html.slice(html.indexOf('<h2>All sweeps</h2>')))[0], charts(html.slice(html.indexOf('<h3>Sweep 1')))[0]]) {
      const c = readChart(svg, { x: false, y: true });
      const at = (k: number) => ({ px: c.x.pixel(sw.v[k]), py: c.y.pixel(Math.abs(sw.i[k])) });
      const squares = c.markers.filter((m) => m.shape === 'square');
      expect(squares).toHaveLength(top.size);
      for (const k of top) {
        const p = at(k);
        expect(
          squares.some((m) => Math.abs(m.px - p.px) <= 0.15 && Math.abs(m.py - p.py) <= 0.15),
          `compliance reading ${k}`,
        ).toBe(true);
        for (const l of c.lines)
          for (const q of l.points) expect(Math.hypot(q.px - p.px, q.py - p.py), `a line vertex on compliance reading ${k}`).toBeGreaterThan(0.5);
      }
      // The curve: two runs, the readings before and after the compliance block, each in journal order.
      const runs = c.lines.filter((l) => l.label === 'sweep 1' || l.label === '');
      expect(runs).toHaveLength(2);
      const expectRun = (ks: number[], pts: { px: number; py: number }[]) => {
        expect(pts).toHaveLength(ks.length);
        ks.forEach((k, j) => expect(Math.hypot(pts[j].px - at(k).px, pts[j].py - at(k).py)).toBeLessThanOrEqual(0.2));
      };
      expectRun([...Array(15).keys()], runs[0].points);
      expectRun(
        Array.from({ length: 15 }, (_x, j) => 18 + j),
        runs[1].points,
      );
    }
  });
});

describe('the report of a breakdown test', () => {
  it('a voltage ramp on the simulated wearing-out oxide: the device, and the result in V, MV/cm, C/cm² and A as the journal holds it in SI', {
    timeout: 60_000,
  }, () => {
    const data = join(tempDir(), 'data');
    const plan = tempFile(
      'ramp.json',
      JSON.stringify({ kind: 'voltage-ramp', start: 0, stop: 15, step: 0.1, stepTime: 0.02, compliance: 1e-2, useVoltage: 1, useCurrentLimit: 1e-6 }),
    );
    const run = runCli([
      'run',
      '--scenario',
      'oxide-wearout',
      '--fast',
      '--plan',
      plan,
      '--data',
      data,
      '--device',
      'R7-C4',
      '--wafer',
      'W07',
      '--site',
      'C4',
      '--x',
      '3',
      '--y',
      '-2',
      '--area',
      '1e-4 cm^2',
      '--thickness',
      '7 nm',
      '--temperature',
      '300 K',
      '--device-tag',
      'ramp',
      '--device-tag',
      'lot 7',
    ]);
    expect(run.code, run.stderr).toBe(0);
    const dir = join(data, readdirSync(data)[0]);
    const s = loadSession(dir);
    const tr = s.testResult;
    expect(tr?.outcome).toBe('breakdown');
    const r = tr?.result as Record<string, number | string>;
    const html = renderReport(s);
    expect(html).toContain('<h2>Breakdown test: voltage ramp to breakdown</h2>');
    // The device, from the session event's metadata, in cm², nm and K (1 cm² = 1e-4 m², 1 nm = 1e-9 m).
    const dev = figures(html, 'device');
    const identity = s.session?.device as Record<string, unknown>;
    expect([...dev.keys()]).toEqual(['device', 'wafer', 'site', 'position', 'area', 'thickness', 'temperature', 'tags']);
    expect(dev.get('wafer')?.text).toBe(identity.wafer);
    expect(dev.get('position')?.text).toBe(`x ${identity.x}, y ${identity.y}`);
    expect(dev.get('area')?.unit).toBe('cm²');
    expect(printed(dev.get('area')?.text as string).value * 1e-4).toBeCloseTo(identity.area as number, 20);
    expect(dev.get('thickness')?.unit).toBe('nm');
    expect(printed(dev.get('thickness')?.text as string).value * 1e-9).toBeCloseTo(identity.thickness as number, 20);
    expect(dev.get('temperature')).toMatchObject({ text: String(identity.temperature), unit: 'K' });
    expect(dev.get('tags')?.text).toBe('ramp, lot 7');
    // The result: outcome, criterion, then each figure in the page's names and the trade's units.
    const res = figures(html, 'test-result');
    expect(res.get('outcome')?.text).toBe('breakdown');
    expect(res.get('criterion')?.text).toBe(r.criterion);
    const si: Record<string, [string, number]> = {
      breakdownVoltage: ['V', 1],
      breakdownField: ['MV/cm', 1e8],
      chargeToBreakdown: ['C/cm²', 1e4],
      timeToBreakdown: ['s', 1],
      leakageBefore: ['A', 1],
      leakageAfter: ['A', 1],
    };
    for (const [key, [unit, toSI]] of Object.entries(si)) {
      const row = res.get(key);
      expect(row, key).toBeDefined();
      // A leakage reading under three times the run's noise floor says so beside its name.
      const floor = r.leakageFloor as number | undefined;
      const atFloor = key.startsWith('leakage') && floor !== undefined && Math.abs(r[key] as number) < 3 * floor;
      expect(row?.label).toBe(atFloor ? `${RESULT_FIGURES[key].label} ${AT_FLOOR}` : RESULT_FIGURES[key].label);
      expect(row?.unit).toBe(unit);
      const shown = printed(row?.text as string);
      expect(Math.abs(shown.value * toSI - (r[key] as number)), `${key}: ${row?.text} ${unit} against ${r[key]} SI`).toBeLessThanOrEqual(shown.half * toSI);
    }
    // Q_bd with its own uncertainty (the breakdown moment lies within the last step).
    const q = printed(res.get('chargeToBreakdown')?.text as string);
    expect(Math.abs((q.u as number) * 1e4 - (tr?.numbers?.chargeUncertainty as number))).toBeLessThanOrEqual(q.half * 1e4);
    // The criterion's numbers: the bias and current at which it fired.
    const crit = figures(html, 'criterion');
    for (const [key, unit] of [
      ['voltage', 'V'],
      ['current', 'A'],
    ]) {
      const row = crit.get(key);
      expect(row?.unit).toBe(unit);
      const shown = printed(row?.text as string);
      expect(Math.abs(shown.value - (tr?.numbers?.[key] as number))).toBeLessThanOrEqual(shown.half);
    }
    // Each phase of the test is named at its sweep.
    expect(html).toMatch(/<h3>Sweep 1: use-condition check before the test<\/h3>/);
    // The command line prints the same figures under the same names.
    for (const [key, row] of res) if (key in RESULT_FIGURES) expect(run.stdout).toContain(`${row.label} ${row.text} ${row.unit}`);
  });
});

describe('the report of a breakdown test without a result', () => {
  it('a current ramp that gave no result: its range in amperes, no figures, and the device as corrected by a later note', () => {
    const data = join(tempDir(), 'data');
    const { writer, id } = JournalWriter.create(data, 'cramp');
    const plan = {
      kind: 'current-ramp',
      start: 1e-9,
      stop: 1e-2,
      stepsPerDecade: 10,
      stepTime: 0.1,
      voltageLimit: 14,
      description: 'current ramp 1 nA → 10 mA',
    };
    writer.event({
      type: 'session',
      id,
      startedAt: new Date().toISOString(),
      source: { kind: 'simulator', detail: 'test', control: true },
      instrument: 'test',
      plan,
      analysis: fn,
      drift,
      limits,
      device: { device: 'K1', wafer: 'W07', site: 'C4', x: 3, y: -2, thickness: 7e-9 },
    });
    writer.event({ type: 'annotation', text: 'wrong site on the prober', tags: [], source: 'cli', device: { site: 'D5', x: 4, y: 1, tags: ['reprobed'] } });
    writer.event({ type: 'run-end', outcome: 'aborted', reason: 'stopped by the operator', sweeps: 0 });
    writer.close();
    const html = renderReport(loadSession(join(data, id)));
    expect(html).toContain('<h2>Breakdown test: current ramp to breakdown</h2>');
    expect(html).toContain('No result recorded');
    expect(html).not.toContain('class="kv test-result"');
    expect(html).toMatch(/<th>from … to<\/th><td>1e-9 … 0\.01 A<\/td>/);
    expect(html).toMatch(/<th>time per step<\/th><td>0\.1 s<\/td>/);
    const dev = figures(html, 'device');
    expect(dev.get('site')?.text).toBe('D5');
    expect(dev.get('position')?.text).toBe('x 4, y 1');
    expect(dev.get('tags')?.text).toBe('reprobed');
    expect(dev.get('thickness')).toMatchObject({ text: '7', unit: 'nm' });
    expect(html).toContain('corrections made in notes');
  });
});
