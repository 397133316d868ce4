/**
 * What real instruments need from the link, end to end through the built CLI and the simulated
 * instrument on a socat pty pair or loopback TCP (the simulator logs every command it executes):
 *  - a dialect whose reading carries a status word: one exchange per point, compliance from the
 *    status bit, no separate compliance query;
 *  - CR-only and CR LF terminators in each direction;
 *  - instrument-paced sweeps: blocks of levels the instrument steps through itself, fetched at
 *    once; a breakdown found in a block turns the output off before the next block; an abort
 *    reaches the instrument while a block runs and stops it (ABORt, then output off);
 *  - `watch` on TCP and serial line streams; `ports`.
 */
import { existsSync, readFileSync, writeFileSync } from 'node:fs';
import { spawn } from 'node:child_process';
import { createServer, type Server, type Socket } from 'node:net';
import { join } from 'node:path';
import { SerialPort } from 'serialport';
import { afterEach, describe, expect, it } from 'vitest';
import { scanJournal } from '../../daemon/journal/reader.js';
import { SimulatedSmu } from '../../daemon/simulator/instrument.js';
import { findScenario } from '../../daemon/simulator/scenarios.js';
import { servePty, type LinkFraming } from '../../daemon/simulator/serve.js';
import { DIALECT_DIR } from '../../protocols/dialect.js';
import { FLAG, type WireEvent } from '../../protocols/wire.js';
import { CLI, runCli } from '../helpers/cli.js';
import { api, runCliAsync, startDaemon, tempDir, waitUntil, writeConfig } from '../helpers/daemon.js';

const cleanups: (() => Promise<void> | void)[] = [];
afterEach(async () => {
  while (cleanups.length) await cleanups.pop()?.();
});

function journal(dir: string): WireEvent[] {
  const out: WireEvent[] = [];
  scanJournal(dir, (e) => out.push(e));
  return out;
}

async function pty(smu: SimulatedSmu, framing: LinkFraming = {}) {
  const p = await servePty(smu, undefined, framing);
  cleanups.push(() => p.close());
  return { kind: 'serial', path: p.clientPath, baudRate: 115200 };
}

const FN = { model: 'fowler-nordheim', window: { from: 5, to: 9 }, inputs: { thickness: 7e-9, area: 1e-8, massRatio: 0.42 } };

describe('a reading that carries its status word', () => {
  it('one exchange per point; compliance comes from the status bit', async () => {
    const smu = new SimulatedSmu({ device: findScenario('oxide-fn').device, seed: 3, realTime: false });
    const dir = tempDir();
    // 1 nA compliance: the upper part of the sweep is clipped.
    const cfg = writeConfig(dir, {
      instrument: await pty(smu),
      dialect: 'protection-status',
      plan: { start: 0, stop: 9, points: 46, compliance: 1e-9, repeat: 1 },
      analysis: FN,
    });
    const r = await runCliAsync(['run', '--config', cfg, '--data', join(dir, 'data'), '--json']);
    expect(r.code, r.stderr).toBe(0);
    const res = JSON.parse(r.stdout);
    expect(smu.log).toContain(':FORM:ELEM VOLT,CURR,TIME,STAT');
    expect(smu.log.filter((l) => l === ':READ?')).toHaveLength(46);
    expect(smu.log.filter((l) => l.includes('TRIP'))).toEqual([]);
    const readings = journal(res.dir).filter((e): e is Extract<WireEvent, { type: 'reading' }> => e.type === 'reading');
    const clipped = readings.filter((e) => e.flags & FLAG.compliance);
    expect(clipped.length).toBeGreaterThan(3);
    // The flag agrees with the physics: at compliance the current sits at the limit.
    for (const e of readings) expect(Boolean(e.flags & FLAG.compliance), `${e.v} V, ${e.i} A`).toBe(Math.abs(e.i) >= 0.999e-9);
  });
});

describe('terminators', () => {
  const variants: { name: string; write: '\r' | '\r\n'; read: 'cr' | 'crlf' }[] = [
    { name: 'CR only, both ways', write: '\r', read: 'cr' },
    { name: 'CR LF, both ways', write: '\r\n', read: 'crlf' },
  ];
  for (const v of variants) {
    it(`${v.name}: a whole run completes with every command whole at the instrument`, async () => {
      const dir = tempDir();
      const base = JSON.parse(readFileSync(join(DIALECT_DIR, 'protection-trip.json'), 'utf8'));
      const file = join(dir, 'my-smu.json');
      writeFileSync(file, JSON.stringify({ ...base, name: 'my-smu', terminator: v.write, readTerminator: v.read }));
      const smu = new SimulatedSmu({ device: findScenario('oxide-fn').device, seed: 4, realTime: false });
      const cfg = writeConfig(dir, {
        instrument: await pty(smu, { readTerminator: v.read, writeTerminator: v.write }),
        dialect: file,
        plan: { start: 0, stop: 9, points: 10, compliance: 1e-3, repeat: 2 },
        analysis: FN,
      });
      const r = await runCliAsync(['run', '--config', cfg, '--data', join(dir, 'data'), '--json']);
      expect(r.code, r.stderr + r.stdout).toBe(0);
      expect(smu.log.filter((l) => l === ':READ?')).toHaveLength(20);
      expect(smu.log.some((l) => /[\r\n]/.test(l))).toBe(false);
      expect(smu.output).toBe(false);
    });
  }
});

