/**
 * Breakdown tests and adaptive sweeps through the real station: the built CLI (`run`, or `serve`
 * driven over its API) against the simulated instrument on loopback TCP. The simulated device wears
 * out as daemon/analysis/wearout.ts describes and records the truth — the charge it passed and the
 * bias and field at which it broke — so the station's results are checked against it:
 *  - voltage ramp, current ramp and constant-voltage stress: breakdown found, output off at once,
 *    charge to breakdown and breakdown field within 5 % of the device's own, leakage before and
 *    after at the use condition, a device-results.csv row;
 *  - a lot of 30 devices ramped to breakdown, then `plumbline weibull` on the data folder recovers
 *    the simulator's Weibull shape and scale within its 90 % bounds;
 *  - adaptive sweeps: the target parameter pinned within tolerance, with far fewer readings than
 *    the fixed plan, and the figures `run --json` reports.
 */
import { readFileSync, writeFileSync } from 'node:fs';
import { createServer, type Server, type Socket } from 'node:net';
import { join } from 'node:path';
import { afterEach, describe, expect, it } from 'vitest';
import { scanJournal } from '../../daemon/journal/reader.js';
import { SimulatedSmu } from '../../daemon/simulator/instrument.js';
import { findScenario } from '../../daemon/simulator/scenarios.js';
import { attachInstrument } from '../../daemon/simulator/serve.js';
import { AT_FLOOR, resultFigureRows } from '../../protocols/breakdown-display.js';
import { parseDeviceResults } from '../../protocols/device-results.js';
import { FLAG, type WireEvent } from '../../protocols/wire.js';
import { REASONS } from '../../daemon/analysis/sweep-points.js';
import { analyzeWeibull } from '../../daemon/analysis/weibull.js';
import { runCli } from '../helpers/cli.js';
import { api, runCliAsync, startDaemon, tempDir, writeConfig } from '../helpers/daemon.js';

const cleanups: (() => Promise<void> | void)[] = [];
afterEach(async () => {
  while (cleanups.length) await cleanups.pop()?.();
});

const LIMITS = { maxVoltage: 15, maxCompliance: 0.01, maxPower: 0.2, rampStep: 1, rampDelay: 0 };
const WEAROUT = findScenario('oxide-wearout');

/** A TCP instrument whose every new connection meets the next device (a new run = a new device). */
async function instruments(make: (n: number) => SimulatedSmu): Promise<{ inst: Record<string, unknown>; devices: SimulatedSmu[] }> {
  const devices: SimulatedSmu[] = [];
  const server: Server = await new Promise((resolve) => {
    const s = createServer((sock: Socket) => {
      sock.setNoDelay(true);
      const smu = make(devices.length + 1);
      devices.push(smu);
      attachInstrument(smu, sock);
    });
    s.listen(0, '127.0.0.1', () => resolve(s));
  });
  cleanups.push(() => new Promise<void>((r) => server.close(() => r())));
  return { inst: { kind: 'tcp', host: '127.0.0.1', port: (server.address() as { port: number }).port }, devices };
}

function events(dir: string): WireEvent[] {
  const out: WireEvent[] = [];
  scanJournal(dir, (e) => out.push(e));
  return out;
}

function results(dir: string) {
  return { rows: parseDeviceResults(readFileSync(join(dir, 'device-results.csv'), 'utf8'), join(dir, 'device-results.csv')) };
}

/** `plumbline run` with a plan file (which may carry the device under test). */
async function runPlan(dir: string, config: Record<string, unknown>, plan: Record<string, unknown>) {
  const cfg = writeConfig(dir, config);
  const file = join(dir, 'plan.json');
  writeFileSync(file, JSON.stringify(plan));
  const r = await runCliAsync(['run', '--config', cfg, '--plan', file, '--data', join(dir, 'data'), '--json']);
  expect(r.code, r.stderr).toBe(0);
  return JSON.parse(r.stdout);
}

const within = (x: number | undefined, truth: number, rel: number) => {
  expect(x, `truth ${truth}`).toBeDefined();
  expect(Math.abs((x as number) / truth - 1), `${x} against ${truth}`).toBeLessThan(rel);
};

/**
 * Q_bd within 5 % of the device's own, or within the result's own stated uncertainty when that is
 * larger: the breakdown moment lies somewhere between two readings, and a stall of a loaded machine
 * can make that interval long (the result says so in `chargeUncertainty`).
 */
