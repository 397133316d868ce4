/**
 * Whole runs of the real daemon (built CLI, child process) against the simulated instrument on a
 * real pseudo-terminal pair made by socat, opened by the daemon with serialport as it would open a
 * USB-serial adapter. The simulator runs in this test process so the test can read every command
 * that reached the instrument.
 *
 * Drift check: the EWMA chart of NIST/SEMATECH e-Handbook §6.3.2.4 (z_t = λx_t + (1−λ)z_{t−1},
 * limits μ0 ± Lσ√(λ/(2−λ)(1−(1−λ)^{2t}) + 1/n0), the last term for the centre estimated from n0
 * baseline values) recomputed here from the journaled per-sweep barrier heights, with σ from the
 * baseline's moving range / 1.128 (common practice) floored as the station config states.
 */
import { spawn } from 'node:child_process';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { scanJournal } from '../../daemon/journal/reader.js';
import { SimulatedSmu } from '../../daemon/simulator/instrument.js';
import { findScenario } from '../../daemon/simulator/scenarios.js';
import { servePty, type PtyPair } from '../../daemon/simulator/serve.js';
import type { WireEvent } from '../../protocols/wire.js';
import { CLI } from '../helpers/cli.js';
import { api, startDaemon, tempDir, Viewer, writeConfig, type DaemonProcess } from '../helpers/daemon.js';

// socat comes from Debian's packages; the test command's setup step installs it when missing.

function ptyConfig(dir: string, path: string, extra: Record<string, unknown> = {}) {
  return writeConfig(dir, { instrument: { kind: 'serial', path, baudRate: 115200 }, ...extra });
}

function journal(dir: string): WireEvent[] {
  const out: WireEvent[] = [];
  scanJournal(dir, (e) => out.push(e));
  return out;
}

/** Runs `plumbline run` to the end, asynchronously (the simulator in this process must keep answering). */
function runCli(args: string[]): Promise<{ code: number; stdout: string; stderr: string }> {
  return new Promise((resolve) => {
    const p = spawn(process.execPath, [CLI, ...args]);
    let stdout = '';
    let stderr = '';
    p.stdout.on('data', (d) => (stdout += String(d)));
    p.stderr.on('data', (d) => (stderr += String(d)));
    p.on('exit', (code) => resolve({ code: code ?? -1, stdout, stderr }));
  });
}

describe('daemon over a real pty', () => {
  let pty: PtyPair;
  let smu: SimulatedSmu;
  let daemon: DaemonProcess;
  let dir: string;

  beforeAll(async () => {
    dir = tempDir();
    smu = new SimulatedSmu({ device: findScenario('oxide-fn').device, seed: 11, realTime: false });
    pty = await servePty(smu);
    daemon = await startDaemon([
      '--config',
      ptyConfig(dir, pty.clientPath, {
        plan: { start: 0, stop: 9, points: 46, compliance: 1e-3, repeat: 3 },
        analysis: { model: 'fowler-nordheim', window: { from: 5, to: 9 }, inputs: { thickness: 7e-9, area: 1e-8, massRatio: 0.42 } },
      }),
      '--data',
      join(dir, 'data'),
    ]);
  });
  afterAll(async () => {
    await daemon?.stop();
    await pty?.close();
  });

  it('the journal holds exactly the points streamed to a viewer; fits and run end arrive', async () => {
    const viewer = new Viewer(daemon.url);
    await viewer.open();
    const start = await api(daemon.url, 'POST', '/api/run', {});
    expect(start.status).toBe(201);
    const end = await viewer.waitFor((e) => e.type === 'run-end');
    expect(end.type === 'run-end' && end.outcome).toBe('completed');
    viewer.close();
    const streamed = viewer.events.filter((e) => e.type === 'reading');
    const recorded = journal(join(dir, 'data', start.json.session)).filter((e) => e.type === 'reading');
    expect(streamed.length).toBe(3 * 46);
    expect(recorded).toEqual(streamed);
    // Every reading the simulator served is in the journal (the pty lost nothing).
    expect(smu.log.filter((l) => l === ':READ?').length).toBe(3 * 46);
    const fits = viewer.events.filter((e) => e.type === 'fit' && e.final);
    expect(fits).toHaveLength(3);
    for (const f of fits) {
      const b = f.type === 'fit' ? f.fit?.parameters.barrierHeight : undefined;
      expect(b?.value).toBeGreaterThan(3.0);
      expect(b?.value).toBeLessThan(3.2);
    }
    // Output went on after the compliance was set, and off at the end (the simulator reads the
    // pty asynchronously: give it the time to execute what the daemon already sent).
    for (let k = 0; k < 500 && smu.log.at(-1) !== ':OUTP?'; k++) await new Promise((r) => setTimeout(r, 10));
    const on = smu.log.indexOf(':OUTP ON');
    expect(smu.log.slice(0, on).some((l) => l.startsWith(':SENS:CURR:PROT '))).toBe(true);
    // Output off last, then the output query whose answer the journal records as the confirmation.
    expect(smu.log.slice(-2)).toEqual([':OUTP OFF', ':OUTP?']);
    expect(smu.output).toBe(false);
    const offs = journal(join(dir, 'data', start.json.session)).filter((e) => e.type === 'output' && !e.on);
    expect(offs.at(-1)).toMatchObject({ queried: true, confirmed: true });
  });
});

