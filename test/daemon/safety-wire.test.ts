/**
 * The station's safety, checked at the instrument's end of the wire. The real daemon (the built
 * CLI, a child process) drives the simulated instrument served from this test process over
 * loopback TCP or a socat pseudo-terminal pair; the simulator logs every line as it arrives (and
 * how many replies it had sent by then) and keeps its output state, so each test asserts what the
 * instrument received and whether its output was left on — not what the daemon believes it sent.
 *
 * Faults: two run requests at once, a disk that fills up mid-run (a small tmpfs), an instrument
 * whose readings take 1.5 s, an abort during a slow ramp, an instrument that stops answering, an
 * extra reply line nobody asked for, replies that are all over range, and an operator's terminal
 * that goes away (a reader that closes the pipe, a hang-up).
 *
 * The safe-state rules asserted (common practice for source-measure units): output off on every
 * exit path, no source level after output off, output off not held back by a pending reading, and
 * "confirmed" only when the instrument's own output query says off.
 */
import { spawn } from 'node:child_process';
import { statSync } from 'node:fs';
import type { Server } from 'node:net';
import { join } from 'node:path';
import { afterEach, describe, expect, it } from 'vitest';
import { scanJournal } from '../../daemon/journal/reader.js';
import { SimulatedSmu, type Faults } from '../../daemon/simulator/instrument.js';
import { findScenario } from '../../daemon/simulator/scenarios.js';
import { servePty, serveTcp, type PtyPair } from '../../daemon/simulator/serve.js';
import { FLAG, type WireEvent } from '../../protocols/wire.js';
import { CLI } from '../helpers/cli.js';
import { api, runCliAsync, smallDisk, startDaemon, tempDir, waitUntil, writeConfig, type DaemonProcess } from '../helpers/daemon.js';

const cleanups: (() => Promise<void> | void)[] = [];
afterEach(async () => {
  while (cleanups.length) await cleanups.pop()?.();
});

function simulator(faults: Faults = {}, scenario = 'oxide-fn'): SimulatedSmu {
  return new SimulatedSmu({ device: findScenario(scenario).device, seed: 21, realTime: false, faults });
}

async function tcpInstrument(smu: SimulatedSmu): Promise<Record<string, unknown>> {
  const server: Server = await serveTcp(smu, 0);
  cleanups.push(() => new Promise<void>((r) => server.close(() => r())));
  return { kind: 'tcp', host: '127.0.0.1', port: (server.address() as { port: number }).port };
}

async function ptyInstrument(smu: SimulatedSmu): Promise<Record<string, unknown>> {
  const pty: PtyPair = await servePty(smu);
  cleanups.push(() => pty.close());
  return { kind: 'serial', path: pty.clientPath, baudRate: 115200 };
}

async function daemon(cfg: string, dataDir: string): Promise<DaemonProcess> {
  const d = await startDaemon(['--config', cfg, '--data', dataDir]);
  cleanups.push(() => d.stop());
  return d;
}

function journal(dir: string): WireEvent[] {
  const out: WireEvent[] = [];
  scanJournal(dir, (e) => out.push(e));
  return out;
}

/** Index (in arrival order) of the first output off after the first output on: the one that ends the run. */
function offIndex(smu: SimulatedSmu): number {
  const on = smu.received.findIndex((r) => r.line === ':OUTP ON');
  return on < 0 ? -1 : smu.received.findIndex((r, k) => k > on && r.line === ':OUTP OFF');
}

/** Lines the instrument received after `from`: ':OUTP ON', or ':OUTP OFF' meaning the one that ends the run. */
function receivedAfter(smu: SimulatedSmu, from: ':OUTP ON' | ':OUTP OFF'): string[] {
  const k = from === ':OUTP OFF' ? offIndex(smu) : smu.received.findIndex((r) => r.line === from);
  return k < 0 ? [] : smu.received.slice(k + 1).map((r) => r.line);
}

const offArrived = (smu: SimulatedSmu) => offIndex(smu) >= 0;

/** Waits until the daemon reports no run. */
async function waitIdle(url: string): Promise<void> {
  for (let k = 0; k < 400; k++) {
    if (!(await api(url, 'GET', '/api/status')).json.running) return;
    await new Promise((r) => setTimeout(r, 25));
  }
  throw new Error('the run did not end');
}

const PLAN = { start: 0, stop: 9, points: 46, compliance: 1e-3 };
const FN = { model: 'fowler-nordheim', window: { from: 5, to: 9 }, inputs: { thickness: 7e-9, area: 1e-8, massRatio: 0.42 } };

