/**
 * The runner's exit paths against the in-process simulator: an abort that lands at any moment —
 * during configuration, while output-on is in flight, mid-sweep, during the final ramp — leaves the
 * output off, with output off as the last output command on the wire (common practice: output off
 * on every exit path; the property the safety guard exists for).
 */
import { mkdtempSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { loadDialect } from '../../protocols/dialect.js';
import { ScpiSession } from '../../protocols/scpi-session.js';
import { duplexPair } from '../../protocols/transport.js';
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

async function runAndAbortAfter(ticks: number) {
  const smu = new SimulatedSmu({ device: findScenario('oxide-fn').device, seed: ticks, realTime: false });
  const [client, inst] = duplexPair();
  attachInstrument(smu, inst);
  const session = new ScpiSession(client);
  const { writer } = JournalWriter.create(mkdtempSync(join(tmpdir(), 'plumbline-runner-')), 'abort');
  const chain = new LiveChain({
    journal: writer,
    analysis: analysisSchema.parse({ model: 'ohmic', window: 'all' }),
    drift: driftSchema.parse({ enabled: false }),
    breakdown: breakdownSchema.parse({}),
    hazardVoltage: 30,
  });
  const source = new GuardedSource(
    new SmuDriver(session, loadDialect('protection-trip')),
    limitsSchema.parse({ maxVoltage: 20, maxCompliance: 0.01, maxPower: 1, rampDelay: 0 }),
  );
  const c = new RunController(source, chain, parsePlan({ start: 0, stop: 5, points: 6, repeat: 2, compliance: 1e-3 }));
  const done = c.execute();
  for (let k = 0; k < ticks; k++) await new Promise((r) => setImmediate(r));
  c.abort('test abort');
  const r = await done;
  await new Promise((r2) => setTimeout(r2, 20));
  session.close();
  return { r, smu };
}

describe('runner: abort at any moment', () => {
  it('leaves the output off, with OUTP OFF the last output command on the wire (60 abort moments)', async () => {
    const outcomes = new Set<string>();
    for (let ticks = 0; ticks < 60; ticks++) {
      const { r, smu } = await runAndAbortAfter(ticks);
      outcomes.add(r.outcome);
      expect(smu.output, `abort after ${ticks} ticks`).toBe(false);
      const outputCommands = smu.log.filter((l) => /^:OUTP (ON|OFF)$/.test(l));
      expect(outputCommands.at(-1), `abort after ${ticks} ticks`).toBe(':OUTP OFF');
    }
    expect(outcomes.has('aborted-user')).toBe(true);
  });
});
