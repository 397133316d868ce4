/**
 * The simulated instrument through the same client code a real one uses (dialect → session →
 * driver), over an in-process pair, loopback TCP, and a real pseudo-terminal pair made by socat.
 */
import { spawn } from 'node:child_process';
import { connect } from 'node:net';
import { afterEach, describe, expect, it } from 'vitest';
import { loadDialect } from '../../protocols/dialect.js';
import { ScpiDisconnectError, ScpiSession, ScpiTimeoutError } from '../../protocols/scpi-session.js';
import { duplexPair, openSerial, openTcp } from '../../protocols/transport.js';
import { fowlerNordheim } from '../../daemon/analysis/mechanisms/fowler-nordheim.js';
import { shockley } from '../../daemon/analysis/mechanisms/diode.js';
import { SmuDriver } from '../../daemon/instrument/smu-driver.js';
import { SimulatedSmu, type Faults } from '../../daemon/simulator/instrument.js';
import { findScenario } from '../../daemon/simulator/scenarios.js';
import { attachInstrument, servePty, serveTcp } from '../../daemon/simulator/serve.js';
import { CLI } from '../helpers/cli.js';

const cleanups: (() => unknown)[] = [];
afterEach(async () => {
  while (cleanups.length) await cleanups.pop()?.();
});

function inProcess(scenario = 'oxide-fn', faults?: Faults, timeoutMs = 2000) {
  const smu = new SimulatedSmu({ device: findScenario(scenario).device, seed: 3, realTime: false, faults });
  const [a, b] = duplexPair();
  attachInstrument(smu, b);
  const dialect = loadDialect('protection-trip');
  const session = new ScpiSession(a, { timeoutMs });
  cleanups.push(() => session.close());
  return { smu, session, driver: new SmuDriver(session, dialect) };
}

