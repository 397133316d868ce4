/**
 * Breakdown tests on the built-in simulator in fast mode: the test's own waits (a ramp's step
 * time, a stress's sampling interval) pass at once on the simulator's clock, and the journal is
 * timed on that clock, so the results are the simulated device's: its charge to breakdown (within
 * 5 % or the result's stated uncertainty, as on a real-time run) and the ramp rate of the plan.
 * Real parts: the station, guard, driver and SCPI session against the simulated instrument.
 */
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { scanJournal } from '../../daemon/journal/reader.js';
import { renderReport } from '../../daemon/journal/report.js';
import { loadSession } from '../../daemon/journal/sessions.js';
import { parseConfig } from '../../daemon/run/config.js';
import { Station } from '../../daemon/run/station.js';
import type { WireEvent } from '../../protocols/wire.js';
import { tempDir } from '../helpers/daemon.js';

/** A station on the fast simulator (seed 3) with a fresh data folder. */
function fastStation(scenario = 'oxide-wearout'): Station {
  return new Station(
    parseConfig(
      {
        instrument: { kind: 'simulator', scenario, realTime: false, seed: 3 },
        limits: { maxVoltage: 20, maxCompliance: 0.02, maxPower: 0.5, rampStep: 10 },
      },
      'test',
    ),
    join(tempDir(), 'data'),
  );
}

async function runTest(plan: Record<string, unknown>, scenario = 'oxide-wearout') {
  const st = fastStation(scenario);
  const h = await st.startRun({ plan });
  const r = await h.done;
  const events: WireEvent[] = [];
  const readings: number[] = [];
  scanJournal(h.dir, (e) => (e.type === 'reading' ? void readings.push(e.t) : void events.push(e)));
  const sim = st.simulator!;
  return { r, events, readings, sim, result: events.find((e) => e.type === 'test-result') };
}

