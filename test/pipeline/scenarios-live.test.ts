/**
 * Every built-in scenario run live, the way a station runs it: the simulated instrument (its noise,
 * autoranging, compliance) driven through the real dialect, SCPI session, driver, safety guard and
 * runner, every reading through the live chain with its defaults — the automatic window, the
 * breakdown watch and the drift chart. The numbers each sweep reports must match the scenario's own
 * device within the tolerances a device engineer quotes (barriers ±0.05 eV, ε_r ±10 %, ideality
 * ±0.05, mobility ±30 %; common practice), in nearly every sweep, with no false breakdown or drift
 * alarm; a real breakdown is caught in the sweep where it happens.
 */
import { mkdtempSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { loadDialect } from '../../protocols/dialect.js';
import { ScpiSession } from '../../protocols/scpi-session.js';
import { duplexPair } from '../../protocols/transport.js';
import type { WireEvent } from '../../protocols/wire.js';
import { SmuDriver } from '../../daemon/instrument/smu-driver.js';
import { JournalWriter } from '../../daemon/journal/journal.js';
import { LiveChain } from '../../daemon/pipeline/chain.js';
import { analysisSchema, breakdownSchema, driftSchema } from '../../daemon/pipeline/settings.js';
import { GuardedSource, limitsSchema } from '../../daemon/run/guard.js';
import { parsePlan } from '../../daemon/run/plan.js';
import { RunController } from '../../daemon/run/runner.js';
import { SimulatedSmu } from '../../daemon/simulator/instrument.js';
import { findScenario } from '../../daemon/simulator/scenarios.js';
import { attachInstrument } from '../../daemon/simulator/serve.js';

interface Run {
  outcome: string;
  fits: { sweep: number; parameters: Record<string, { value: number; stdErr: number }>; plausible: boolean; warnings: readonly string[] }[];
  cautions: { kind: string; sweep?: number; message: string }[];
}

async function runScenario(
  name: string,
  sweeps: number,
  seed: number,
  plan?: Record<string, unknown>,
  during?: (chain: LiveChain, e: WireEvent) => void,
): Promise<Run & { drift: { sweep: number; parameter: string; phase: string }[] }> {
  const sc = findScenario(name);
  const smu = new SimulatedSmu({ device: sc.device, seed, realTime: false });
  const [client, inst] = duplexPair();
  attachInstrument(smu, inst);
  const session = new ScpiSession(client);
  const { writer } = JournalWriter.create(mkdtempSync(join(tmpdir(), 'plumbline-scenario-')), name);
  const window = sc.analysis.from !== undefined || sc.analysis.to !== undefined ? { from: sc.analysis.from, to: sc.analysis.to } : 'auto';
  const chain = new LiveChain({
    journal: writer,
    analysis: analysisSchema.parse({ model: sc.analysis.model, window, inputs: sc.device.inputs }),
    drift: driftSchema.parse({}),
    breakdown: breakdownSchema.parse({}),
    complianceLimit: sc.sweep.compliance,
    hazardVoltage: 30,
  });
  const run: Run & { drift: { sweep: number; parameter: string; phase: string }[] } = { outcome: '', fits: [], cautions: [], drift: [] };
  chain.events$.subscribe((e: WireEvent) => {
    during?.(chain, e);
    if (e.type === 'drift') run.drift.push({ sweep: e.sweep, parameter: e.parameter, phase: e.phase });
    if (e.type === 'fit' && e.final && e.fit)
      run.fits.push({ sweep: e.sweep, parameters: e.fit.parameters, plausible: e.fit.plausible, warnings: e.fit.warnings });
    if (e.type === 'caution') run.cautions.push({ kind: e.kind, sweep: e.sweep, message: e.message });
  });
  const source = new GuardedSource(
    new SmuDriver(session, loadDialect('protection-trip')),
    limitsSchema.parse({ maxVoltage: 20, maxCompliance: 1, maxPower: 1, rampDelay: 0 }),
  );
  const { start, stop, points, compliance } = sc.sweep;
  const c = new RunController(source, chain, parsePlan({ start, stop, points, compliance, repeat: sweeps, ...plan }));
  const r = await c.execute();
  run.outcome = r.outcome;
  session.close();
  return run;
}

/** Per scenario: the parameter the live fit must match, its true value and the tolerance. */
const CHECKS: { scenario: string; key: string; truth: number; tol: number; relative?: boolean }[] = [
  { scenario: 'oxide-fn', key: 'barrierHeight', truth: 3.1, tol: 0.05 },
  { scenario: 'nitride-pf', key: 'relativePermittivity', truth: 4.0, tol: 0.1, relative: true },
  { scenario: 'highk-schottky', key: 'barrierHeight', truth: 0.9, tol: 0.05 },
  { scenario: 'highk-schottky', key: 'relativePermittivity', truth: 4.0, tol: 0.1, relative: true },
  { scenario: 'oxide-tat', key: 'trapEnergy', truth: 1.2, tol: 0.05 },
  { scenario: 'film-hopping', key: 'hoppingDistance', truth: 2e-9, tol: 0.1, relative: true },
  { scenario: 'organic-sclc', key: 'mobility', truth: 1e-8, tol: 0.3, relative: true },
  { scenario: 'si-diode', key: 'idealityFactor', truth: 1.2, tol: 0.05 },
];

const SWEEPS = 8;
const ALARMS = ['breakdown-suspected', 'breakdown-confirmed', 'drift-warning', 'drift-limit'];

describe('built-in scenarios, live, with the default analysis', () => {
  const scenarios = [...new Set(CHECKS.map((c) => c.scenario))];
  for (const name of scenarios) {
    it(`${name}: the live numbers match the device in nearly every sweep, and no false alarm`, async () => {
      const run = await runScenario(name, SWEEPS, 21);
      expect(run.outcome).toBe('completed');
      expect(run.cautions.filter((c) => ALARMS.includes(c.kind)).map((c) => `${c.kind} in sweep ${c.sweep}: ${c.message}`)).toEqual([]);
      expect(run.fits.length).toBe(SWEEPS);
      for (const check of CHECKS.filter((c) => c.scenario === name)) {
        const off = run.fits.filter((f) => {
          const p = f.parameters[check.key];
          if (!p || !f.plausible) return true;
          const err = check.relative ? p.value / check.truth - 1 : p.value - check.truth;
          return Math.abs(err) > check.tol;
        });
        const shown = run.fits
          .map((f) => `${f.sweep}: ${f.parameters[check.key]?.value.toPrecision(4)}${f.plausible ? '' : ` (implausible: ${f.warnings.join('; ')})`}`)
          .join(', ');
        expect(off.length, `${check.key}: ${shown}`).toBeLessThanOrEqual(1);
      }
    });
  }

  it('a coarse 1 V-step Fowler–Nordheim sweep rising out of the floor into compliance is not called breakdown', async () => {
    const run = await runScenario('oxide-fn', 4, 5, { start: 0, stop: 10, points: 11 });
    expect(run.outcome).toBe('completed');
    expect(run.cautions.filter((c) => c.kind.startsWith('breakdown')).map((c) => c.message)).toEqual([]);
  });

  it('a change of model in the middle of a sweep raises no breakdown caution (the watch starts its trend again in the new plot)', async () => {
    // The breakdown watch follows the sweep on the mechanism's own plot; after a switch from
    // ln(J/E²) against 1/E to ln(J/E) against √E the old trend must not be extrapolated into the new.
    const run = await runScenario('oxide-fn', 3, 4, undefined, (chain, e) => {
      if (e.type === 'reading' && e.sweep === 2 && e.k === 60)
        chain.setAnalysis(analysisSchema.parse({ model: 'poole-frenkel', inputs: findScenario('oxide-fn').device.inputs }), 'test');
    });
    expect(run.outcome).toBe('completed');
    expect(run.cautions.filter((c) => c.kind.startsWith('breakdown')).map((c) => c.message)).toEqual([]);
  });

  it('a change of model mid-run starts a new drift baseline (a trap energy is never charted against a barrier)', async () => {
    const run = await runScenario('oxide-fn', 9, 9, undefined, (chain, e) => {
      if (e.type === 'sweep-start' && e.sweep === 4)
        chain.setAnalysis(analysisSchema.parse({ model: 'trap-assisted-tunneling', inputs: findScenario('oxide-fn').device.inputs }), 'test');
    });
    expect(run.outcome).toBe('completed');
    const after = run.drift.filter((d) => d.sweep >= 4);
    expect(after.every((d) => d.parameter === 'trapEnergy')).toBe(true);
    // Five sweeps of new baseline (the default), then monitoring: no carry-over from the barrier.
    expect(after.slice(0, 5).every((d) => d.phase === 'baseline')).toBe(true);
    expect(after.slice(5).every((d) => d.phase === 'monitor')).toBe(true);
    expect(run.cautions.filter((c) => c.kind.startsWith('drift'))).toEqual([]);
  });

  it('a film that breaks down is caught in the sweep where it breaks, and the run aborted', async () => {
    const run = await runScenario('oxide-breakdown', 3, 7);
    expect(run.outcome).toBe('aborted-breakdown');
    const confirmed = run.cautions.find((c) => c.kind === 'breakdown-confirmed');
    expect(confirmed?.sweep).toBe(1);
    expect(run.cautions.filter((c) => c.kind === 'breakdown-suspected')).toEqual([]);
  });
});