function chargeWithin(dir: string, measured: number | undefined, truth: number) {
  const ev = events(dir).find((e) => e.type === 'test-result');
  const u = ev?.type === 'test-result' ? (ev.numbers?.chargeUncertainty ?? 0) : 0;
  expect(measured).toBeDefined();
  expect(Math.abs((measured as number) - truth), `${measured} against ${truth} (stated uncertainty ${u})`).toBeLessThanOrEqual(Math.max(0.05 * truth, u));
  expect(u, 'the stated uncertainty of a normal run is small').toBeLessThan(0.25 * truth);
}

describe('voltage ramp to breakdown', () => {
  it("finds the breakdown, turns the output off at once, and gives Q_bd and E_bd within 5 % of the device's own", async () => {
    const { inst, devices } = await instruments((n) => new SimulatedSmu({ device: WEAROUT.device, seed: 40 + n, realTime: false }));
    const dir = tempDir();
    const plan = {
      kind: 'voltage-ramp',
      start: 7.5,
      stop: 12,
      step: 0.02,
      stepTime: 0.02,
      compliance: 0.01,
      useVoltage: 1,
      useCurrentLimit: 1e-6,
      device: { device: 'PL11-A1', wafer: 'PL-11', site: 'A1' },
    };
    const res = await runPlan(
      dir,
      { instrument: inst, limits: LIMITS, analysis: { model: 'fowler-nordheim', window: 'auto', inputs: WEAROUT.device.inputs } },
      plan,
    );
    const smu = devices[0];
    const truth = smu.device.breakdown;
    expect(truth, 'the device broke').toBeDefined();
    const row = results(res.dir).rows[0];
    expect(row).toMatchObject({ device: 'PL11-A1', wafer: 'PL-11', test: 'voltage-ramp', outcome: 'breakdown' });
    chargeWithin(res.dir, row.chargeToBreakdown, truth!.charge);
    // The results file carries Q_bd's stated uncertainty too, as the journal's test result states it.
    const result = events(res.dir).find((e) => e.type === 'test-result');
    expect(row.chargeToBreakdownUncertainty).toBeGreaterThan(0);
    expect(row.chargeToBreakdownUncertainty).toBe(result?.type === 'test-result' ? result.numbers?.chargeUncertainty : Number.NaN);
    within(row.breakdownField, truth!.field, 0.05);
    within(row.breakdownVoltage, truth!.voltage, 0.01);
    // Leakage at the use condition: a few hundred fA before, the broken film's 5 mA after (1 V / 200 Ω).
    expect(Math.abs(row.leakageBefore ?? 1)).toBeLessThan(1e-9);
    expect(row.leakageAfter).toBeGreaterThan(1e-3);
    // The ramp stopped at the reading that showed the breakdown: the highest level that reached the
    // instrument is the reported breakdown voltage — the level the device broke under, or the next
    // step when it broke between a reading and the next level (it is only seen at a reading).
    const log = smu.log;
    const offAfterRamp = log.findIndex((l, k) => l === ':OUTP OFF' && log.slice(0, k).filter((x) => x === ':OUTP ON').length === 2);
    const ramp = log
      .slice(0, offAfterRamp)
      .filter((l) => l.startsWith(':SOUR:VOLT '))
      .map((l) => Number(l.split(' ')[1]));
    expect(Math.max(...ramp)).toBeCloseTo(row.breakdownVoltage!, 9);
    expect(Math.max(...ramp) - truth!.voltage).toBeGreaterThanOrEqual(-1e-9);
    expect(Math.max(...ramp) - truth!.voltage).toBeLessThanOrEqual(plan.step + 1e-9);
    const ev = events(res.dir);
    expect(ev.some((e) => e.type === 'caution' && e.kind === 'destructive-test')).toBe(true);
    // A script reading `run --json` sees the same cautions as a person at the terminal.
    expect(res.cautions.map((c: { kind: string }) => c.kind)).toEqual(expect.arrayContaining(['destructive-test', 'breakdown-confirmed']));
    // Every time the output went on — the use check before, the ramp, the use check after — the
    // journal says so, and says it went off before the next: what the instrument did, in order.
    const outputs = ev.filter((e) => e.type === 'output').map((e) => (e.type === 'output' && e.on ? 'on' : 'off'));
    expect(outputs.filter((o) => o === 'on')).toHaveLength(3);
    // Each off between phases (after the check before, at breakdown, after the check after) is the
    // off sent, then the instrument's answer; the run's end adds its own answer.
    expect(outputs.join(' ')).toMatch(/^on off off on off off on off off( off)*$/);
    expect(log.filter((l) => l === ':OUTP ON')).toHaveLength(3);
    // At breakdown the output goes off and the instrument is asked whether it is off before the
    // check after the test may turn it on again; the breakdown caution says that it will.
    const lastOn = log.lastIndexOf(':OUTP ON');
    const beforeLastOn = log.slice(offAfterRamp, lastOn);
    expect(beforeLastOn).toContain(':OUTP?');
    const offAtBd = ev.findIndex((e) => e.type === 'output' && !e.on && /breakdown confirmed/.test(e.reason ?? ''));
    expect(ev[offAtBd + 1]).toMatchObject({ type: 'output', on: false, queried: true, confirmed: true });
    const bdCaution = ev.find((e) => e.type === 'caution' && e.kind === 'breakdown-confirmed');
    expect(bdCaution?.type === 'caution' && bdCaution.message).toMatch(
      /the instrument confirms it.*goes on once more, at the use voltage 1 V, for the check after the test/,
    );
    const tr = ev.find((e) => e.type === 'test-result');
    expect(tr?.type === 'test-result' && tr.outcome).toBe('breakdown');
    expect(smu.output).toBe(false);
  });

  it('a device already leaking at the use condition is an initial failure and is not ramped', async () => {
    const leaky = { ...WEAROUT.device, leakageResistance: 1e5 };
    const { inst, devices } = await instruments(() => new SimulatedSmu({ device: leaky, seed: 3, realTime: false }));
    const dir = tempDir();
    const plan = { kind: 'voltage-ramp', start: 6, stop: 12, step: 0.02, stepTime: 0.005, compliance: 0.01, useVoltage: 1, useCurrentLimit: 1e-6 };
    const cfg = writeConfig(dir, { instrument: inst, limits: LIMITS, plan });
    const r = await runCliAsync(['run', '--config', cfg, '--data', join(dir, 'data'), '--json']);
    expect(r.code, r.stderr).toBe(0);
    const row = results(JSON.parse(r.stdout).dir).rows[0];
    expect(row.outcome).toBe('initial-failure');
    expect(Math.max(...devices[0].applied)).toBeLessThanOrEqual(1 + 1e-9);
  });
});