describe('simulated SMU, in-process', () => {
  it('answers *IDN? and SYST:VERS?, and reports an unknown header as -113 in the error queue', async () => {
    const { session } = inProcess();
    expect(await session.query('*IDN?')).toMatch(/simulated SMU/);
    expect(await session.query(':SYST:VERS?')).toBe('1999.0');
    await session.write(':SOUR:VOLTA 1');
    expect(await session.drainErrors()).toEqual([{ code: -113, text: 'Undefined header' }]);
  });

  it('accepts long and short forms, optional nodes and compound messages (SCPI 1999 vol. 1)', async () => {
    const { session, smu } = inProcess();
    await session.write('SOURce:VOLTage:LEVel:IMMediate:AMPLitude 2.5;:SENS:CURR:PROT 1e-4');
    // *OPC? waits until the commands before it have been executed (IEEE 488.2).
    expect(await session.query('*OPC?')).toBe('1');
    expect(smu.level).toBe(2.5);
    expect(smu.compliance).toBe(1e-4);
    expect(await session.query(':sour:volt?;:outp?')).toBe('2.500000000E+0;0');
    expect(await session.drainErrors()).toEqual([]);
  });

  it('currents follow the Fowler–Nordheim forward model within the instrument noise', async () => {
    const { driver, smu } = inProcess('oxide-fn');
    await driver.configure({ compliance: 1e-3 });
    await driver.outputOn();
    const sc = findScenario('oxide-fn');
    for (const v of [6, 7, 8]) {
      await driver.setVoltage(v);
      const m = await driver.measure();
      const ideal = fowlerNordheim(v / 7e-9, 3.1, 0.42) * 1e-8 + v / 1e14;
      expect(m.compliance).toBe(false);
      // ± % of reading + range offset: 5e-4·I + 2e-4·range, range within a decade of I.
      const sigma = smu.spec.gain * ideal + smu.spec.rangeOffset * 10 * ideal;
      expect(Math.abs((m.reading?.i ?? 0) - ideal)).toBeLessThan(5 * sigma);
      expect(m.reading?.v).toBeCloseTo(v, 3);
    }
    expect(sc.device.mechanism).toBe('fowler-nordheim');
  });

  it('a diode answers the Shockley forward model, including reverse bias (R_s negligible here)', async () => {
    const { driver } = inProcess('si-diode');
    await driver.configure({ compliance: 1e-2 });
    await driver.outputOn();
    for (const v of [-0.3, 0.4]) {
      await driver.setVoltage(v);
      const m = await driver.measure();
      const ideal = shockley(v, 1e-12, 1.2, 300) + v / 1e8;
      expect(Math.abs((m.reading?.i ?? 0) - ideal) / Math.abs(ideal)).toBeLessThan(0.05);
    }
  });

  it('clamps at compliance and raises the tripped flag; measuring with output off is a -221', async () => {
    const { driver, session } = inProcess('oxide-fn');
    await driver.configure({ compliance: 1e-6 });
    await session.write(':READ?');
    expect((await session.drainErrors()).map((e) => e.code)).toEqual([-221]);
    await driver.outputOn();
    await driver.setVoltage(9.5);
    const m = await driver.measure();
    expect(m.compliance).toBe(true);
    expect(Math.abs(m.reading?.i ?? 0)).toBeCloseTo(1e-6, 12);
    expect((m.reading?.v ?? 99) < 9.5).toBe(true);
  });

  it('breaks down at its field and stays broken (current at compliance at lower bias)', async () => {
    const { driver } = inProcess('oxide-breakdown');
    await driver.configure({ compliance: 1e-3 });
    await driver.outputOn();
    await driver.setVoltage(9);
    await driver.measure();
    await driver.setVoltage(2);
    const m = await driver.measure();
    expect(m.compliance).toBe(true);
  });

  it('fault injection: garbage bytes are rejected and counted, never read as a value', async () => {
    const { driver, session } = inProcess('oxide-fn', { garbageEvery: 3 });
    await driver.configure({ compliance: 1e-3 }).catch(() => undefined);
    await driver.outputOn().catch(() => undefined);
    await driver.setVoltage(7);
    let bad = 0;
    for (let k = 0; k < 6; k++) {
      const m = await driver.measure();
      if (!m.reading) bad++;
    }
    expect(bad).toBeGreaterThan(0);
    expect(driver.rejects.total).toBe(bad);
    expect(session.isClosed).toBe(false);
  });

  it('fault injection: a lost terminator merges two replies; the session times out instead of misreading', async () => {
    const { session } = inProcess('oxide-fn', { dropTerminatorEvery: 1 }, 150);
    await expect(session.query('*IDN?')).rejects.toBeInstanceOf(ScpiTimeoutError);
  });

  it('every scenario file loads and its device answers a finite current at mid-sweep', async () => {
    const { listScenarios } = await import('../../daemon/simulator/scenarios.js');
    const all = listScenarios();
    expect(all.length).toBeGreaterThanOrEqual(10);
    for (const sc of all) {
      const smu = new SimulatedSmu({ device: sc.device, realTime: false });
      const mid = 0.75 * sc.sweep.stop;
      expect(Number.isFinite(smu.device.current(mid))).toBe(true);
    }
  });

  it('fault injection: a slow reply times out; a disconnect rejects the pending query', async () => {
    const slow = inProcess('oxide-fn', { slowReplyMs: 300 }, 100);
    await expect(slow.session.query('*IDN?')).rejects.toBeInstanceOf(ScpiTimeoutError);
    const cut = inProcess('oxide-fn', { disconnectAfterReadings: 2 });
    await cut.driver.configure({ compliance: 1e-3 });
    await cut.driver.outputOn();
    await cut.driver.setVoltage(1);
    await cut.session.query(':READ?');
    await cut.session.query(':READ?').catch(() => undefined);
    await expect(cut.session.query(':READ?')).rejects.toBeInstanceOf(ScpiDisconnectError);
  });
});