describe('breakdown tests on a fast simulator', () => {
  it("a voltage ramp at 1 V/s: held on the simulator's clock, Q_bd the device's own, the planned rate achieved", async () => {
    const { r, readings, sim, result } = await runTest({ kind: 'voltage-ramp', start: 0, stop: 15, step: 0.1, stepTime: 0.1, compliance: 0.01 });
    expect(r.outcome).toBe('completed');
    expect(result?.type).toBe('test-result');
    if (result?.type !== 'test-result') return;
    expect(result.outcome).toBe('breakdown');
    const truth = sim.device.breakdown!;
    expect(truth).toBeDefined();
    const q = result.result.chargeToBreakdown as number;
    const u = result.numbers?.chargeUncertainty ?? 0;
    expect(Math.abs(q - truth.charge), `Q_bd ${q} against the device's ${truth.charge} C/m² (stated ± ${u})`).toBeLessThanOrEqual(
      Math.max(0.05 * truth.charge, 2 * u),
    );
    // The hold times passed on the simulator's clock: one step time per level.
    const levels = Math.round((result.result.breakdownVoltage as number) / 0.1) + 1;
    expect(sim.elapsedAtOnce).toBeGreaterThanOrEqual(0.9 * levels * 0.1);
    // The journal's times are the simulated ones: readings about 0.1 s apart (a stall of the
    // computer adds its own milliseconds to single gaps), the levels 0.1 s apart set to set.
    const gaps = readings
      .slice(1)
      .map((t, k) => (t - readings[k]) / 1000)
      .sort((a, b) => a - b);
    expect(gaps[gaps.length >> 1]).toBeCloseTo(0.1, 2);
    expect(result.numbers?.stepPeriod).toBeCloseTo(0.1, 2);
    expect(result.numbers?.rampRate).toBeCloseTo(1, 1);
  });

  it("a constant-voltage stress of 2,000 s sampled every 0.5 s passes on the simulator's clock; t_bd and Q_bd are the device's", async () => {
    const { r, sim, result, events } = await runTest({ kind: 'constant-voltage', stress: 9, duration: 2000, sampleEvery: 0.5, compliance: 0.01 });
    expect(r.outcome).toBe('completed');
    // The stress interval is not a current–voltage sweep: no fit, even though the breakdown
    // reading's bias collapsed at compliance (a fit through it had given a 'barrier' with warnings).
    const finals = events.filter((e) => e.type === 'fit' && e.final);
    expect(finals.length).toBeGreaterThan(0);
    for (const f of finals) if (f.type === 'fit') expect(f.fit, f.error).toBeNull();
    if (result?.type !== 'test-result') throw new Error('no test result');
    expect(result.outcome).toBe('breakdown');
    const truth = sim.device.breakdown!;
    const q = result.result.chargeToBreakdown as number;
    const u = result.numbers?.chargeUncertainty ?? 0;
    expect(Math.abs(q - truth.charge), `Q_bd ${q} against ${truth.charge} (± ${u})`).toBeLessThanOrEqual(Math.max(0.05 * truth.charge, 2 * u));
    // Breakdown is seen at the first reading after it: within one sampling interval of the device's time.
    const t = result.result.timeToBreakdown as number;
    expect(t).toBeGreaterThanOrEqual(truth.time - 1e-6);
    expect(t - truth.time).toBeLessThanOrEqual(0.5 + 0.05);
  });

  it('a healthy film whose tunnelling current reaches the compliance with the bias held has not broken down: the ramp ends there, survived', async () => {
    // oxide-fn has no breakdown in its physics: its Fowler–Nordheim current simply grows until the
    // source limits it. Compliance with the bias held is not a breakdown criterion (JEDEC JESD35-A
    // counts compliance only with the bias collapsing).
    const { r, events, sim, result } = await runTest({ kind: 'voltage-ramp', start: 0, stop: 16, step: 0.1, stepTime: 0.05, compliance: 1e-3 }, 'oxide-fn');
    expect(r.outcome).toBe('completed');
    if (result?.type !== 'test-result') throw new Error('no test result');
    expect(result.outcome).toBe('survived');
    expect(result.result.criterion).toBe('compliance-held');
    expect(result.reason).toMatch(/no breakdown seen: the current reached the .* A compliance at [\d.]+ V with the bias held/);
    expect(events.some((e) => e.type === 'caution' && e.kind === 'breakdown-confirmed')).toBe(false);
    // The ramp went no higher than the level that reached compliance, and the output is off.
    const levels = sim.log.filter((l) => l.startsWith(':SOUR:VOLT ')).map((l) => Number(l.split(' ')[1]));
    expect(Math.max(...levels)).toBeCloseTo(result.result.breakdownVoltage as number, 9);
    expect(Math.max(...levels)).toBeLessThan(16);
    expect(sim.output).toBe(false);
  });

  it('a stress the device does not survive to its first reading reports t_bd and Q_bd as upper bounds', async () => {
    // 12 V on the 7 nm film (17 MV/cm) breaks it at once.
    const { result } = await runTest({ kind: 'constant-voltage', stress: 12, duration: 100, sampleEvery: 1, compliance: 0.01 });
    if (result?.type !== 'test-result') throw new Error('no test result');
    expect(result.outcome).toBe('breakdown');
    expect(result.reason).toMatch(/at the first reading, so t_bd and Q_bd are upper bounds/);
  });
});

