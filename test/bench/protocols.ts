/** Protocol benchmark figures: readings parsed per second, point round trips over TCP and a pty. */
import { loadDialect } from '../../protocols/dialect.js';
import { parseReading } from '../../protocols/reading-parser.js';
import { ScpiSession } from '../../protocols/scpi-session.js';
import { formatScpiNumber } from '../../protocols/scpi-numbers.js';
import { openSerial, openTcp } from '../../protocols/transport.js';
import { SmuDriver } from '../../daemon/instrument/smu-driver.js';
import { SimulatedSmu } from '../../daemon/simulator/instrument.js';
import { findScenario } from '../../daemon/simulator/scenarios.js';
import { servePty, serveTcp } from '../../daemon/simulator/serve.js';
import { report } from './timing.js';

async function roundTrips(session: ScpiSession, n: number): Promise<number> {
  const driver = new SmuDriver(session, loadDialect('protection-trip'));
  await driver.configure({ compliance: 1e-3 });
  await driver.outputOn();
  const t0 = process.hrtime.bigint();
  for (let k = 0; k < n; k++) {
    await driver.setVoltage(5 + (k % 40) * 0.1);
    await driver.measure();
  }
  const s = Number(process.hrtime.bigint() - t0) / 1e9;
  await driver.outputOff();
  return n / s;
}

export async function benchProtocols(): Promise<void> {
  const lines: string[] = [];
  for (let k = 0; k < 1000; k++) lines.push(`${formatScpiNumber(k * 0.01)},${formatScpiNumber(1e-9 * (k + 1))}`);
  const n = 3_000_000;
  const fields = ['voltage', 'current'] as const;
  const t0 = process.hrtime.bigint();
  let sum = 0;
  for (let k = 0; k < n; k++) {
    const r = parseReading(lines[k % 1000], fields);
    if (r.ok) sum += r.reading.i;
  }
  const rate = n / (Number(process.hrtime.bigint() - t0) / 1e9);
  report('readings parsed per second (one core)', rate, '/s', '>= 2,000,000/s');
  if (sum === 0) process.stdout.write('');

  const device = findScenario('oxide-fn').device;
  const smuTcp = new SimulatedSmu({ device, realTime: false });
  const server = await serveTcp(smuTcp, 0);
  const port = (server.address() as { port: number }).port;
  const tcp = new ScpiSession(await openTcp('127.0.0.1', port));
  report('point round trips over loopback TCP (set V, READ?, TRIP?)', await roundTrips(tcp, 2000), 'points/s');
  tcp.close();
  await new Promise((r) => server.close(r));

  try {
    const smuPty = new SimulatedSmu({ device, realTime: false });
    const pair = await servePty(smuPty);
    const pty = new ScpiSession(await openSerial({ path: pair.clientPath, baudRate: 115200 }));
    report('point round trips over a socat pty pair', await roundTrips(pty, 1000), 'points/s');
    pty.close();
    await pair.close();
  } catch (e) {
    process.stdout.write(`pty round trips: skipped (${(e as Error).message})\n`);
  }
}