describe('one run per instrument', () => {
  it('of ten run requests sent together exactly one starts a run, the others get 409; abort leaves the output off', async () => {
    const smu = simulator({ slowReplyMs: 20 });
    const dir = tempDir();
    const cfg = writeConfig(dir, { instrument: await tcpInstrument(smu), plan: { ...PLAN, repeat: 1000 }, analysis: FN });
    const d = await daemon(cfg, join(dir, 'data'));
    const replies = await Promise.all(Array.from({ length: 10 }, () => api(d.url, 'POST', '/api/run', {})));
    const statuses = replies.map((r) => r.status).sort();
    expect(statuses).toEqual([201, 409, 409, 409, 409, 409, 409, 409, 409, 409]);
    await waitUntil(() => smu.output, 'the output to go on');
    expect((await api(d.url, 'GET', '/api/status')).json.running).toBe(true);
    expect((await api(d.url, 'POST', '/api/run/abort', {})).status).toBe(200);
    await waitUntil(() => !smu.output && smu.log.at(-1) === ':OUTP?', 'output off and its confirmation query');
    await waitIdle(d.url);
    // One run reached the instrument: one output on, one identification.
    expect(smu.log.filter((l) => l === ':OUTP ON')).toHaveLength(1);
    expect(smu.log.filter((l) => l === '*IDN?')).toHaveLength(1);
    const st = (await api(d.url, 'GET', '/api/status')).json;
    expect(st.running).toBe(false);
    expect(st.lastRun, JSON.stringify(st.lastRun)).toMatchObject({ outcome: 'aborted-user', outputOffConfirmed: true });
  });
});

describe('a disk that fills up mid-run', () => {
  it('run: the output goes off at once, exit 9 names the disk, and what was journaled stays readable', async () => {
    const smu = simulator();
    const disk = smallDisk(128);
    cleanups.push(() => disk.release());
    const dir = tempDir();
    const cfg = writeConfig(dir, { instrument: await tcpInstrument(smu), plan: { ...PLAN, repeat: 400, overrideDiskCheck: true }, analysis: FN });
    const r = await runCliAsync(['run', '--config', cfg, '--data', disk.dir, '--json']);
    expect(r.code, r.stderr).toBe(9);
    const res = JSON.parse(r.stdout);
    expect(res.outcome).toBe('journal-fault');
    expect(res.reason).toMatch(/no space left on the disk \(ENOSPC\)/);
    // At the instrument: output off arrived, and no level after it; the output is off.
    await waitUntil(() => offArrived(smu), 'output off at the instrument');
    expect(receivedAfter(smu, ':OUTP OFF').filter((l) => l.startsWith(':SOUR:VOLT') || l === ':OUTP ON')).toEqual([]);
    expect(smu.output).toBe(false);
    expect(res.outputOffConfirmed).toBe(true);
    // Everything journaled before the failure is readable: whole records, a prefix of the run.
    const ev = journal(res.dir);
    const readings = ev.filter((e) => e.type === 'reading');
    expect(readings.length).toBeGreaterThan(46);
    expect(statSync(join(res.dir, 'readings.f64')).size % 56).toBe(0);
    readings.forEach((e, k) => expect(e.type === 'reading' && e.seq > 0 && (k === 0 || e.seq > readings[k - 1].seq)).toBe(true));
  });

  it('serve: the daemon stays up, the output goes off, the status says why, and a later run is refused cleanly', async () => {
    const smu = simulator();
    const disk = smallDisk(128);
    cleanups.push(() => disk.release());
    const dir = tempDir();
    const cfg = writeConfig(dir, { instrument: await tcpInstrument(smu), plan: { ...PLAN, repeat: 400, overrideDiskCheck: true }, analysis: FN });
    const d = await daemon(cfg, disk.dir);
    expect((await api(d.url, 'POST', '/api/run', {})).status).toBe(201);
    await waitUntil(() => offArrived(smu), 'output off at the instrument', 60_000);
    await waitIdle(d.url);
    const st = (await api(d.url, 'GET', '/api/status')).json;
    expect(st.lastRun.outcome).toBe('journal-fault');
    expect(st.lastRun.reason).toMatch(/no space left on the disk/);
    expect(smu.output).toBe(false);
    expect(d.proc.exitCode).toBe(null);
    const again = await api(d.url, 'POST', '/api/run', {});
    expect([400, 507]).toContain(again.status);
    expect(again.json.error).toMatch(/disk|space/);
    expect(smu.log.filter((l) => l === ':OUTP ON')).toHaveLength(1);
  });
});