describe('leakage at the use voltage against the noise floor', () => {
  it('a ramp from 0 V that the film survives: the use checks read the floor, and the result says so beside the numbers', async () => {
    // The oxide carries no current to speak of at 1 V (Fowler–Nordheim: nothing below a few volts
    // on 7 nm), so both checks read the instrument's floor, of either sign. The ramp's readings at
    // low bias give the floor's σ; a reading under three times it is the floor (the limit of
    // detection: IUPAC; Long & Winefordner 1983).
    const { inst } = await instruments(() => new SimulatedSmu({ device: WEAROUT.device, seed: 12, realTime: false }));
    const dir = tempDir();
    const plan = { kind: 'voltage-ramp', start: 0, stop: 6, step: 0.1, stepTime: 0.005, compliance: 0.01, useVoltage: 1, useCurrentLimit: 1e-6 };
    const res = await runPlan(dir, { instrument: inst, limits: LIMITS }, plan);
    const row = results(res.dir).rows[0];
    expect(row.outcome).toBe('survived');
    expect(row.leakageFloor).toBeGreaterThan(0);
    expect(row.leakageFloor).toBeLessThan(1e-11);
    expect(Math.abs(row.leakageBefore as number)).toBeLessThan(3 * (row.leakageFloor as number));
    expect(Math.abs(row.leakageAfter as number)).toBeLessThan(3 * (row.leakageFloor as number));
    const tr = events(res.dir).find((e) => e.type === 'test-result');
    const rows = resultFigureRows(tr as never);
    for (const key of ['leakageBefore', 'leakageAfter']) expect(rows.find((x) => x.key === key)?.label).toContain(AT_FLOOR);
    expect(rows.find((x) => x.key === 'leakageFloor')).toMatchObject({ unit: 'A' });
    // A leakage well above the floor is not marked: a 1e9 Ω parallel path carries 1 nA at 1 V.
    const { inst: leaky } = await instruments(() => new SimulatedSmu({ device: { ...WEAROUT.device, leakageResistance: 1e9 }, seed: 12, realTime: false }));
    const res2 = await runPlan(tempDir(), { instrument: leaky, limits: LIMITS }, plan);
    const tr2 = events(res2.dir).find((e) => e.type === 'test-result');
    const rows2 = resultFigureRows(tr2 as never);
    expect(rows2.find((x) => x.key === 'leakageBefore')?.label).not.toContain(AT_FLOOR);
  });
});

