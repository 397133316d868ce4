/**
 * Daemon benchmark figures: readings per second through the live chain with the journal on, abort
 * decision → output-off bytes at the instrument (also with a slow reading in flight), RSS after 1e7 readings (in a child process), and
 * the acquisition rate with 50 websocket viewers plus one stalled client.
 */
import { spawn, spawnSync } from 'node:child_process';
import { mkdtempSync, rmSync } from 'node:fs';
import { createServer } from 'node:http';
import type { AddressInfo } from 'node:net';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { loadDialect } from '../../protocols/dialect.js';
import { ScpiSession } from '../../protocols/scpi-session.js';
import { duplexPair, openTcp } from '../../protocols/transport.js';
import { SmuDriver } from '../../daemon/instrument/smu-driver.js';
import { JournalWriter } from '../../daemon/journal/journal.js';
import { LiveChain } from '../../daemon/pipeline/chain.js';
import { RecentEvents } from '../../daemon/pipeline/recent.js';
import { analysisSchema, breakdownSchema, driftSchema } from '../../daemon/pipeline/settings.js';
import { GuardedSource, limitsSchema } from '../../daemon/run/guard.js';
import { parsePlan } from '../../daemon/run/plan.js';
import { RunController } from '../../daemon/run/runner.js';
import { Hub } from '../../daemon/server/hub.js';
import { SimulatedSmu } from '../../daemon/simulator/instrument.js';
import { findScenario } from '../../daemon/simulator/scenarios.js';
import { attachInstrument, serveTcp } from '../../daemon/simulator/serve.js';
import { report } from './timing.js';

export function makeChain(dir: string, pointsPerSweep: number): LiveChain {
  const { writer } = JournalWriter.create(dir, 'bench');
  return new LiveChain({
    journal: writer,
    analysis: analysisSchema.parse({ model: 'ohmic', window: 'all' }),
    drift: driftSchema.parse({ action: 'warn' }),
    breakdown: breakdownSchema.parse({}),
    complianceLimit: 1,
    hazardVoltage: 30,
    sweeps: 0,
    pointsPerSweep,
  });
}

/** Feeds n synthetic ohmic readings (sweeps of `per` points) through the chain. */
export function feed(chain: LiveChain, n: number, per: number, from = 0): void {
  for (let k = from; k < from + n; k++) {
    const p = k % per;
    if (p === 0) chain.startSweep(Math.floor(k / per) + 1, per, '');
    const v = 0.01 * p;
    chain.reading(v, (v / 1e4) * (1 + 1e-3 * Math.sin(k)), false, false);
    if (p === per - 1) chain.endSweep(true);
  }
}

function throughput(): number {
  const dir = mkdtempSync(join(tmpdir(), 'plumbline-bench-'));
  const chain = makeChain(dir, 1000);
  // The station's own subscriber: the snapshot buffer.
  const recent = new RecentEvents();
  chain.events$.subscribe((e) => recent.add(e));
  const n = 2_000_000;
  feed(chain, 20_000, 1000); // warm-up
  const t0 = performance.now();
  feed(chain, n, 1000, 20_000);
  const s = (performance.now() - t0) / 1000;
  chain.end('completed', 'bench');
  rmSync(dir, { recursive: true, force: true });
  return n / s;
}

async function abortLatency(): Promise<{ median: number; max: number }> {
  const sc = findScenario('oxide-breakdown');
  const times: number[] = [];
  for (let run = 0; run < 15; run++) {
    const dir = mkdtempSync(join(tmpdir(), 'plumbline-bench-'));
    const smu = new SimulatedSmu({ device: sc.device, seed: run, realTime: false });
    const [client, inst] = duplexPair();
    let offAt = 0;
    let decidedAt = 0;
    inst.on('data', (d: Buffer) => {
      // The first OUTP OFF after the decision (configure() sends one before the output goes on).
      if (decidedAt > 0 && offAt === 0 && String(d).includes(':OUTP OFF')) offAt = performance.now();
    });
    attachInstrument(smu, inst);
    const session = new ScpiSession(client);
    const driver = new SmuDriver(session, loadDialect('protection-trip'));
    const { writer } = JournalWriter.create(dir, 'bench');
    const chain = new LiveChain({
      journal: writer,
      analysis: analysisSchema.parse({ model: 'fowler-nordheim', window: { from: 5, to: 8.5 }, inputs: sc.device.inputs }),
      drift: driftSchema.parse({}),
      breakdown: breakdownSchema.parse({}),
      complianceLimit: 1e-3,
      hazardVoltage: 30,
    });
    chain.events$.subscribe((e) => {
      if (e.type === 'decision' && e.action === 'abort' && decidedAt === 0) decidedAt = performance.now();
    });
    const source = new GuardedSource(driver, limitsSchema.parse({ maxVoltage: 20, maxCompliance: 0.01, maxPower: 1, rampDelay: 0 }));
    const r = await new RunController(source, chain, parsePlan({ start: 0, stop: 10, points: 101, compliance: 1e-3 })).execute();
    session.close();
    rmSync(dir, { recursive: true, force: true });
    if (r.outcome === 'aborted-breakdown' && decidedAt > 0 && offAt > 0) times.push(offAt - decidedAt);
  }
  times.sort((a, b) => a - b);
  return { median: times[times.length >> 1], max: times[times.length - 1] };
}

/**
 * Abort with a reading in flight on a slow instrument (each reading takes 1 s): time from the abort
 * call to the output-off bytes arriving at the instrument over loopback TCP, while its READ? is
 * still unanswered.
 */