describe("a breakdown test's progress: the time left from the plan's own timing", () => {
  const progress = (events: WireEvent[]) => events.filter((e): e is Extract<WireEvent, { type: 'progress' }> => e.type === 'progress');

  it('a voltage ramp with use-condition checks: the levels to come × the step time, the points of the phase under way', async () => {
    // 0 → 15 V in 0.1 V steps of 0.1 s: 151 levels, 15.1 s of ramp (worked out in test/run/eta.test.ts).
    const { events } = await runTest({ kind: 'voltage-ramp', start: 0, stop: 15, step: 0.1, stepTime: 0.1, compliance: 0.01, useVoltage: 1 });
    const labels = new Map(events.flatMap((e) => (e.type === 'sweep-start' ? [[e.sweep, e.label] as const] : [])));
    const ps = progress(events);
    expect(ps.length).toBeGreaterThan(0);
    for (const p of ps) {
      const label = labels.get(p.sweep) ?? '';
      if (label.startsWith('use-condition check before')) {
        expect(p.points).toBe(1);
        expect(p.eta).toBeCloseTo(15.1, 9);
      } else if (label.startsWith('voltage ramp')) {
        expect(p.points).toBe(151);
        expect(p.eta).toBeCloseTo((151 - p.point) * 0.1, 9);
      } else expect(p.eta).toBe(0);
    }
  });

  it('a constant-voltage stress with sense sweeps: the stress time the duration has left, the points of the interval, no jumps', async () => {
    // 300 s at 7 V (the film holds) sampled every second, a sense sweep every 100 s: an interval is
    // the reading at its start and 100 more, not the 301 readings of the whole stress.
    const { events, result } = await runTest({
      kind: 'constant-voltage',
      stress: 7,
      duration: 300,
      sampleEvery: 1,
      compliance: 0.01,
      sense: { start: 0, stop: 2, points: 5, every: 100 },
    });
    if (result?.type !== 'test-result') throw new Error('no test result');
    expect(result.outcome).toBe('survived');
    const labels = new Map(events.flatMap((e) => (e.type === 'sweep-start' ? [[e.sweep, e.label] as const] : [])));
    const ps = progress(events);
    expect(ps.some((p) => /^stress at/.test(labels.get(p.sweep) ?? ''))).toBe(true);
    for (const p of ps) {
      const label = labels.get(p.sweep) ?? '';
      const from = /^stress at 7 V from ([\d.]+) s$/.exec(label);
      if (from) {
        expect(p.points).toBe(101);
        // Readings a second of stress apart on the simulator's clock, the interval's first at its
        // start: within half a sampling interval (command times add to the clock).
        expect(Math.abs((p.eta as number) - (300 - Number(from[1]) - (p.point - 1)))).toBeLessThan(0.5);
      } else expect(p.points).toBe(5);
    }
    // The estimate only falls as the test goes on.
    const etas = ps.map((p) => p.eta as number);
    for (let k = 1; k < etas.length; k++) expect(etas[k]).toBeLessThanOrEqual(etas[k - 1] + 1e-9);
  });
});

describe('a breakdown test of negative polarity', () => {
  it('a voltage ramp to −15 V: the ramp sweep gets its live fit, the results row says negative, Q_bd the device’s own', async () => {
    const { r, events, sim, result } = await runTest({ kind: 'voltage-ramp', start: 0, stop: -15, step: 0.1, stepTime: 0.1, compliance: 0.01 });
    expect(r.outcome).toBe('completed');
    if (result?.type !== 'test-result') throw new Error('no test result');
    expect(result.outcome).toBe('breakdown');
    expect(result.result.polarity).toBe('negative');
    // Breakdown figures are magnitudes, as the standard states them; the polarity column carries the sign.
    expect(result.result.breakdownVoltage as number).toBeGreaterThan(0);
    const truth = sim.device.breakdown!;
    const q = result.result.chargeToBreakdown as number;
    expect(Math.abs(q - truth.charge) / truth.charge).toBeLessThanOrEqual(Math.max(0.05, 2 * ((result.numbers?.chargeUncertainty ?? 0) / truth.charge)));
    // The ramp's sweep was fitted live on its negative branch (the scenario's window is automatic):
    // the simulated film's barrier (3.1 eV) within 3 stated σ.
    const fits = events.filter((e) => e.type === 'fit' && e.final && e.fit);
    expect(fits.length).toBeGreaterThan(0);
    const b = (fits[0] as Extract<WireEvent, { type: 'fit' }>).fit?.parameters.barrierHeight;
    expect(b).toBeDefined();
    expect(Math.abs((b?.value as number) - 3.1)).toBeLessThanOrEqual(3 * (b?.stdErr as number));
  });

  it('each named device is a device of its own on the simulated chuck (its own Weibull-drawn endurance); a name comes back the same', async () => {
    const st = fastStation();
    const plan = { kind: 'voltage-ramp', start: 0, stop: 15, step: 0.1, stepTime: 0.1, compliance: 0.01 };
    const endurance = async (device?: Record<string, unknown>) => {
      const h = await st.startRun({ plan: { ...plan, ...(device ? { device } : {}) } });
      await h.done;
      return st.simulator?.device.endurance as number;
    };
    const a = await endurance({ device: 'D1', wafer: 'W1', site: 'A1' });
    const b = await endurance({ device: 'D2', wafer: 'W1', site: 'A2' });
    const again = await endurance({ device: 'D1', wafer: 'W1', site: 'A1' });
    // Without a name the probe has not moved: the device just measured.
    const unnamed = await endurance();
    expect(b).not.toBe(a);
    expect(again).toBe(a);
    expect(unnamed).toBe(a);
  }, 30_000);
});