describe('run aborts over a real pty', () => {
  it('drift: the trapping device ends the run at the sweep where the EWMA leaves its limits, with the reason', async () => {
    const dir = tempDir();
    const sc = findScenario('oxide-fn-trapping');
    const smu = new SimulatedSmu({ device: sc.device, seed: 5, realTime: false });
    const pty = await servePty(smu);
    try {
      const drift = { method: 'ewma', baseline: 3, lambda: 0.2, L: 3, warnL: 2, action: 'abort' };
      const cfg = ptyConfig(dir, pty.clientPath, {
        plan: { start: 0, stop: 9, points: 91, compliance: 1e-3, repeat: 12 },
        analysis: { model: 'fowler-nordheim', window: { from: 5, to: 9 }, inputs: sc.device.inputs },
        drift,
      });
      const r = await runCli(['run', '--config', cfg, '--data', join(dir, 'data'), '--json']);
      const res = JSON.parse(r.stdout);
      expect(res.outcome).toBe('aborted-drift');
      expect(r.code).toBe(4);
      const ev = journal(res.dir);
      const values = ev.filter((e) => e.type === 'fit' && e.final).map((e) => (e.type === 'fit' ? e.fit?.parameters.barrierHeight : undefined));
      // --json carries every sweep's final fit, as journaled (a script sees what the text mode prints).
      expect(res.fits.map((f: { parameters: { barrierHeight: unknown } }) => f.parameters.barrierHeight)).toEqual(values);
      expect(res.fits.map((f: { sweep: number }) => f.sweep)).toEqual(values.map((_, k) => k + 1));
      // Independent EWMA over the journaled values.
      const x = values.map((p) => p?.value as number);
      const se = values.map((p) => p?.stdErr as number);
      const mu = (x[0] + x[1] + x[2]) / 3;
      const sigma = Math.max((Math.abs(x[1] - x[0]) + Math.abs(x[2] - x[1])) / 2 / 1.128, (se[0] + se[1] + se[2]) / 3, 1e-3 * mu);
      let z = mu;
      let expected = -1;
      for (let t = 1; 3 + t <= x.length; t++) {
        z = 0.2 * x[2 + t] + 0.8 * z;
        // The centre is the mean of 3 baseline values: its variance σ²/3 widens the limits.
        const sz = sigma * Math.sqrt((0.2 / 1.8) * (1 - 0.8 ** (2 * t)) + 1 / 3);
        if (Math.abs(z - mu) > 3 * sz) {
          expected = 3 + t;
          break;
        }
      }
      expect(expected).toBeGreaterThan(3);
      const decision = ev.find((e) => e.type === 'decision');
      expect(decision?.type === 'decision' && decision.sweep).toBe(expected);
      expect(decision?.type === 'decision' && decision.reason).toMatch(/barrierHeight drifted/);
      const end = ev.at(-1);
      expect(end?.type === 'run-end' && end.sweeps).toBe(expected);
      for (let k = 0; k < 500 && smu.output; k++) await new Promise((r) => setTimeout(r, 10));
      expect(smu.output).toBe(false);
    } finally {
      await pty.close();
    }
  });

  it('breakdown: the output goes off before another point is sourced', async () => {
    const dir = tempDir();
    const sc = findScenario('oxide-breakdown');
    const smu = new SimulatedSmu({ device: sc.device, seed: 5, realTime: false });
    const pty = await servePty(smu);
    try {
      const cfg = ptyConfig(dir, pty.clientPath, {
        plan: { start: 0, stop: 10, points: 101, compliance: 1e-3, repeat: 3 },
        analysis: { model: 'fowler-nordheim', window: { from: 5, to: 8.5 }, inputs: sc.device.inputs },
      });
      const r = await runCli(['run', '--config', cfg, '--data', join(dir, 'data'), '--json']);
      const res = JSON.parse(r.stdout);
      expect(res.outcome).toBe('aborted-breakdown');
      expect(r.code).toBe(5);
      // The reading that showed breakdown is the last READ? before OUTP OFF; no voltage command between.
      for (let k = 0; k < 500 && smu.output; k++) await new Promise((r) => setTimeout(r, 10));
      const off = smu.log.indexOf(':OUTP OFF', smu.log.indexOf(':OUTP ON'));
      const lastRead = smu.log.lastIndexOf(':READ?', off);
      const between = smu.log.slice(lastRead + 1, off);
      expect(between.filter((l) => l.startsWith(':SOUR:VOLT'))).toEqual([]);
      expect(smu.log.slice(off + 1).filter((l) => l.startsWith(':SOUR:VOLT') || l === ':OUTP ON')).toEqual([]);
      // The device broke near 8.75 V (12.5 MV/cm × 7 nm); the run did not go on to 10 V.
      const ev = journal(res.dir);
      const readings = ev.filter((e) => e.type === 'reading');
      expect(readings.length).toBeLessThan(101);
      const caution = ev.find((e) => e.type === 'caution' && e.kind === 'breakdown-confirmed');
      expect(caution).toBeDefined();
      const output = ev.filter((e) => e.type === 'output' && !e.on);
      expect(output.at(-1)?.type === 'output' && output.at(-1)).toMatchObject({ confirmed: true });
    } finally {
      await pty.close();
    }
  });
});