describe("the operator's terminal goes away", () => {
  /** `plumbline run` as a child with its output piped here; the caller decides when the reader leaves. */
  function runChild(cfg: string, data: string) {
    const p = spawn(process.execPath, [CLI, 'run', '--config', cfg, '--data', data], { stdio: ['ignore', 'pipe', 'pipe'] });
    let out = '';
    p.stdout.on('data', (d) => (out += String(d)));
    p.stderr.on('data', (d) => (out += String(d)));
    const exited = new Promise<number | null>((r) => p.once('exit', (code) => r(code)));
    const guard = setTimeout(() => p.kill('SIGKILL'), 60_000);
    cleanups.push(() => clearTimeout(guard));
    return { p, out: () => out, exited };
  }

  it('a reader that stops early (`| head -1`): the run goes on to its end and turns the output off', async () => {
    const smu = simulator();
    const dir = tempDir();
    const cfg = writeConfig(dir, { instrument: await tcpInstrument(smu), plan: { ...PLAN, repeat: 30 }, analysis: FN });
    const data = join(dir, 'data');
    const c = runChild(cfg, data);
    await waitUntil(() => c.out().includes('session '), 'the run to start');
    c.p.stdout.destroy(); // the reading end of the pipe closes: every later write fails with EPIPE
    expect(await c.exited).toBe(0);
    expect(smu.output).toBe(false);
    expect(receivedAfter(smu, ':OUTP OFF').filter((l) => l.startsWith(':SOUR:VOLT') || l === ':OUTP ON')).toEqual([]);
    const session = /session (\S+)/.exec(c.out())?.[1] as string;
    expect(journal(join(data, session)).filter((e) => e.type === 'reading')).toHaveLength(30 * PLAN.points);
  });

  it('a hang-up (SIGHUP) mid-run: the run ends as interrupted (exit 8) with the output off at the instrument, nothing sourced after it', async () => {
    const smu = simulator({ readDelayMs: 20 });
    const dir = tempDir();
    const cfg = writeConfig(dir, { instrument: await tcpInstrument(smu), plan: { ...PLAN, repeat: 100 }, analysis: FN });
    const c = runChild(cfg, join(dir, 'data'));
    await waitUntil(() => smu.received.filter((r) => r.line === ':READ?').length >= 5, 'readings under way');
    c.p.kill('SIGHUP');
    expect(await c.exited).toBe(8);
    expect(smu.output).toBe(false);
    expect(receivedAfter(smu, ':OUTP OFF').filter((l) => l.startsWith(':SOUR:VOLT') || l === ':OUTP ON')).toEqual([]);
    expect(c.out()).toMatch(/run ended: interrupted — the terminal closed \(SIGHUP\)/);
  });
  it('Ctrl-C (SIGINT) mid-sweep: exit 8, the output off at the instrument before the interrupted sweep is fitted, nothing sourced after it', async () => {
    const smu = simulator({ readDelayMs: 20 });
    const dir = tempDir();
    const data = join(dir, 'data');
    const cfg = writeConfig(dir, { instrument: await tcpInstrument(smu), plan: { ...PLAN, repeat: 100 }, analysis: FN });
    const c = runChild(cfg, data);
    // Mid-sweep: past the first sweep and a few readings into a later one.
    await waitUntil(() => smu.received.filter((r) => r.line === ':READ?').length >= PLAN.points + 10, 'a second sweep under way');
    c.p.kill('SIGINT');
    expect(await c.exited).toBe(8);
    expect(smu.output).toBe(false);
    expect(receivedAfter(smu, ':OUTP OFF').filter((l) => l.startsWith(':SOUR:VOLT') || l === ':OUTP ON')).toEqual([]);
    expect(c.out()).toMatch(/interrupted \(SIGINT\); turning the output off/);
    // The journal: the output-off record comes before any fit of the interrupted sweep's readings
    // (the fit, which takes its time, waits; the output does not).
    const session = /session (\S+)/.exec(c.out())?.[1] as string;
    const ev = journal(join(data, session));
    const off = ev.find((e) => e.type === 'output' && !e.on);
    expect(off, 'an output-off record').toBeDefined();
    const last = Math.max(...ev.filter((e) => e.type === 'reading').map((e) => (e as Extract<WireEvent, { type: 'reading' }>).sweep));
    const lateFits = ev.filter((e) => e.type === 'fit' && e.final && e.sweep === last);
    for (const f of lateFits) expect(f.seq, `final fit of sweep ${last}`).toBeGreaterThan((off as WireEvent).seq);
  });
});