describe('instrument-paced sweeps', () => {
  it('blocks of levels run by the instrument, fetched at once; the journal holds every point in order', async () => {
    const smu = new SimulatedSmu({ device: findScenario('oxide-fn').device, seed: 5, realTime: false });
    const dir = tempDir();
    const cfg = writeConfig(dir, {
      instrument: await pty(smu),
      dialect: 'protection-status',
      plan: { start: 0, stop: 9, points: 91, compliance: 1e-3, repeat: 2, pacing: 'instrument', blockPoints: 30 },
      analysis: FN,
    });
    const r = await runCliAsync(['run', '--config', cfg, '--data', join(dir, 'data'), '--json']);
    expect(r.code, r.stderr + r.stdout).toBe(0);
    const res = JSON.parse(r.stdout);
    expect(smu.log.filter((l) => l === ':INIT')).toHaveLength(2 * 4);
    expect(smu.log.filter((l) => l === ':FETC?')).toHaveLength(2 * 4);
    expect(smu.log.filter((l) => l === ':READ?')).toEqual([]);
    const ev = journal(res.dir);
    const readings = ev.filter((e) => e.type === 'reading');
    expect(readings).toHaveLength(182);
    // The levels the instrument applied are the plan's, in order.
    expect(smu.applied.slice(0, 91).map((x) => +x.toFixed(6))).toEqual(Array.from({ length: 91 }, (_, k) => +(k * 0.1).toFixed(6)));
    const fits = ev.filter((e) => e.type === 'fit' && e.final);
    const b = fits[0]?.type === 'fit' ? fits[0].fit?.parameters.barrierHeight?.value : undefined;
    expect(b).toBeGreaterThan(3.0);
    expect(b).toBeLessThan(3.3);
    expect(smu.output).toBe(false);
  });

  it('a breakdown found in a block turns the output off before the next block starts', async () => {
    const sc = findScenario('oxide-breakdown');
    const smu = new SimulatedSmu({ device: sc.device, seed: 5, realTime: false });
    const dir = tempDir();
    const cfg = writeConfig(dir, {
      instrument: await pty(smu),
      dialect: 'protection-status',
      plan: { start: 0, stop: 10, points: 101, compliance: 1e-3, repeat: 1, pacing: 'instrument', blockPoints: 20 },
      analysis: { model: 'fowler-nordheim', window: { from: 5, to: 8.5 }, inputs: sc.device.inputs },
    });
    const r = await runCliAsync(['run', '--config', cfg, '--data', join(dir, 'data'), '--json']);
    const res = JSON.parse(r.stdout);
    expect(res.outcome).toBe('aborted-breakdown');
    const lastFetch = smu.log.lastIndexOf(':FETC?');
    const after = smu.log.slice(lastFetch + 1);
    expect(after.filter((l) => l === ':INIT' || l.startsWith(':SOUR:LIST'))).toEqual([]);
    expect(after).toContain(':OUTP OFF');
    // It broke near 8.75 V: the block holding that level was the last one run.
    expect(smu.log.filter((l) => l === ':INIT').length).toBeLessThan(6);
    expect(smu.output).toBe(false);
  });

  it('an abort reaches the instrument while a block runs, stops the block and turns the output off', async () => {
    const smu = new SimulatedSmu({ device: findScenario('oxide-fn').device, seed: 6, realTime: true });
    const dir = tempDir();
    const cfg = writeConfig(dir, {
      instrument: await pty(smu),
      dialect: 'protection-status',
      // 1 PLC at 50 Hz = 20 ms a point: a 200-point block runs for about 4 s.
      plan: { start: 0, stop: 9, points: 200, compliance: 1e-3, repeat: 1, nplc: 1, pacing: 'instrument' },
      analysis: FN,
    });
    const d = await startDaemon(['--config', cfg, '--data', join(dir, 'data')]);
    cleanups.push(() => d.stop());
    expect((await api(d.url, 'POST', '/api/run', {})).status).toBe(201);
    await waitUntil(() => smu.sweeping && smu.applied.length > 10, 'the block under way');
    expect((await api(d.url, 'POST', '/api/run/abort', {})).status).toBe(200);
    await waitUntil(() => !smu.output, 'output off');
    // The instrument stopped the block: far fewer than 200 points were applied.
    await new Promise((r) => setTimeout(r, 200));
    expect(smu.sweeping).toBe(false);
    expect(smu.applied.length).toBeLessThan(150);
    const k = smu.log.lastIndexOf(':INIT');
    expect(smu.log.slice(k + 1).filter((l) => l === ':ABOR' || l === ':OUTP OFF')).toEqual([':ABOR', ':OUTP OFF']);
  });

  it('a dialect without instrument-paced templates refuses the plan, naming the field', async () => {
    const smu = new SimulatedSmu({ device: findScenario('oxide-fn').device, seed: 7, realTime: false });
    const dir = tempDir();
    const cfg = writeConfig(dir, {
      instrument: await pty(smu),
      dialect: 'protection-trip',
      plan: { start: 0, stop: 9, points: 10, compliance: 1e-3, pacing: 'instrument' },
    });
    const r = await runCliAsync(['run', '--config', cfg, '--data', join(dir, 'data')]);
    expect(r.code).toBe(2);
    expect(r.stderr).toMatch(/field 'pacing'.*no instrument-paced templates/);
    expect(smu.log).toEqual([]);
  });
});