describe('a current ramp on a device that already conducts', () => {
  it('is an initial failure at the first level, not a "collapse" of microvolts, and the output goes off', async () => {
    // The film on the chuck is broken first by a voltage ramp; a current ramp then finds a short:
    // microvolts at a nanoampere, whose noise "falling by a tenth" had been taken for a breakdown.
    const st = fastStation();
    const first = await st.startRun({ plan: { kind: 'voltage-ramp', start: 0, stop: 15, step: 0.1, stepTime: 0.1, compliance: 0.01 } });
    await first.done;
    expect(st.simulator?.device.breakdown).toBeDefined();
    const h = await st.startRun({ plan: { kind: 'current-ramp', start: 1e-9, stop: 1e-3, stepTime: 0.05, voltageLimit: 14 } });
    const r = await h.done;
    expect(r.outcome).toBe('completed');
    const events: WireEvent[] = [];
    let readings = 0;
    scanJournal(h.dir, (e) => (e.type === 'reading' ? void readings++ : void events.push(e)));
    const result = events.find((e) => e.type === 'test-result');
    if (result?.type !== 'test-result') throw new Error('no test result');
    expect(result.outcome).toBe('initial-failure');
    expect(result.reason).toMatch(/held only .* V at the first current level .* it already conducts/);
    expect(readings).toBe(1);
    // At the instrument: the output was turned off and left off.
    const outputs = (st.simulator?.log ?? []).filter((l) => /^:OUTP(:STAT)? /.test(l));
    expect(outputs[outputs.length - 1]).toMatch(/OFF|0$/);
  });
});

describe('the use-condition check after a breakdown', () => {
  it('a reading clipped at compliance is not recorded as the leakage after: left empty, and the result says why', async () => {
    // After breakdown the film conducts: at 2 V it draws more than the check's compliance, the
    // source cannot hold the bias, and the reading is the compliance itself, not a leakage.
    const { result } = await runTest(
      { kind: 'voltage-ramp', start: 0, stop: 12, step: 0.05, stepTime: 0.05, compliance: 0.001, useVoltage: 2 },
      'oxide-breakdown',
    );
    if (result?.type !== 'test-result') throw new Error('no test result');
    expect(result.outcome).toBe('breakdown');
    expect(result.result.leakageBefore).toBeDefined();
    expect(result.result.leakageAfter).toBeUndefined();
    expect(result.reason).toMatch(/the use-condition check after the test reached the compliance .* leakage_after is left empty/);
  });
});

describe('the session report of a constant-voltage stress', () => {
  it('draws each stress interval as current against time, and each sense sweep against the bias', async () => {
    const st = fastStation();
    const h = await st.startRun({
      plan: { kind: 'constant-voltage', stress: 7, duration: 120, sampleEvery: 1, compliance: 0.01, sense: { start: 0, stop: 2, points: 5, every: 60 } },
    });
    await h.done;
    const html = renderReport(loadSession(h.dir));
    // Two stress intervals (before and after the sense sweep at 60 s), each against time.
    expect(html.match(/held at 7 V: current against time/g)?.length).toBeGreaterThanOrEqual(2);
    expect(html).toContain('time since the interval began (s)');
    // The sense sweep (0 → 2 V) is a current–voltage curve, drawn against the bias.
    expect(html).toMatch(/Sweep \d+: sense sweep 0 → 2 V/);
    expect(html).toContain('bias V (V)');
  });
});