describe('output off between the phases of a test, asked of the instrument', () => {
  const plan = { kind: 'voltage-ramp', start: 6, stop: 12, step: 0.02, stepTime: 0.005, compliance: 0.01, useVoltage: 1, useCurrentLimit: 1e-6 };

  it('after each use-condition check the output query follows the output off on the wire, and the journal records the answer', async () => {
    const { inst, devices } = await instruments(() => new SimulatedSmu({ device: WEAROUT.device, seed: 4, realTime: false }));
    const dir = tempDir();
    const res = await runPlan(dir, { instrument: inst, limits: LIMITS }, plan);
    const lines = devices[0].received.map((r) => r.line);
    // Every output off that turned an output off (an ON came since the last OFF; the opening
    // commands of each phase send one more to an output already off) is followed by the query.
    const offs: number[] = [];
    let on = false;
    lines.forEach((l, k) => {
      if (l === ':OUTP ON') on = true;
      if (l === ':OUTP OFF' && on) {
        offs.push(k);
        on = false;
      }
    });
    // Before the test, at breakdown, after the test.
    expect(offs.length).toBeGreaterThanOrEqual(3);
    for (const k of offs) expect(lines.slice(k + 1, k + 4), `after the OUTP OFF at line ${k}: ${lines.slice(k - 3, k + 6).join(' | ')}`).toContain(':OUTP?');
    const ev = events(res.dir).filter((e) => e.type === 'output' && !e.on);
    const checks = ev.filter((e) => e.type === 'output' && /use-condition check/.test(e.reason));
    expect(checks.length).toBe(2);
    for (const c of checks) {
      const next = ev[ev.indexOf(c) + 1];
      expect(next).toMatchObject({ on: false, queried: true, confirmed: true });
    }
    expect(devices[0].output).toBe(false);
  });

  it('a sticking output relay after the check before the test: the ramp is not started, the run ends as an instrument fault with the caution', async () => {
    const { inst, devices } = await instruments(
      () => new SimulatedSmu({ device: WEAROUT.device, seed: 4, realTime: false, faults: { stuckOutputFromOff: 1 } }),
    );
    const dir = tempDir();
    const cfg = writeConfig(dir, { instrument: inst, limits: LIMITS, plan });
    const r = await runCliAsync(['run', '--config', cfg, '--data', join(dir, 'data'), '--json']);
    expect(r.code).toBe(6);
    const out = JSON.parse(r.stdout);
    expect(out.outcome).toBe('instrument-fault');
    expect(out.reason).toMatch(/after 'use-condition check before the test done' the output was turned off, but the instrument reports its output ON/);
    expect(out.outputOffConfirmed).toBe(false);
    // At the instrument: nothing above the use voltage was applied, and no output on followed the off.
    expect(Math.max(...devices[0].applied)).toBeLessThanOrEqual(1 + 1e-9);
    const lines = devices[0].received.map((r) => r.line);
    const firstOn = lines.indexOf(':OUTP ON');
    expect(firstOn).toBeGreaterThan(0);
    const off = lines.indexOf(':OUTP OFF', firstOn);
    expect(off).toBeGreaterThan(firstOn);
    expect(lines.slice(off)).not.toContain(':OUTP ON');
    const ev = events(out.dir);
    expect(ev.some((e) => e.type === 'caution' && e.kind === 'output-unconfirmed' && /front panel/.test(e.message))).toBe(true);
    expect(results(out.dir).rows[0].outcome).toBe('invalid');
  });
});

describe('ramp rate', () => {
  it('steps arrive at the instrument stepTime apart even when each reading takes 40 ms, and the journal records the rate achieved', async () => {
    // The ramp rate is the figure a ramped-voltage test quotes beside its result (JEDEC JESD35-A):
    // a 100 ms step must not become 140 ms because the reading inside it takes 40 ms.
    const sc = findScenario('oxide-fn');
    const { inst, devices } = await instruments(() => new SimulatedSmu({ device: sc.device, seed: 8, realTime: false, faults: { readDelayMs: 40 } }));
    const dir = tempDir();
    const plan = { kind: 'voltage-ramp', start: 2, stop: 5, step: 0.1, stepTime: 0.1, compliance: 1e-3 };
    const res = await runPlan(dir, { instrument: inst, limits: LIMITS }, plan);
    // The ramp's 31 levels: the set commands up to the first at 5 V (before them the approach to
    // the start, after them the ramp down).
    const all = devices[0].received.filter((r) => r.line.startsWith(':SOUR:VOLT '));
    const top = all.findIndex((r) => Math.abs(Number(r.line.split(' ')[1]) - 5) < 1e-9);
    const sets = all.slice(top - 30, top + 1);
    expect(sets.map((r) => Number(r.line.split(' ')[1]))[0]).toBeCloseTo(2, 9);
    const period = (sets[sets.length - 1].at - sets[0].at) / (sets.length - 1) / 1000;
    expect(period, 'mean step period at the instrument, s').toBeGreaterThan(0.095);
    expect(period, 'mean step period at the instrument, s').toBeLessThan(0.11);
    const tr = events(res.dir).find((e) => e.type === 'test-result');
    const n = tr?.type === 'test-result' ? tr.numbers : undefined;
    expect(n?.plannedRampRate).toBeCloseTo(1, 12);
    expect(Math.abs((n?.rampRate ?? 0) / 1 - 1), `recorded ${n?.rampRate} V/s`).toBeLessThan(0.1);
  });
});

