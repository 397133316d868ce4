/**
 * The daemon's log lines: an ISO 8601 time, a level, the text; --quiet keeps notices, cautions and
 * errors; --verbose adds a line per journal event worth reading.
 */
import { join } from 'node:path';
import { afterEach, describe, expect, it } from 'vitest';
import { api, startDaemon, tempDir, type DaemonProcess } from '../helpers/daemon.js';

const LINE = /^\d{4}-\d\d-\d\dT\d\d:\d\d:\d\d\.\d{3}Z (DEBUG|INFO|NOTICE|WARN|ERROR) +\S/;
let d: DaemonProcess | undefined;
afterEach(async () => {
  await d?.stop();
  d = undefined;
});

async function runOnce(args: string[]): Promise<string[]> {
  d = await startDaemon(['--scenario', 'oxide-fn', '--fast', '--no-autostart', '--data', join(tempDir(), 'data'), ...args]);
  expect((await api(d.url, 'POST', '/api/run', { plan: { start: 0, stop: 9, points: 10, compliance: 1e-3, repeat: 2 } })).status).toBe(201);
  for (let k = 0; k < 500 && !/run ended/.test(d.output()); k++) await new Promise((r) => setTimeout(r, 20));
  // The run's end is printed as the run ends; lines of its last events reach the log through the
  // event stream and may follow a moment later: let the output settle.
  let before = '';
  for (let k = 0; k < 50 && d.output() !== before; k++) {
    before = d.output();
    await new Promise((r) => setTimeout(r, 100));
  }
  return d.output().split('\n').filter(Boolean);
}

describe('daemon log lines', () => {
  it('every line has its time and level; --verbose shows the fits', async () => {
    const lines = await runOnce(['--verbose']);
    for (const l of lines) expect(l).toMatch(LINE);
    expect(lines.some((l) => / DEBUG +sweep 1: fowler-nordheim fit/.test(l))).toBe(true);
    expect(lines.some((l) => / NOTICE +run ended: completed/.test(l))).toBe(true);
  });

  it('--quiet leaves out the debug and info lines, not the notices and cautions', async () => {
    const lines = await runOnce(['--quiet']);
    expect(lines.filter((l) => / (DEBUG|INFO) /.test(l))).toEqual([]);
    expect(lines.some((l) => / NOTICE +page +http/.test(l))).toBe(true);
    expect(lines.some((l) => / WARN +CAUTION \[output-on\]/.test(l))).toBe(true);
    // Whether the output went off, and whether the instrument said so, at every log level.
    expect(lines.some((l) => / NOTICE +output ON, confirmed by the instrument/.test(l))).toBe(true);
    expect(lines.some((l) => / NOTICE +output off, confirmed by the instrument/.test(l))).toBe(true);
    // The normal sequence (command sent, then confirmed) raises no warning about the output.
    expect(lines.filter((l) => / WARN +output/.test(l))).toEqual([]);
  });
});

describe('the message when the daemon is stopped by a signal', () => {
  const stopped = async (): Promise<{ code: number | null; out: string }> => {
    const p = d as DaemonProcess;
    const exit = new Promise<number | null>((r) => p.proc.once('exit', (c) => r(c)));
    p.proc.kill('SIGTERM');
    const code = await exit;
    d = undefined;
    return { code, out: p.output() };
  };

  it('idle: says nothing is sent to the instrument (no run, no output to turn off); exit 143', async () => {
    d = await startDaemon(['--scenario', 'oxide-fn', '--fast', '--no-autostart', '--data', join(tempDir(), 'data')]);
    const { code, out } = await stopped();
    expect(code).toBe(143);
    expect(out).toMatch(/terminated \(SIGTERM\); no run in progress \(the station sends nothing to the instrument\)/);
    expect(out).not.toMatch(/turning the output off/);
  });

  it('during a run: says the output is being turned off, and the run ends interrupted', async () => {
    d = await startDaemon(['--scenario', 'oxide-fn', '--no-autostart', '--data', join(tempDir(), 'data')]);
    expect((await api(d.url, 'POST', '/api/run', { plan: { start: 0, stop: 9, points: 91, compliance: 1e-3, repeat: 50 } })).status).toBe(201);
    for (let k = 0; k < 200 && !/CAUTION \[output-on\]/.test(d.output()); k++) await new Promise((r) => setTimeout(r, 20));
    const { code, out } = await stopped();
    expect(code).toBe(143);
    expect(out).toMatch(/terminated \(SIGTERM\); turning the output off/);
    expect(out).toMatch(/NOTICE +output off, confirmed by the instrument/);
    expect(out).toMatch(/run ended: interrupted/);
  });
});
