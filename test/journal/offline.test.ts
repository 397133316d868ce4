/**
 * After the run: refit, temperature series and the HTML report, on sessions made by the real CLI
 * on the simulator (and, for the temperature series, a session written through the journal API
 * from the Poole–Frenkel forward model: J = C·E·exp(−q(φ_t − β_PF√E)/kT), Frenkel 1938; Chiu 2014
 * review — the model plumbline fits).
 */
import { readFileSync } from 'node:fs';
import { join } from 'node:path';
import { chromium } from 'playwright-core';
import { describe, expect, it } from 'vitest';
import { pooleFrenkel } from '../../daemon/analysis/mechanisms/poole-frenkel.js';
import { seededNormal } from '../../daemon/analysis/random.js';
import { JournalWriter } from '../../daemon/journal/journal.js';
import { loadSession } from '../../daemon/journal/sessions.js';
import { EventEmitter } from 'node:events';
import type { LineSource } from '../../protocols/line-source.js';
import { LiveChain } from '../../daemon/pipeline/chain.js';
import { feedPassive } from '../../daemon/pipeline/passive.js';
import { analysisSchema, breakdownSchema, driftSchema } from '../../daemon/pipeline/settings.js';
import { temperatureSeries } from '../../daemon/journal/tseries.js';
import { runCli } from '../helpers/cli.js';
import { tempDir } from '../helpers/daemon.js';

function simulatedSession(scenario: string, sweeps: number): string {
  const data = join(tempDir(), 'data');
  const r = runCli(['run', '--scenario', scenario, '--sweeps', String(sweeps), '--fast', '--data', data, '--json']);
  return JSON.parse(r.stdout).dir as string;
}

describe('refit', () => {
  it("with the session's own settings, refit results equal the live results", () => {
    const dir = simulatedSession('nitride-pf', 3);
    const r = runCli(['refit', dir, '--json']);
    expect(r.code, r.stderr).toBe(0);
    const refit = JSON.parse(r.stdout);
    const live = loadSession(dir);
    expect(refit.sweeps).toHaveLength(3);
    for (const sw of live.sweeps) {
      const mine = refit.sweeps.find((x: { sweep: number }) => x.sweep === sw.sweep).fit;
      expect(mine.line).toEqual(sw.fit?.line);
      expect(mine.parameters).toEqual(sw.fit?.parameters);
    }
    // The journal is untouched; the results went to their own file.
    expect(JSON.parse(readFileSync(refit.file, 'utf8')).sweeps).toHaveLength(3);
  });

  it('with another model, each sweep is fitted again (and a bad model is refused)', () => {
    const dir = simulatedSession('nitride-pf', 2);
    const r = runCli(['refit', dir, '--model', 'schottky', '--auto', '--json']);
    expect(r.code, r.stderr).toBe(0);
    expect(JSON.parse(r.stdout).sweeps[0].fit.model).toBe('schottky');
    const bad = runCli(['refit', dir, '--model', 'no-such']);
    expect(bad.code).toBe(2);
  });
});