describe('current ramp to breakdown', () => {
  it("forces rising currents until the voltage collapses; Q_bd within 5 % of the device's own", async () => {
    const { inst, devices } = await instruments(() => new SimulatedSmu({ device: WEAROUT.device, seed: 77, realTime: false }));
    const dir = tempDir();
    const plan = { kind: 'current-ramp', start: 1e-6, stop: 1e-2, stepsPerDecade: 40, stepTime: 0.02, voltageLimit: 14 };
    const cfg = writeConfig(dir, {
      instrument: inst,
      limits: LIMITS,
      plan,
      analysis: { model: 'fowler-nordheim', window: 'auto', inputs: WEAROUT.device.inputs },
    });
    const r = await runCliAsync(['run', '--config', cfg, '--data', join(dir, 'data'), '--json']);
    expect(r.code, r.stderr).toBe(0);
    const res = JSON.parse(r.stdout);
    const row = results(res.dir).rows[0];
    const truth = devices[0].device.breakdown;
    expect(truth).toBeDefined();
    expect(row).toMatchObject({ test: 'current-ramp', outcome: 'breakdown', criterion: 'voltage-collapse' });
    chargeWithin(res.dir, row.chargeToBreakdown, truth!.charge);
    within(row.breakdownVoltage, truth!.voltage, 0.02);
    // The reading that showed the collapse (a broken film at a few tens of mV) is journaled with the
    // breakdown flag and left out of the sweep's fit: the Fowler–Nordheim barrier of the intact
    // film is recovered (the simulator's 3.1 eV), not a line bent by one reading of another device.
    const ev = events(res.dir);
    const readings = ev.filter((e) => e.type === 'reading');
    const flagged = readings.filter((e) => e.type === 'reading' && e.flags & FLAG.breakdown);
    expect(flagged).toHaveLength(1);
    expect(flagged[0]).toBe(readings[readings.length - 1]);
    expect(Math.abs(flagged[0].type === 'reading' ? flagged[0].v : Number.NaN)).toBeLessThan(0.1 * row.breakdownVoltage!);
    const fit = ev.find((e) => e.type === 'fit' && e.final);
    const f = fit?.type === 'fit' ? fit.fit : null;
    expect(f?.plausible, JSON.stringify(f?.warnings)).toBe(true);
    expect(f?.points.reasons[REASONS.breakdown]).toBe(1);
    const phi = f!.parameters.barrierHeight;
    expect(Math.abs(phi.value - WEAROUT.device.params.barrierHeight), `${phi.value} ± ${phi.stdErr} eV`).toBeLessThan(Math.max(3 * phi.stdErr, 0.02));
    expect(devices[0].log).toContain(':SOUR:FUNC CURR');
    expect(devices[0].output).toBe(false);
  });
});