describe('abort while a reading is in flight', () => {
  it('output off reaches the instrument before the slow reading is answered, and nothing is sourced after it', async () => {
    const smu = simulator({ readDelayMs: 1500 });
    const dir = tempDir();
    const cfg = writeConfig(dir, { instrument: await tcpInstrument(smu), timeoutMs: 5000, plan: { ...PLAN, repeat: 2 }, analysis: FN });
    const d = await daemon(cfg, join(dir, 'data'));
    expect((await api(d.url, 'POST', '/api/run', {})).status).toBe(201);
    // The second READ? is certainly in flight: the first took 1.5 s to answer.
    await waitUntil(() => smu.received.filter((r) => r.line === ':READ?').length >= 2, 'a reading in flight', 20_000);
    const inFlight = smu.received.filter((r) => r.line === ':READ?')[1];
    expect((await api(d.url, 'POST', '/api/run/abort', { reason: 'test abort' })).status).toBe(200);
    await waitUntil(() => offArrived(smu), 'output off bytes', 5000);
    const off = smu.received[offIndex(smu)];
    // No reply left the instrument between that READ? and the off command: it did not wait for the reading.
    expect(off.repliesSent).toBe(inFlight.repliesSent);
    expect(off.at - inFlight.at).toBeLessThan(1500);
    await waitUntil(() => !smu.output, 'the instrument to execute output off', 10_000);
    expect(receivedAfter(smu, ':OUTP OFF').filter((l) => l.startsWith(':SOUR:VOLT') || l === ':OUTP ON')).toEqual([]);
  });
});

describe('abort during a slow ramp', () => {
  it('stops the ramp where it is: no level command after output off', async () => {
    const smu = simulator();
    const dir = tempDir();
    const cfg = writeConfig(dir, {
      instrument: await tcpInstrument(smu),
      limits: { maxVoltage: 20, maxCompliance: 0.01, maxPower: 0.1, rampStep: 0.5, rampDelay: 0.5 },
      plan: { start: 8, stop: 9, points: 11, compliance: 1e-3, repeat: 1 },
      analysis: FN,
    });
    const d = await daemon(cfg, join(dir, 'data'));
    expect((await api(d.url, 'POST', '/api/run', {})).status).toBe(201);
    await waitUntil(() => receivedAfter(smu, ':OUTP ON').filter((l) => l.startsWith(':SOUR:VOLT')).length >= 3, 'the ramp under way');
    expect((await api(d.url, 'POST', '/api/run/abort', {})).status).toBe(200);
    await waitUntil(() => !smu.output, 'output off');
    await new Promise((r) => setTimeout(r, 1200)); // two more ramp periods: nothing may follow
    expect(receivedAfter(smu, ':OUTP OFF').filter((l) => l.startsWith(':SOUR:VOLT') || l === ':OUTP ON')).toEqual([]);
    expect(smu.level).toBeLessThan(8);
    await waitIdle(d.url);
  });
});

describe('an instrument that cannot be reached', () => {
  it('run --json still prints one JSON object: the outcome, why, and no session (exit 6, nothing created)', async () => {
    // A port nothing listens on: take a free one from the system, then close it.
    const { createServer } = await import('node:net');
    const probe = createServer();
    const port: number = await new Promise((r) => probe.listen(0, '127.0.0.1', () => r((probe.address() as { port: number }).port)));
    await new Promise((r) => probe.close(r));
    const dir = tempDir();
    const cfg = writeConfig(dir, { instrument: { kind: 'tcp', host: '127.0.0.1', port }, plan: { ...PLAN, repeat: 1 }, analysis: FN });
    const r = await runCliAsync(['run', '--config', cfg, '--data', join(dir, 'data'), '--json']);
    expect(r.code).toBe(6);
    const lines = r.stdout.trim().split('\n');
    expect(lines).toHaveLength(1);
    const res = JSON.parse(lines[0]);
    expect(res).toMatchObject({ outcome: 'instrument-fault', session: null });
    expect(res.reason).toMatch(new RegExp(`cannot reach the instrument \\(TCP 127\\.0\\.0\\.1:${port}\\)`));
    expect(() => statSync(join(dir, 'data'))).toThrow();
  });
});