describe('temperature series', () => {
  it('recovers the Poole–Frenkel trap depth from sweeps at 300–400 K within its stated uncertainty', () => {
    const data = join(tempDir(), 'data');
    const { writer, id } = JournalWriter.create(data, 'pf-temperatures');
    const inputs = { thickness: 2e-8, area: 1e-8, refractiveIndex: 2 };
    writer.event({
      type: 'session',
      id,
      startedAt: new Date().toISOString(),
      source: { kind: 'test', detail: 'forward model', control: false },
      instrument: '-',
      plan: null,
      analysis: { model: 'poole-frenkel', window: { from: 4, to: 12 }, inputs },
      drift: {},
      limits: {},
    });
    const normal = seededNormal(9);
    const temps = [300, 325, 350, 375, 400];
    temps.forEach((T, s) => {
      writer.event({ type: 'sweep-start', sweep: s + 1, planned: 41, label: '' });
      for (let k = 0; k <= 40; k++) {
        const v = 0.3 * k;
        const e = v / 2e-8;
        const j = k === 0 ? 0 : pooleFrenkel(e, 1e-2, 1.0, 4.0, T);
        writer.reading(s + 1, k, v, j * 1e-8 * (1 + 0.005 * normal()), 0);
      }
      writer.event({ type: 'sweep-end', sweep: s + 1, points: 41, complete: true });
      writer.event({ type: 'annotation', text: `chuck at T = ${T} K`, tags: [], sweep: s + 1, source: 'test' });
    });
    writer.event({ type: 'run-end', outcome: 'completed', reason: 'test', sweeps: 5 });
    writer.close();
    const r = runCli(['tseries', join(data, id), '--json']);
    expect(r.code, r.stderr).toBe(0);
    const j = JSON.parse(r.stdout);
    expect(j.points.map((p: { temperature: number }) => p.temperature)).toEqual(temps);
    const ea = j.result.activationEnergy;
    expect(ea.stdErr).toBeGreaterThan(0);
    expect(ea.stdErr).toBeLessThan(0.02);
    expect(Math.abs(ea.value - 1.0)).toBeLessThan(2 * ea.stdErr + 1e-6);
    expect(j.meaning).toMatch(/trap depth/);
    // Without temperatures the command says how to give them.
    const none = runCli(['tseries', simulatedSession('nitride-pf', 1)]);
    expect(none.code).toBe(1);
    expect(none.stderr).toMatch(/Arrhenius fit needs sweeps at 3 or more temperatures/);
  });
});

describe('temperature from a column (watch mode)', () => {
  it('a watched file with a temperature column tags each sweep, and the series gives the trap depth', async () => {
    const data = join(tempDir(), 'data');
    const { writer, id } = JournalWriter.create(data, 'watch-temperatures');
    const inputs = { thickness: 2e-8, area: 1e-8 };
    const chain = new LiveChain({
      journal: writer,
      analysis: analysisSchema.parse({ model: 'poole-frenkel', window: { from: 4, to: 12 }, inputs }),
      drift: driftSchema.parse({ enabled: false }),
      breakdown: breakdownSchema.parse({}),
      hazardVoltage: 30,
      control: false,
    });
    chain.emit({
      type: 'session',
      id,
      startedAt: new Date().toISOString(),
      source: { kind: 'passive', detail: 'test', control: false },
      instrument: '-',
      plan: null,
      analysis: { model: 'poole-frenkel', window: { from: 4, to: 12 }, inputs },
      drift: {},
      limits: {},
    });
    const source = new EventEmitter() as LineSource;
    source.stop = async () => undefined;
    const feed = feedPassive(source, chain, { voltage: 'V', current: 'I', temperature: 'T_chuck' }, 'test.csv');
    const normal = seededNormal(3);
    let line = 0;
    source.emit('line', 'V,I,T_chuck', ++line);
    for (const T of [300, 330, 360, 390]) {
      for (let k = 0; k <= 40; k++) {
        const v = 0.3 * k;
        const j = k === 0 ? 0 : pooleFrenkel(v / 2e-8, 1e-2, 0.9, 4.0, T);
        // The chuck wanders ±0.2 K around its set point.
        source.emit('line', `${v},${j * 1e-8 * (1 + 0.005 * normal())},${T + 0.2 * normal()}`, ++line);
      }
    }
    source.emit('end');
    await feed.done;
    chain.end('completed', 'test');
    const r = temperatureSeries(join(data, id), {});
    expect(r.points.map((p) => Math.round(p.temperature))).toEqual([300, 330, 360, 390]);
    const ea = r.result.activationEnergy;
    expect(Math.abs(ea.value - 0.9)).toBeLessThan(2 * ea.stdErr + 1e-6);
    expect(ea.stdErr).toBeLessThan(0.02);
  });
});