describe('constant-voltage stress', () => {
  it("holds the stress, senses in between, and finds the breakdown; Q_bd within 5 % of the device's own", async () => {
    const { inst, devices } = await instruments(() => new SimulatedSmu({ device: WEAROUT.device, seed: 12, realTime: false }));
    const dir = tempDir();
    const plan = {
      kind: 'constant-voltage',
      stress: 9,
      duration: 30,
      sampleEvery: 0.03,
      compliance: 0.01,
      sense: { start: 0, stop: 2, points: 5, every: 0.2 },
    };
    // One step between the stress and the sense sweep: the charge passed on the way (not measured,
    // so not counted) stays negligible.
    // The status-word dialect's readings carry the instrument's own time, which the stress clock uses.
    const cfg = writeConfig(dir, {
      instrument: inst,
      dialect: 'protection-status',
      limits: { ...LIMITS, rampStep: 10 },
      plan,
      analysis: { model: 'fowler-nordheim', window: 'auto', inputs: WEAROUT.device.inputs },
    });
    const r = await runCliAsync(['run', '--config', cfg, '--data', join(dir, 'data'), '--json']);
    expect(r.code, r.stderr).toBe(0);
    const res = JSON.parse(r.stdout);
    const row = results(res.dir).rows[0];
    const truth = devices[0].device.breakdown;
    expect(truth).toBeDefined();
    expect(row).toMatchObject({ test: 'constant-voltage', outcome: 'breakdown', breakdownVoltage: 9 });
    chargeWithin(res.dir, row.chargeToBreakdown, truth!.charge);
    // The sense sweeps are journaled as their own sweeps between stress intervals.
    const labels = events(res.dir)
      .filter((e) => e.type === 'sweep-start')
      .map((e) => (e.type === 'sweep-start' ? e.label : ''));
    expect(labels.filter((l) => l.startsWith('sense sweep')).length).toBeGreaterThan(0);
    expect(devices[0].output).toBe(false);
  });
});

describe('the API asks for an acknowledgement before a breakdown test', () => {
  it('a ramp without "acknowledgeDestructive": true is refused naming the field, and the instrument receives no source command', async () => {
    const { inst, devices } = await instruments((n) => new SimulatedSmu({ device: WEAROUT.device, seed: 500 + n, realTime: false }));
    const dir = tempDir();
    const cfg = writeConfig(dir, { instrument: inst, limits: LIMITS, analysis: { model: 'fowler-nordheim', window: 'auto', inputs: WEAROUT.device.inputs } });
    const d = await startDaemon(['--config', cfg, '--data', join(dir, 'data')]);
    cleanups.push(() => d.stop());
    const plan = { kind: 'voltage-ramp', start: 7, stop: 13, step: 0.05, stepTime: 0.005, compliance: 0.01 };
    for (const body of [{ plan }, { plan, acknowledgeDestructive: false }]) {
      const r = await api(d.url, 'POST', '/api/run', body);
      expect(r.status).toBe(400);
      expect(r.json.error).toMatch(/field 'acknowledgeDestructive'.*voltage ramp 7 V → 13 V.*destroying the device/);
    }
    // A string is not an acknowledgement: the body's schema refuses it.
    expect((await api(d.url, 'POST', '/api/run', { plan, acknowledgeDestructive: 'yes' })).status).toBe(400);
    // At the instrument's end of the wire: nothing was sourced and no output went on.
    const sent = devices.flatMap((x) => x.received.map((r) => r.line));
    expect(sent.filter((l) => /:SOUR|OUTP(UT)?(:STAT(E)?)? +(ON|1)/i.test(l))).toEqual([]);
    expect(devices.every((x) => !x.output)).toBe(true);
    expect((await api(d.url, 'GET', '/api/status')).json.running).toBe(false);
    // A sweep needs no acknowledgement; the same ramp with it runs to breakdown and ends with the output off.
    const sweep = await api(d.url, 'POST', '/api/run', { plan: { kind: 'linear', start: 0, stop: 2, points: 5, compliance: 1e-3 } });
    expect(sweep.status, JSON.stringify(sweep.json)).toBe(201);
    for (let k = 0; k < 500 && (await api(d.url, 'GET', '/api/status')).json.running; k++) await new Promise((res) => setTimeout(res, 20));
    const ramp = await api(d.url, 'POST', '/api/run', { plan, acknowledgeDestructive: true });
    expect(ramp.status, JSON.stringify(ramp.json)).toBe(201);
    for (let k = 0; k < 2000 && (await api(d.url, 'GET', '/api/status')).json.running; k++) await new Promise((res) => setTimeout(res, 20));
    expect(devices.at(-1)?.device.breakdown).toBeDefined();
    expect(devices.every((x) => !x.output)).toBe(true);
  }, 60_000);
});