describe('an instrument that stops answering', () => {
  it('the run ends as an instrument fault; output off is sent but recorded as NOT confirmed, with a caution', async () => {
    const smu = simulator({ hangAfterReadings: 5 });
    const dir = tempDir();
    const cfg = writeConfig(dir, { instrument: await ptyInstrument(smu), timeoutMs: 400, plan: { ...PLAN, repeat: 1 }, analysis: FN });
    const r = await runCliAsync(['run', '--config', cfg, '--data', join(dir, 'data'), '--json']);
    expect(r.code).toBe(6);
    const res = JSON.parse(r.stdout);
    expect(res.outcome).toBe('instrument-fault');
    expect(res.reason).toMatch(/no reply/);
    expect(res.outputOffConfirmed).toBe(false);
    // The bytes reached the instrument's end of the wire; the hung instrument never acted on them.
    expect(receivedAfter(smu, ':OUTP ON')).toContain(':OUTP OFF');
    expect(smu.output).toBe(true);
    const ev = journal(res.dir);
    const offs = ev.filter((e) => e.type === 'output' && !e.on);
    expect(offs.some((e) => e.type === 'output' && e.confirmed)).toBe(false);
    expect(offs.at(-1)).toMatchObject({ queried: true, confirmed: false });
    const caution = ev.find((e) => e.type === 'caution' && e.kind === 'output-unconfirmed');
    expect(caution?.type === 'caution' && caution.message).toMatch(/front panel/);
  });
});