describe('report', () => {
  it('one self-contained HTML file that opens offline in Chromium and shows every sweep', async () => {
    const dir = simulatedSession('oxide-fn-trapping', 8); // the drift watch stops it at sweep 5
    const a = runCli(['annotate', dir, '--sweep', '2', '--text', 'probe re-landed', '--tag', 'setup']);
    expect(a.code, a.stderr).toBe(0);
    // A sweep the session does not hold is refused, naming the sweeps it has; nothing is written.
    const before = readFileSync(join(dir, 'journal.jsonl'), 'utf8');
    const bad = runCli(['annotate', dir, '--sweep', '9', '--text', 'x']);
    expect(bad.code).toBe(2);
    expect(bad.stderr).toMatch(/--sweep: sweep 9: the session in .* has sweeps 1–\d+; nothing was added/);
    expect(readFileSync(join(dir, 'journal.jsonl'), 'utf8')).toBe(before);
    const out = join(tempDir(), 'report.html');
    const r = runCli(['report', dir, '--out', out]);
    expect(r.code, r.stderr).toBe(0);
    const html = readFileSync(out, 'utf8');
    expect(html).not.toMatch(/<script|<link|src="http|href="http/);
    const sweeps = loadSession(dir).sweeps.length;
    const browser = await chromium.launch({
      executablePath: '/usr/bin/chromium',
      args: ['--disable-gpu', '--disable-background-networking', '--no-first-run'],
    });
    try {
      const page = await browser.newPage();
      const requests: string[] = [];
      await page.route('**/*', (route) => {
        requests.push(route.request().url());
        return route.request().url().startsWith('file:') ? route.continue() : route.abort();
      });
      await page.goto(`file://${out}`);
      const facts = await page.evaluate(() => {
        const charts = [...document.querySelectorAll('svg.chart')];
        return {
          charts: charts.length,
          overviewLines: charts[0].querySelectorAll('polyline.series').length,
          tableRows: [...document.querySelectorAll('h2')].find((h) => h.textContent === 'Results')?.nextElementSibling?.querySelectorAll('tr').length,
          text: document.body.textContent ?? '',
        };
      });
      expect(requests.filter((u) => !u.startsWith('file:'))).toEqual([]);
      expect(facts.overviewLines).toBeGreaterThanOrEqual(sweeps);
      expect(facts.tableRows).toBe(sweeps + 1);
      // Overview + one trend chart + three plots per sweep (measured, linearized, residuals).
      expect(facts.charts).toBe(1 + 1 + 3 * sweeps);
      expect(facts.text).toMatch(/probe re-landed/);
      expect(facts.text).toMatch(/aborted-drift/);
      expect(facts.text).toMatch(/caution: drift-limit/);
      await page.pdf?.({ path: join(tempDir(), 'report.pdf') }).catch(() => undefined);
    } finally {
      await browser.close();
    }
  });
});

describe('annotate while a run writes the session', () => {
  it('is refused (exit 2) with advice that fits the process writing it, and nothing is written', async () => {
    const { spawn } = await import('node:child_process');
    const { readdirSync } = await import('node:fs');
    const { CLI } = await import('../helpers/cli.js');
    const data = tempDir();
    const p = spawn(process.execPath, [CLI, 'run', '--scenario', 'oxide-fn', '--sweeps', '100000', '--data', data], { stdio: ['ignore', 'pipe', 'pipe'] });
    try {
      await new Promise<void>((resolve, reject) => {
        let out = '';
        p.stdout.on('data', (d) => {
          out += String(d);
          if (out.includes('session ')) setTimeout(resolve, 500);
        });
        setTimeout(() => reject(new Error(`run did not start: ${out}`)), 20_000);
      });
      const dir = join(data, readdirSync(data)[0]);
      const before = readFileSync(join(dir, 'journal.jsonl'), 'utf8').length;
      const a = runCli(['annotate', dir, '--text', 'probe re-landed']);
      expect(a.code).toBe(2);
      expect(a.stderr).toMatch(
        /being written by a running plumbline process \(pid \d+\); if it is `plumbline serve`, add the note through its page .* if it is `plumbline run` or `watch` without a page, annotate once it has ended/,
      );
      expect(readFileSync(join(dir, 'journal.jsonl'), 'utf8').slice(0, before)).not.toMatch(/probe re-landed/);
    } finally {
      p.kill('SIGINT');
      await new Promise((r) => p.once('exit', r));
    }
  }, 40_000);
});