describe('simulated SMU over real transports', () => {
  it('loopback TCP raw socket', async () => {
    const smu = new SimulatedSmu({ device: findScenario('oxide-fn').device, realTime: false });
    const server = await serveTcp(smu, 0);
    cleanups.push(() => new Promise((r) => server.close(r)));
    const port = (server.address() as { port: number }).port;
    const session = new ScpiSession(await openTcp('127.0.0.1', port));
    cleanups.push(() => session.close());
    const driver = new SmuDriver(session, loadDialect('protection-trip'));
    expect(await driver.identify()).toMatch(/plumbline/);
    await driver.configure({ compliance: 1e-3 });
    await driver.outputOn();
    await driver.setVoltage(8);
    const m = await driver.measure();
    expect(m.reading?.i).toBeGreaterThan(1e-9);
    expect(await driver.outputOff()).toBe(true);
    expect(await session.query(':OUTP?')).toBe('0');
  });

  it('a real pseudo-terminal pair (socat), opened with serialport like a USB adapter', async () => {
    const smu = new SimulatedSmu({ device: findScenario('si-diode').device, realTime: false });
    const pair = await servePty(smu);
    cleanups.push(() => pair.close());
    const session = new ScpiSession(await openSerial({ path: pair.clientPath, baudRate: 115200 }));
    cleanups.push(() => session.close());
    const driver = new SmuDriver(session, loadDialect('protection-trip'));
    expect(await driver.identify()).toMatch(/simulated SMU/);
    await driver.configure({ compliance: 1e-2 });
    await driver.outputOn();
    await driver.setVoltage(0.45);
    const m = await driver.measure();
    const ideal = shockley(0.45, 1e-12, 1.2, 300);
    expect(Math.abs((m.reading?.i ?? 0) - ideal) / ideal).toBeLessThan(0.05);
  });

  it('`plumbline sim --tcp PORT` serves a generic controller (plain socket, raw SCPI)', async () => {
    const port = 20000 + Math.floor(Math.random() * 20000);
    const child = spawn(process.execPath, [CLI, 'sim', '--tcp', String(port), '--scenario', 'nitride-pf'], { stdio: ['ignore', 'pipe', 'pipe'] });
    cleanups.push(() => child.kill('SIGTERM'));
    await new Promise<void>((resolve, reject) => {
      child.stdout.on('data', (d: Buffer) => (String(d).includes('tcp://') ? resolve() : undefined));
      child.once('exit', (c) => reject(new Error(`sim exited ${c}`)));
    });
    const sock = connect({ host: '127.0.0.1', port });
    cleanups.push(() => sock.destroy());
    let buf = '';
    sock.on('data', (d) => (buf += String(d)));
    const ask = async (q: string) => {
      buf = '';
      sock.write(`${q}\n`);
      for (let k = 0; k < 200 && !buf.includes('\n'); k++) await new Promise((r) => setTimeout(r, 10));
      return buf.trim();
    };
    await new Promise((r) => sock.once('connect', r));
    sock.write(':SENS:CURR:PROT 1e-3\n:SOUR:VOLT 8\n:OUTP ON\n');
    const [v, i] = (await ask(':READ?')).split(',').map(Number);
    expect(v).toBeCloseTo(8, 3);
    expect(i).toBeGreaterThan(0);
    expect(await ask(':SYST:ERR?')).toBe('0,"No error"');
    // A controller that sends its queries and closes its side at once (the README's
    // `printf … | socat - TCP:…`) still gets its reply before the link closes.
    const oneShot = connect({ host: '127.0.0.1', port });
    let got = '';
    oneShot.on('data', (d) => (got += String(d)));
    const ended = new Promise<void>((r) => oneShot.once('close', () => r()));
    oneShot.end(':SOUR:VOLT 8\n:READ?\n');
    await ended;
    expect(Number(got.trim().split(',')[0])).toBeCloseTo(8, 3);
    // SIGTERM stops it while the controller is still connected, dropping the link as an unplugged
    // instrument would (a listening server alone waits for its clients to hang up).
    const closed = new Promise<void>((r) => sock.once('close', () => r()));
    const exited = new Promise<number | null>((r) => child.once('exit', (c) => r(c)));
    child.kill('SIGTERM');
    expect(await Promise.race([exited, new Promise((r) => setTimeout(() => r('still running after 5 s'), 5000))])).toBe(0);
    await closed;
  });
});

describe('illuminated solar cell scenario (single-diode model, implicit equation)', () => {
  it('short-circuit current equals the photocurrent less the shunt loss; the current solves the implicit equation', async () => {
    const { driver } = inProcess('solar-cell');
    await driver.configure({ compliance: 0.5 });
    await driver.outputOn();
    await driver.setVoltage(0);
    const isc = -((await driver.measure()).reading?.i ?? 0);
    // At V = 0 with tiny R_s: I ≈ I_ph (0.14 A) within the instrument accuracy.
    expect(Math.abs(isc - 0.14) / 0.14).toBeLessThan(0.01);
    await driver.setVoltage(0.5);
    const i = -((await driver.measure()).reading?.i ?? 0);
    // Residual of the single-diode equation with series and shunt resistance (Shockley 1949 with
    // lumped R_s and R_sh, as in Sze & Ng, Physics of Semiconductor Devices, 3rd ed. 2007, ch. 14) at the measured point.
    const vt = 0.025692579; // kT/q at 298.15 K (CODATA 2018)
    const f = 0.14 - 2e-10 * Math.expm1((0.5 + i * 0.05) / (1.3 * vt)) - (0.5 + i * 0.05) / 200 - i;
    expect(Math.abs(f)).toBeLessThan(0.002);
  });
});