describe('replies out of step', () => {
  it('an extra reply line stops the run as out of step, naming what came back; the output ends off', async () => {
    const smu = simulator({ strayAfterReadings: 7 });
    const dir = tempDir();
    const cfg = writeConfig(dir, { instrument: await ptyInstrument(smu), plan: { ...PLAN, repeat: 3 }, analysis: FN });
    const r = await runCliAsync(['run', '--config', cfg, '--data', join(dir, 'data'), '--json']);
    expect(r.code).toBe(6);
    const res = JSON.parse(r.stdout);
    expect(res.outcome).toBe('instrument-fault');
    expect(res.reason).toMatch(/out of step/);
    const ev = journal(res.dir);
    const caution = ev.find((e) => e.type === 'caution' && e.kind === 'instrument-fault');
    // The caution quotes the line that came back (the seventh reading, sent twice).
    expect(caution?.type === 'caution' && caution.message).toMatch(/out of step: .*'[+-]?\d\.\d+E[+-]\d+,/);
    // The run did not go on: far fewer readings than planned, and the output is off.
    expect(ev.filter((e) => e.type === 'reading').length).toBeLessThan(12);
    await waitUntil(() => !smu.output, 'output off');
    expect(smu.log.filter((l) => /^:OUTP (ON|OFF)$/.test(l)).at(-1)).toBe(':OUTP OFF');
    expect(res.outputOffConfirmed).toBe(true);
  });
});

describe('a run with no usable reading', () => {
  it('all replies over range: not "completed"; the flags are kept; no false high-voltage caution', async () => {
    const smu = simulator({ readingReply: '+9.9E37,+9.9E37' });
    const dir = tempDir();
    const cfg = writeConfig(dir, { instrument: await tcpInstrument(smu), plan: { ...PLAN, points: 10, repeat: 1 }, analysis: FN });
    const r = await runCliAsync(['run', '--config', cfg, '--data', join(dir, 'data'), '--json']);
    expect(r.code).toBe(6);
    const res = JSON.parse(r.stdout);
    expect(res.outcome).toBe('instrument-fault');
    expect(res.reason).toMatch(/no usable reading in 10 replies \(10 over range or not finite\)/);
    expect(res.usable).toBe(0);
    const ev = journal(res.dir);
    const readings = ev.filter((e) => e.type === 'reading');
    expect(readings).toHaveLength(10);
    for (const e of readings) expect(e.type === 'reading' && e.flags & (FLAG.overflow | FLAG.voltageOverflow)).toBe(FLAG.overflow | FLAG.voltageOverflow);
    expect(ev.some((e) => e.type === 'caution' && e.kind === 'hazard-voltage')).toBe(false);
    expect(smu.output).toBe(false);
  });

  it("all replies the not-a-number value: rejected with the parser's reason, and the run is an instrument fault", async () => {
    const smu = simulator({ readingReply: '9.91E37,9.91E37' });
    const dir = tempDir();
    const cfg = writeConfig(dir, { instrument: await tcpInstrument(smu), plan: { ...PLAN, points: 10, repeat: 1 }, analysis: FN });
    const r = await runCliAsync(['run', '--config', cfg, '--data', join(dir, 'data'), '--json']);
    expect(r.code).toBe(6);
    const res = JSON.parse(r.stdout);
    expect(res.rejected).toEqual({ "the instrument's not-a-number value (9.91E37)": 10 });
    const rejected = journal(res.dir).filter((e) => e.type === 'rejected');
    expect(rejected).toHaveLength(10);
    expect(rejected[0].type === 'rejected' && rejected[0].reason).toMatch(/not-a-number value/);
  });
});

describe('errors keep their real reason', () => {
  it('a reply longer than the framer accepts is reported as such, not as a timeout', async () => {
    const smu = simulator({ readingReply: `1.0E0,${'1'.repeat(5000)}` });
    const dir = tempDir();
    const cfg = writeConfig(dir, { instrument: await tcpInstrument(smu), plan: { ...PLAN, points: 5, repeat: 1 }, analysis: FN });
    const r = await runCliAsync(['run', '--config', cfg, '--data', join(dir, 'data'), '--json']);
    expect(r.code).toBe(6);
    expect(JSON.parse(r.stdout).reason).toMatch(/longer than 4096 characters/);
    expect(smu.output).toBe(false);
  });

  it('a missing dialect file is a setting error (exit 2) naming the dialect, not a cable problem', async () => {
    const smu = simulator();
    const dir = tempDir();
    const cfg = writeConfig(dir, { instrument: await tcpInstrument(smu), dialect: 'no-such-family', plan: { ...PLAN, repeat: 1 } });
    const r = await runCliAsync(['run', '--config', cfg, '--data', join(dir, 'data')]);
    expect(r.code).toBe(2);
    expect(r.stderr).toMatch(/dialect 'no-such-family': not a shipped dialect \(shipped: protection-status, protection-trip, in .*config\/dialects/);
    expect(r.stderr).not.toMatch(/cable/);
    expect(smu.log).toEqual([]);
  });

  it('a serial or TCP instrument without a dialect is refused, naming the field', async () => {
    const dir = tempDir();
    const cfg = writeConfig(dir, { instrument: { kind: 'tcp', host: '127.0.0.1', port: 9 }, dialect: undefined });
    const r = await runCliAsync(['run', '--config', cfg, '--data', join(dir, 'data')]);
    expect(r.code).toBe(2);
    expect(r.stderr).toMatch(/field 'dialect'.*protection-trip or protection-status/);
  });

  it('absurd settings are refused before anything is sent: a 1 nV ramp step, a plan larger than the disk', async () => {
    const smu = simulator();
    const dir = tempDir();
    const inst = await tcpInstrument(smu);
    const ramp = writeConfig(dir, { instrument: inst, limits: { maxVoltage: 20, maxCompliance: 0.01, maxPower: 0.1, rampStep: 1e-9 } });
    const r1 = await runCliAsync(['run', '--config', ramp, '--data', join(dir, 'data')]);
    expect(r1.code).toBe(2);
    expect(r1.stderr).toMatch(/limits\.rampStep.*at least 0\.001 V/);
    const big = writeConfig(dir, { instrument: inst, plan: { start: 0, stop: 1, points: 100000, repeat: 1000000, compliance: 1e-3 } });
    const r2 = await runCliAsync(['run', '--config', big, '--data', join(dir, 'data')]);
    expect(r2.code).toBe(2);
    expect(r2.stderr).toMatch(/field 'repeat': 1000000 sweep\(s\) × 100000 points would write about .* of journal, more than the .* free/);
    // A plan beyond the station's limits is the guard's refusal (exit 7, as documented), with the
    // one JSON object a script expects.
    const high = writeConfig(dir, {
      instrument: inst,
      limits: { maxVoltage: 20, maxCompliance: 0.01, maxPower: 0.1 },
      plan: { start: 0, stop: 25, points: 11, compliance: 1e-3 },
    });
    const r3 = await runCliAsync(['run', '--config', high, '--data', join(dir, 'data'), '--json']);
    expect(r3.code).toBe(7);
    expect(JSON.parse(r3.stdout)).toMatchObject({
      outcome: 'guard-refused',
      reason: expect.stringMatching(/refused by the safety guard: plan stop = 25 V exceeds the station limit maxVoltage = 20 V/),
    });
    expect(smu.log).toEqual([]);
  });
});