async function abortWithReadingInFlight(): Promise<{ median: number; max: number; trials: number }> {
  const times: number[] = [];
  for (let run = 0; run < 5; run++) {
    const dir = mkdtempSync(join(tmpdir(), 'plumbline-bench-'));
    const smu = new SimulatedSmu({ device: findScenario('oxide-fn').device, seed: run, realTime: false, faults: { readDelayMs: 1000 } });
    const server = await serveTcp(smu, 0);
    const socket = await openTcp('127.0.0.1', (server.address() as AddressInfo).port);
    const session = new ScpiSession(socket, { timeoutMs: 5000 });
    const chain = makeChain(dir, 46);
    const source = new GuardedSource(
      new SmuDriver(session, loadDialect('protection-trip')),
      limitsSchema.parse({ maxVoltage: 20, maxCompliance: 0.01, maxPower: 1, rampDelay: 0 }),
    );
    const c = new RunController(source, chain, parsePlan({ start: 0, stop: 9, points: 46, compliance: 1e-3 }));
    const done = c.execute();
    while (smu.received.filter((r) => r.line === ':READ?').length < 2) await new Promise((r) => setTimeout(r, 5));
    const inFlight = smu.repliesSent;
    const t0 = performance.now();
    c.abort('bench abort');
    const on = smu.received.findIndex((r) => r.line === ':OUTP ON');
    let off: { at: number; repliesSent: number } | undefined;
    while (!(off = smu.received.find((r, k) => k > on && r.line === ':OUTP OFF'))) await new Promise((r) => setImmediate(r));
    // Only a trial whose reading was still unanswered when the off command arrived counts.
    if (off.repliesSent === inFlight) times.push(off.at - performance.timeOrigin - t0);
    await done;
    session.close();
    server.close();
    rmSync(dir, { recursive: true, force: true });
  }
  times.sort((a, b) => a - b);
  return { median: times[times.length >> 1], max: times[times.length - 1], trials: times.length };
}

async function viewers(): Promise<{ rate: number; lagging: number; dropped: number; received: number; messages: number }> {
  const dir = mkdtempSync(join(tmpdir(), 'plumbline-bench-'));
  const chain = makeChain(dir, 1000);
  const recent = new RecentEvents();
  const hub = new Hub(() => ({
    station: { control: true, hazardVoltage: 30, limits: {} },
    running: true,
    session: 'bench',
    lastSeq: recent.lastSeq,
    events: recent.nonReadings(),
    readings: recent.readings(),
    views: [],
  }));
  chain.events$.subscribe((e) => {
    recent.add(e);
    hub.publish(e);
  });
  const server = createServer();
  server.on('upgrade', (req, socket, head) => hub.upgrade(req, socket, head));
  await new Promise<void>((r) => server.listen(0, '127.0.0.1', () => r()));
  const url = `ws://127.0.0.1:${(server.address() as AddressInfo).port}/ws`;
  // The viewers live in another process, as pages do.
  const child = spawn(process.execPath, [fileURLToPath(new URL('./viewers-child.js', import.meta.url)), url, '50'], { stdio: ['pipe', 'pipe', 'inherit'] });
  let out = '';
  child.stdout.on('data', (d) => (out += String(d)));
  while (!out.includes('ready')) await new Promise((r) => setTimeout(r, 20));
  const n = 2_000_000;
  const t0 = performance.now();
  for (let done = 0; done < n; done += 10_000) {
    feed(chain, 10_000, 1000, done);
    await new Promise((r) => setImmediate(r));
  }
  const rate = n / ((performance.now() - t0) / 1000);
  await new Promise((r) => setTimeout(r, 500));
  const stats = { ...hub.stats };
  child.stdin.write('report\n');
  while (!out.includes('bytes')) await new Promise((r) => setTimeout(r, 20));
  const m = /bytes (\d+) messages (\d+)/.exec(out);
  hub.close();
  server.close();
  chain.end('completed', 'bench');
  rmSync(dir, { recursive: true, force: true });
  return { rate, lagging: stats.lagging, dropped: stats.dropped, received: Number(m?.[1] ?? 0), messages: Number(m?.[2] ?? 0) };
}

export async function benchDaemon(): Promise<void> {
  report('live chain + journal, ohmic fit, 1000-pt sweeps', throughput() / 1e6, 'M readings/s', '≥ 1');
  const a = await abortLatency();
  report('abort decision → output-off bytes at the instrument', a.median, `ms median (max ${a.max.toFixed(2)})`, '≤ 5');
  const f = await abortWithReadingInFlight();
  report('abort → output-off bytes, 1 s reading in flight (TCP)', f.median, `ms median (max ${f.max.toFixed(2)}, ${f.trials} of 5 trials in flight)`, '≤ 5');
  const rss = spawnSync(process.execPath, ['--max-old-space-size=512', fileURLToPath(new URL('./rss.js', import.meta.url))], {
    encoding: 'utf8',
    timeout: 300_000,
  });
  const m = /rss (\d+(?:\.\d+)?) MB after (\d+) readings in (\d+(?:\.\d+)?) s/.exec(rss.stdout);
  if (m) report(`RSS after ${Number(m[2]).toExponential(0)} readings (chain + journal, child)`, Number(m[1]), `MB (${m[3]} s)`, '≤ 150');
  else process.stdout.write(`RSS benchmark failed: ${rss.stdout}${rss.stderr}\n`);
  const v = await viewers();
  report('acquisition with 50 ws viewers + 1 stalled client', v.rate / 1e6, 'M readings/s');
  process.stdout.write(
    `${''.padEnd(52)} (viewers got ${v.messages} messages, ${(v.received / 1e6).toFixed(0)} MB; the stalled one skipped ${v.dropped} events, ${v.lagging} lagging)\n`,
  );
}
