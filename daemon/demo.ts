/** The `plumbline demo` command (what `npm start` runs until the station daemon lands). */
import { analyze } from './analysis/analyze.js';
import { rankMechanisms } from './analysis/ranking.js';
import { formatFit, formatRanking } from './cli/format.js';
import { loadDialect } from '../protocols/dialect.js';
import { formatFixed } from '../protocols/number-format.js';
import { ScpiSession } from '../protocols/scpi-session.js';
import { duplexPair } from '../protocols/transport.js';
import { SmuDriver } from './instrument/smu-driver.js';
import { SimulatedSmu } from './simulator/instrument.js';
import { findScenario } from './simulator/scenarios.js';
import { attachInstrument } from './simulator/serve.js';

/**
 * The demo: one sweep of an invented device on the built-in simulated instrument, through the same
 * dialect, SCPI session and driver a real instrument uses, then the ranking and the fit.
 */
export async function runDemo(scenarioName = 'oxide-fn'): Promise<void> {
  const scenario = findScenario(scenarioName);
  const smu = new SimulatedSmu({ device: scenario.device, seed: 7, realTime: false });
  const [client, instrument] = duplexPair();
  attachInstrument(smu, instrument);
  const session = new ScpiSession(client);
  const driver = new SmuDriver(session, loadDialect('protection-trip'));
  const out = (t: string) => process.stdout.write(t);
  out(`plumbline demo — simulated instrument: ${await driver.identify()}\n`);
  out(`device: ${scenario.name} — ${scenario.description}\n`);
  const { start, stop, points, compliance } = scenario.sweep;
  out(`sweep ${start} V to ${stop} V in ${points} points, compliance ${compliance} A\n`);
  out("CAUTION: on a real station the output can be at a hazardous voltage; follow your lab's safety rules.\n\n");
  const v: number[] = [];
  const i: number[] = [];
  const comp: number[] = [];
  try {
    await driver.configure({ compliance });
    await driver.outputOn();
    for (let k = 0; k < points; k++) {
      await driver.setVoltage(start + ((stop - start) * k) / (points - 1));
      const m = await driver.measure();
      if (!m.reading) continue;
      v.push(m.reading.v);
      i.push(m.reading.i);
      comp.push(m.compliance ? 1 : 0);
      if (k % 15 === 0 || k === points - 1)
        out(
          `  point ${String(k + 1).padStart(3)}/${points}  V = ${formatFixed(m.reading.v, 3)} V  I = ${m.reading.i.toExponential(3)} A${m.compliance ? '  (compliance)' : ''}\n`,
        );
    }
  } finally {
    await driver.outputOff();
    session.close();
  }
  out('output off.\n\n');
  const data = { x: v, y: i, compliance: comp };
  const { model, from, to } = scenario.analysis;
  const inputs = scenario.device.inputs;
  // The scenario's own window when it has one, else the automatic one.
  const window = from !== undefined || to !== undefined ? { from, to } : undefined;
  out(window ? `Ranking of the mechanisms between ${from} V and ${to} V:\n` : 'Ranking of the mechanisms, each on its own window:\n');
  out(`${formatRanking(rankMechanisms(data, { inputs, window }))}\n\n`);
  try {
    out(`${formatFit(analyze(data, { model, inputs, window }))}\n\n`);
  } catch (e) {
    out(`The ${model} fit could not be made on this sweep: ${(e as Error).message}\n\n`);
  }
  out('Next: plumbline fit FILE --model ID ... on your own CSV, or plumbline sim --tcp 5025 to drive this simulator from any SCPI controller.\n');
}