describe('a lot ramped to breakdown, then weibull', () => {
  it("30 devices through the station; the Weibull fit of Q_bd brackets the simulator's shape and scale", async () => {
    // No field acceleration: then the charge a device passes before it breaks is its own Weibull
    // draw whatever the ramp, so the simulator's β and η are the truth the fit must bracket.
    const spec = { ...WEAROUT.device, wearout: { shape: 2, chargeScale: 2000, referenceField: 1.4e9, fieldAcceleration: 0, referenceArea: 1e-8 } };
    const { inst, devices } = await instruments((n) => new SimulatedSmu({ device: spec, seed: 1000 + n, realTime: false }));
    const dir = tempDir();
    const data = join(dir, 'data');
    const cfg = writeConfig(dir, { instrument: inst, limits: LIMITS, analysis: { model: 'fowler-nordheim', window: 'auto', inputs: WEAROUT.device.inputs } });
    const d = await startDaemon(['--config', cfg, '--data', data]);
    cleanups.push(() => d.stop());
    for (let n = 1; n <= 30; n++) {
      const plan = {
        kind: 'voltage-ramp',
        start: 7,
        stop: 13,
        step: 0.05,
        stepTime: 0.005,
        compliance: 0.01,
        device: { device: `D${n}`, wafer: 'PL-11', site: `S${n}` },
      };
      const start = await api(d.url, 'POST', '/api/run', { plan, acknowledgeDestructive: true });
      expect(start.status, JSON.stringify(start.json)).toBe(201);
      for (let k = 0; k < 2000 && (await api(d.url, 'GET', '/api/status')).json.running; k++) await new Promise((res) => setTimeout(res, 20));
    }
    expect(devices.filter((x) => x.device.breakdown).length).toBe(30);
    const w = runCli(['weibull', data, '--quantity', 'charge', '--json']);
    expect(w.code, w.stderr).toBe(0);
    const fit = JSON.parse(w.stdout);
    expect(fit.n).toBe(30);
    expect(fit.failures).toBe(30);
    // Two checks. The simulated devices' own charges are a sample of the simulator's Weibull
    // (β = 2, η = 2000 C/m²): its maximum-likelihood bounds bracket them (fixed seeds, so this is
    // the same sample every run). The lot measured through the station brackets that sample's own
    // estimates: timing stalls move single devices' Q_bd by a few per cent, which must not move
    // the fit outside its bounds (the population bracket alone sat 0.08 inside the bound with
    // these seeds, so a stall could tip it).
    const own = analyzeWeibull({ values: devices.map((x) => x.device.breakdown!.charge) });
    expect(own.shape.low).toBeLessThan(2);
    expect(own.shape.high).toBeGreaterThan(2);
    expect(own.scale.low).toBeLessThan(2000);
    expect(own.scale.high).toBeGreaterThan(2000);
    expect(fit.shape.low, JSON.stringify(fit.shape)).toBeLessThan(own.shape.value);
    expect(fit.shape.high, JSON.stringify(fit.shape)).toBeGreaterThan(own.shape.value);
    expect(fit.scale.low).toBeLessThan(own.scale.value);
    expect(fit.scale.high).toBeGreaterThan(own.scale.value);
    // And each device's measured charge is its own, roughly: with 0.05 V steps of 5 ms the
    // breakdown step's half-step estimate is good to a few per cent, but a stall of a loaded
    // machine inside that step stretches it; this guards against gross errors (units, the wrong
    // reading: within a factor of two), the Weibull bracket above is the check of the statistics.
    const truths = devices.map((x) => x.device.breakdown!.charge);
    const rows = fit.points.map((p: { x: number }) => p.x).sort((a: number, b: number) => a - b);
    const sortedTruth = [...truths].sort((a, b) => a - b);
    rows.forEach((x: number, k: number) => expect(Math.abs(Math.log(x / sortedTruth[k]))).toBeLessThan(Math.LN2));
  }, 180_000);
});

/** An adaptive plan run by the built CLI on a scenario's device over the real station path. */
async function adaptiveStation(scenario: string, seed: number, plan: Record<string, unknown>) {
  const sc = findScenario(scenario);
  const { inst, devices } = await instruments(() => new SimulatedSmu({ device: sc.device, seed, realTime: false }));
  const dir = tempDir();
  const cfg = writeConfig(dir, { instrument: inst, plan, analysis: { model: 'fowler-nordheim', window: 'auto', inputs: sc.device.inputs } });
  const r = await runCliAsync(['run', '--config', cfg, '--data', join(dir, 'data'), '--json']);
  return { sc, devices, r, res: JSON.parse(r.stdout) };
}