describe('watch on line streams', () => {
  const rows = (n: number, eol: string) => Array.from({ length: n }, (_, k) => `${(k % 50) * 0.1},${1e-9 * (k % 50) * 0.1}${eol}`).join('');

  it('TCP: reads CR-terminated lines until the peer closes, every row journaled', async () => {
    const server: Server = await new Promise((resolve) => {
      const s = createServer((sock: Socket) => {
        sock.write(rows(200, '\r'), () => sock.end());
      });
      s.listen(0, '127.0.0.1', () => resolve(s));
    });
    cleanups.push(() => new Promise<void>((r) => server.close(() => r())));
    const port = (server.address() as { port: number }).port;
    const data = join(tempDir(), 'data');
    const r = await runCliAsync(['watch', `tcp://127.0.0.1:${port}`, '--read-terminator', 'cr', '--no-page', '--model', 'ohmic', '--data', data]);
    expect(r.code, r.stderr).toBe(0);
    expect(r.stdout).toMatch(/watching TCP 127\.0\.0\.1:\d+/);
    expect(r.stdout).toMatch(/200 readings in 4 sweep\(s\)/);
  });

  it('serial: reads a pty as it would a USB adapter', async () => {
    // A pty pair from socat: the test writes at one end as a streaming instrument would.
    const dir = tempDir('plumbline-watch-pty-');
    const pair = { a: join(dir, 'dev'), b: join(dir, 'client') };
    const socat = spawn('socat', [`pty,raw,echo=0,link=${pair.a}`, `pty,raw,echo=0,link=${pair.b}`], { stdio: 'ignore' });
    cleanups.push(() => void socat.kill());
    await waitUntil(() => existsSync(pair.a) && existsSync(pair.b), 'socat to make the pty pair', 5000);
    const data = join(tempDir(), 'data');
    const w = spawn(process.execPath, [CLI, 'watch', `serial:${pair.b}`, '--baud', '115200', '--no-page', '--model', 'ohmic', '--data', data], {
      stdio: ['ignore', 'pipe', 'pipe'],
    });
    let out = '';
    w.stdout.on('data', (x) => (out += String(x)));
    w.stderr.on('data', (x) => (out += String(x)));
    cleanups.push(() => void w.kill('SIGKILL'));
    await waitUntil(() => out.includes('watching'), 'watch to start', 15_000);
    const dev = new SerialPort({ path: pair.a, baudRate: 115200, autoOpen: false });
    await new Promise<void>((res, rej) => dev.open((e) => (e ? rej(e) : res())));
    await new Promise<void>((res) => dev.write(rows(100, '\n'), () => dev.drain(() => res())));
    const session = /session (\S+)/.exec(out)?.[1] as string;
    await waitUntil(
      () => {
        try {
          return journal(join(data, session)).filter((e) => e.type === 'reading').length === 100;
        } catch {
          return false;
        }
      },
      '100 readings journaled',
      15_000,
    );
    w.kill('SIGINT');
    await new Promise((r) => w.once('exit', r));
    await new Promise<void>((res) => dev.close(() => res()));
    expect(out).toMatch(/100 readings in 2 sweep\(s\)/);
  });

  it('a malformed source names what is expected', () => {
    const r = runCli(['watch', 'tcp://nowhere', '--no-page']);
    expect(r.code).toBe(2);
    expect(r.stderr).toMatch(/expected tcp:\/\/HOST:PORT/);
    const s = runCli(['watch', 'serial:/dev/ttyUSB0', '--parity', 'sometimes', '--no-page']);
    expect(s.code).toBe(2);
    expect(s.stderr).toMatch(/--parity 'sometimes': expected none, even, odd, mark or space/);
  });
});

describe('ports', () => {
  it('lists ports, or says plainly why it cannot and what to do instead', () => {
    const r = runCli(['ports', '--json']);
    expect(r.code, r.stderr).toBe(0);
    const j = JSON.parse(r.stdout);
    expect(Array.isArray(j.ports)).toBe(true);
    if (j.warning) expect(j.warning).toMatch(/Give the port's path directly/);
    else expect(j.ports.every((p: { path: string }) => p.path.startsWith('/dev/'))).toBe(true);
  });
});