describe('adaptive sweeps', () => {
  it('pins the barrier to its target with far fewer readings than the fixed sweep, and reports the figures', async () => {
    const plan = { kind: 'adaptive', start: 0, stop: 10, maxPoints: 200, compliance: 1e-3, repeat: 3, target: { parameter: 'barrierHeight', stdErr: 0.01 } };
    const { sc, devices, r, res } = await adaptiveStation('oxide-fn', 5, plan);
    expect(r.code, r.stderr).toBe(0);
    const a = res.adaptive;
    expect(a.sweeps).toHaveLength(3);
    for (const s of a.sweeps) {
      expect(s.stopReason).toBe('target-reached');
      expect(s.parameter.stdErr).toBeLessThanOrEqual(0.01);
      // The scenario's device: 3.1 eV (its own parameter), within the ±0.05 eV engineering tolerance.
      expect(Math.abs(s.parameter.value - sc.device.params.barrierHeight)).toBeLessThan(0.05);
      expect(s.maxAbsBias).toBeLessThanOrEqual(10);
      expect(s.charge).toBeGreaterThan(0);
    }
    // Later sweeps skip the floor: fewer readings than the first.
    expect(a.sweeps[1].readings).toBeLessThan(a.sweeps[0].readings);
    expect(a.readings).toBe(a.sweeps.reduce((x: number, s: { readings: number }) => x + s.readings, 0));
    // What reached the instrument matches the figures.
    expect(devices[0].log.filter((l) => l === ':READ?').length).toBe(a.readings);
    const ev = events(res.dir).filter((e) => e.type === 'adaptive-sweep');
    expect(ev).toHaveLength(3);
  });

  it('a run the drift watch aborts keeps the aborted sweep in its figures: readings and charge as the instrument served them', async () => {
    // The trapping oxide's barrier rises with every reading: the drift watch ends the run after its
    // baseline. The last sweep's figures count as every other's.
    const plan = { kind: 'adaptive', start: 0, stop: 9, maxPoints: 200, compliance: 1e-3, repeat: 15, target: { parameter: 'barrierHeight', stdErr: 0.001 } };
    const { devices, r, res } = await adaptiveStation('oxide-fn-trapping', 7, plan);
    expect(res.outcome, r.stderr).toBe('aborted-drift');
    // At the instrument's end of the wire: output off, OUTP OFF the last output command it got.
    expect(devices[0].output).toBe(false);
    expect(devices[0].log.filter((l) => l === ':OUTP ON' || l === ':OUTP OFF').at(-1)).toBe(':OUTP OFF');
    const a = res.adaptive;
    const sweeps = new Set(events(res.dir).flatMap((e) => (e.type === 'reading' ? [e.sweep] : [])));
    expect(a.sweeps).toHaveLength(sweeps.size);
    expect(a.readings).toBe(devices[0].log.filter((l) => l === ':READ?').length);
    // The journal holds every sweep's figures too (the cut one journaled once the output was off).
    expect(events(res.dir).filter((e) => e.type === 'adaptive-sweep')).toHaveLength(sweeps.size);
  });

  it('a target the fit does not give is refused before anything is sent (exit 2, naming the field and what the fit gives)', async () => {
    const sc = findScenario('oxide-fn');
    const { inst, devices } = await instruments(() => new SimulatedSmu({ device: sc.device, seed: 6, realTime: false }));
    const dir = tempDir();
    const plan = { kind: 'adaptive', start: 0, stop: 10, maxPoints: 200, compliance: 1e-3, repeat: 3, target: { parameter: 'barierHeight', stdErr: 0.01 } };
    const cfg = writeConfig(dir, { instrument: inst, plan, analysis: { model: 'fowler-nordheim', window: 'auto', inputs: sc.device.inputs } });
    const r = await runCliAsync(['run', '--config', cfg, '--data', join(dir, 'data'), '--json']);
    expect(r.code, r.stdout).toBe(2);
    expect(r.stderr + r.stdout).toMatch(
      /field 'target.parameter': 'barierHeight' is not a parameter of the fowler-nordheim fit \(it gives barrierHeight, leakageResistance\)/,
    );
    // Nothing reached the instrument: refused before it was even opened (no output on, no reading).
    expect(devices.flatMap((d) => d.log.filter((l) => l === ':OUTP ON' || l === ':READ?'))).toEqual([]);
    expect(devices.every((d) => !d.output)).toBe(true);
    // A term fitted beside the line is a target the plan may name.
    const ok = writeConfig(dir, {
      instrument: inst,
      plan: { ...plan, repeat: 1, maxPoints: 30, target: { parameter: 'leakageResistance', stdErr: 1 } },
      analysis: { model: 'fowler-nordheim', window: 'auto', inputs: sc.device.inputs },
    });
    const r2 = await runCliAsync(['run', '--config', ok, '--data', join(dir, 'data2'), '--json']);
    expect(r2.stderr).not.toMatch(/is not a parameter/);
  });
});
