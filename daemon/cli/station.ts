/**
 * `plumbline serve | run | export | annotate | recover`: the station daemon and its journal from the
 * command line. `run` and `serve` turn the output off on SIGINT, SIGTERM and uncaught exceptions
 * before the process ends.
 */
import { readFileSync } from 'node:fs';
import { resolve } from 'node:path';
import type { Command } from 'commander';
import type { WireEvent } from '../../protocols/wire.js';
import type { StationConfig } from '../run/config.js';
import type { Station } from '../run/station.js';
import { UsageError } from './usage.js';
import { formatParameterText } from '../../protocols/display-units.js';
import { formatNumber } from '../../protocols/number-format.js';
import { describeDevice, readDevice, withDeviceOptions, type DeviceOptions } from './device.js';

// The daemon's modules (express, ws, serialport, rxjs) load only when a station command runs, so
// `plumbline fit` and friends keep their short start-up.
const daemonModules = async () => ({
  ...(await import('../run/config.js')),
  ...(await import('../run/station.js')),
  ...(await import('../run/runner.js')),
  ...(await import('../server/app.js')),
  ...(await import('../journal/export.js')),
  ...(await import('../journal/journal.js')),
  ...(await import('../journal/reader.js')),
  ...(await import('../run/plan.js')),
});

interface StationOptions {
  config?: string;
  scenario?: string;
  data?: string;
  fast?: boolean;
}

interface PublishOptions {
  publish?: string;
  station?: string;
}

/**
 * Publishing to the lab's broker (--publish or the config's `publish`): it reads the journal in a
 * thread of its own, so the run neither waits for it nor notices a missing broker.
 */
async function startPublishing(config: StationConfig, data: string, o: PublishOptions, page: string | null) {
  const url = o.publish ?? config.publish?.url;
  if (url === undefined) return undefined;
  const lab = await import('../lab/publishing.js');
  const h = lab.startPublishing({ url, station: o.station ?? config.publish?.station, name: config.name, dataDir: data, page, tokenRequired: config.server.token !== undefined, log: (line) => process.stderr.write(`${line}\n`) });
  process.stderr.write(`publishing to ${h.display} as station ${h.station}\n`);
  return h;
}

const PUBLISH_HELP = 'publish the sessions to an MQTT broker (mqtt://HOST:PORT[/PREFIX]); credentials as user:password@ or PLUMBLINE_MQTT_USERNAME/PASSWORD';
const STATION_HELP = 'station id in the broker\'s topics (default: host name and data folder name)';

async function stationConfig(o: StationOptions): Promise<StationConfig> {
  const { loadConfig, DEFAULT_CONFIG_FILE } = await daemonModules();
  const config = loadConfig(o.config ?? DEFAULT_CONFIG_FILE);
  if (o.scenario !== undefined) {
    const prev = config.instrument.kind === 'simulator' ? config.instrument : undefined;
    config.instrument = { kind: 'simulator', scenario: o.scenario, realTime: prev?.realTime ?? true, seed: prev?.seed ?? 7 };
    // A scenario brings its own plan and analysis unless the config fixes them.
    if (o.config === undefined) {
      delete config.plan;
      delete config.analysis;
    }
  }
  if (o.fast) {
    if (config.instrument.kind !== 'simulator') throw new UsageError('--fast applies to the simulated instrument only');
    config.instrument = { ...config.instrument, realTime: false };
  }
  return config;
}

function readJson(file: string, what: string): unknown {
  let text: string;
  try {
    text = readFileSync(file, 'utf8');
  } catch (e) {
    throw new UsageError(`${what} ${file}: cannot read: ${(e as Error).message}`);
  }
  try {
    return JSON.parse(text);
  } catch (e) {
    throw new UsageError(`${what} ${file}: not valid JSON: ${(e as Error).message}`);
  }
}

/** Serial settings from watch's options; a bad value names its option. */
function serialSettings(path: string, o: { baud: string; dataBits: string; parity: string; stopBits: string; rtscts?: boolean; xonxoff?: boolean }) {
  const baudRate = Number(o.baud);
  if (!Number.isInteger(baudRate) || baudRate <= 0) throw new UsageError(`--baud '${o.baud}': expected a baud rate such as 9600 or 115200`);
  const dataBits = Number(o.dataBits);
  if (![5, 6, 7, 8].includes(dataBits)) throw new UsageError(`--data-bits '${o.dataBits}': expected 5, 6, 7 or 8`);
  if (!['none', 'even', 'odd', 'mark', 'space'].includes(o.parity)) throw new UsageError(`--parity '${o.parity}': expected none, even, odd, mark or space`);
  const stopBits = Number(o.stopBits);
  if (![1, 1.5, 2].includes(stopBits)) throw new UsageError(`--stop-bits '${o.stopBits}': expected 1, 1.5 or 2`);
  return {
    path,
    baudRate,
    dataBits: dataBits as 5 | 6 | 7 | 8,
    parity: o.parity as 'none' | 'even' | 'odd' | 'mark' | 'space',
    stopBits: stopBits as 1 | 1.5 | 2,
    rtscts: o.rtscts ?? false,
    xonxoff: o.xonxoff ?? false,
  };
}

/** Output off on the way out, whatever the way out is. */
function guardProcess(station: Station, onExit: () => Promise<void> | void): void {
  let exiting = false;
  const leave = async (why: string, code: number) => {
    if (exiting) return;
    exiting = true;
    process.stderr.write(`\nplumbline: ${why}; turning the output off\n`);
    try {
      await station.emergencyStop(why);
      await onExit();
    } finally {
      process.exit(code);
    }
  };
  process.on('SIGINT', () => void leave('interrupted (SIGINT)', 130));
  process.on('SIGTERM', () => void leave('terminated (SIGTERM)', 143));
  process.on('uncaughtException', (e) => void leave(`uncaught exception: ${e.stack ?? e.message}`, 1));
  process.on('unhandledRejection', (e) => void leave(`unhandled rejection: ${(e as Error)?.stack ?? String(e)}`, 1));
}

function describe(e: WireEvent): string | undefined {
  switch (e.type) {
    case 'caution':
      return `CAUTION [${e.kind}] ${e.message}`;
    case 'decision':
      return `decision: ${e.action} — ${e.reason}`;
    case 'fit': {
      if (!e.final) return undefined;
      if (!e.fit) return `sweep ${e.sweep}: no fit (${e.error})`;
      const p = Object.entries(e.fit.parameters).slice(0, 3).map(([k, v]) => `${k} = ${formatParameterText(v, k)}`);
      return `sweep ${e.sweep}: ${e.fit.model} fit on ${e.fit.line.n} points, ${p.join(', ')}`;
    }
    case 'drift':
      return e.state === 'baseline' || e.state === 'no-value' ? undefined : `         drift of ${e.parameter}: ${e.state} (${e.method} ${formatNumber(e.statistic ?? Number.NaN, 5)}, limits ${formatNumber(e.lower ?? Number.NaN, 5)} … ${formatNumber(e.upper ?? Number.NaN, 5)})`;
    case 'output':
      if (e.queried) {
        if (e.on) return `output ON, confirmed by the instrument — ${e.reason}`;
        return e.confirmed ? `output off, confirmed by the instrument — ${e.reason}` : `output off NOT confirmed — ${e.reason}`;
      }
      if (e.on) return `output ON — ${e.reason}`;
      return e.sent === false ? `output off could NOT be sent — ${e.reason}` : `output off sent — ${e.reason}`;
    case 'test-result': {
      const r = e.result as { breakdownVoltage?: number; breakdownField?: number; chargeToBreakdown?: number; timeToBreakdown?: number; leakageBefore?: number; leakageAfter?: number };
      const parts = [
        r.breakdownVoltage !== undefined ? `V = ${r.breakdownVoltage.toPrecision(4)} V` : '',
        r.breakdownField !== undefined ? `E = ${(r.breakdownField / 1e8).toPrecision(4)} MV/cm` : '',
        r.chargeToBreakdown !== undefined ? `Q = ${(r.chargeToBreakdown / 1e4).toPrecision(3)} C/cm²` : '',
        r.timeToBreakdown !== undefined ? `t = ${r.timeToBreakdown.toPrecision(3)} s` : '',
        r.leakageBefore !== undefined ? `leakage before ${r.leakageBefore.toPrecision(3)} A` : '',
        r.leakageAfter !== undefined ? `after ${r.leakageAfter.toPrecision(3)} A` : '',
      ].filter(Boolean);
      return `${e.test}: ${e.outcome} — ${e.reason}${parts.length ? `\n         ${parts.join(', ')}` : ''}`;
    }
    case 'adaptive-sweep':
      return `sweep ${e.sweep}: ${e.readings} readings, up to ${e.maxAbsBias.toPrecision(4)} V, ${e.charge.toPrecision(3)} C passed; ${e.parameter ? `${e.parameter.name} = ${e.parameter.value.toPrecision(5)} ± ${e.parameter.stdErr.toPrecision(2)} ${e.parameter.unit}; ` : ''}stopped: ${e.stopReason}`;
    case 'recovery':
      return `journal: ${e.message}`;
    default:
      return undefined;
  }
}

export function registerStation(program: Command): void {
  withDeviceOptions(program
    .command('run')
    .description('run a sweep plan headless: progress on the terminal, a session folder under --data, exit code by outcome')
    .option('--config <file>', 'station config (default config/station.json: the built-in simulated instrument)')
    .option('--plan <file>', 'sweep plan JSON (default: the config\'s plan, or the scenario\'s)')
    .option('--sweeps <n>', 'number of sweeps (overrides the plan\'s repeat)')
    .option('--scenario <name>', 'use the built-in simulated instrument with this scenario (plumbline sim --list)')
    .option('--model <id>', 'live-fit model (default: the config\'s or the scenario\'s)')
    .option('--data <dir>', 'folder under which the run creates its session folder (default: the config\'s, plumbline-data)')
    .option('--fast', 'simulated instrument: answer at once instead of waiting the integration time')
    .option('--json', 'print one JSON object at the end instead of the progress text')
    .option('--publish <url>', PUBLISH_HELP)
    .option('--station <id>', STATION_HELP)
    .option('--override-disk-check', 'run a plan whose journal would not fit in the free disk space (refused otherwise)')
    .addHelpText('after', '\nA plan file may also carry the device under test: {"kind": …, "device": {"wafer": "W07", "site": "C4", "x": 3, "y": -2, "area": 1e-8}} (SI); the options above override its fields.\nExit codes: 0 completed or stopped, 2 bad input, 3 aborted by the user, 4 aborted by drift, 5 aborted by breakdown, 6 instrument fault (no usable reading, replies out of step, no answer), 7 refused by the safety guard, 9 the journal could not be written (disk full), 10 internal error.'))
    .action(async (o: StationOptions & DeviceOptions & PublishOptions & { plan?: string; sweeps?: string; model?: string; json?: boolean; overrideDiskCheck?: boolean }) => {
      const config = await stationConfig(o);
      const { dataDir, Station, EXIT_CODE, describePlan } = await daemonModules();
      const data = dataDir(config, o.data);
      const station = new Station(config, data);
      for (const r of station.recovered) process.stderr.write(`journal ${r.dir}: ${r.message}\n`);
      let plan: unknown = o.plan !== undefined ? readJson(o.plan, 'plan') : undefined;
      // Errors in a plan file name the file and the field.
      const { parsePlan } = await daemonModules();
      if (o.plan !== undefined && typeof plan === 'object' && plan !== null) {
        // A plan file may carry the device under test beside the sweep settings.
        const { device: planDevice, ...sweepPlan } = plan as Record<string, unknown>;
        parsePlan(sweepPlan, o.plan);
        if (planDevice !== undefined) {
          const { parseDeviceIdentity } = await import('../../protocols/device-results.js');
          parseDeviceIdentity(planDevice, `${o.plan}: device`);
        }
      } else if (o.plan !== undefined) parsePlan(plan, o.plan);
      if (o.sweeps !== undefined) {
        const n = Number(o.sweeps);
        if (!Number.isInteger(n) || n < 1) throw new UsageError(`--sweeps '${o.sweeps}': expected a whole number ≥ 1`);
        plan = plan === undefined ? { ...station.defaultPlan(n) } : { ...(plan as object), repeat: n };
      }
      if (o.overrideDiskCheck) plan = { ...((plan ?? station.defaultPlan()) as object), overrideDiskCheck: true };
      const analysis = o.model !== undefined ? { ...station.analysisSettings, model: o.model, ...(o.model !== station.analysisSettings.model ? { window: 'auto' } : {}) } : undefined;
      const device = await readDevice(o);
      const pub = await startPublishing(config, data, o, null);
      guardProcess(station, async () => void (await pub?.stop(1000)));
      const tty = process.stdout.isTTY && !o.json;
      let progressShown = false;
      station.events$.subscribe({
        next: (e) => {
          if (o.json) return;
          if (e.type === 'progress') {
            const eta = e.eta === null ? '' : `, about ${Math.ceil(e.eta)} s left`;
            if (tty) {
              process.stdout.write(`\r  sweep ${e.sweep}/${e.sweeps || '?'}  point ${e.point}/${e.points || '?'}${eta}   `);
              progressShown = true;
            }
            return;
          }
          const line = describe(e);
          if (line) {
            if (progressShown) process.stdout.write('\r\x1b[K');
            progressShown = false;
            process.stdout.write(`${line}\n`);
          }
        },
        error: () => undefined,
      });
      let h: Awaited<ReturnType<typeof station.startRun>>;
      try {
        h = await station.startRun({ plan, analysis, device });
      } catch (e) {
        if ((e as { status?: number }).status === 502) {
          process.stderr.write(`plumbline run: ${(e as Error).message}\n`);
          process.exit(EXIT_CODE['instrument-fault']);
        }
        throw e;
      }
      if (!o.json) {
        process.stdout.write(`session ${h.session}\n  folder ${h.dir}\n  plan: ${describePlan(h.plan)}\n`);
        process.stdout.write('CAUTION: on a real station the output can reach hazardous voltages. Follow your lab\'s safety rules; these software limits do not replace the instrument\'s interlock.\n');
      }
      const result = await h.done;
      if (o.json) process.stdout.write(`${JSON.stringify({ session: h.session, dir: h.dir, ...result })}\n`);
      else process.stdout.write(`${progressShown ? '\n' : ''}run ended: ${result.outcome} — ${result.reason} (${result.sweeps} sweep(s) finished)\nexport it: plumbline export ${h.dir}\n`);
      // The journal is closed: hand the broker what it has not got yet (a broker that is down costs
      // a few seconds here, nothing more; the rest goes out on the next start).
      const left = await pub?.stop(5000);
      if (left && left.unsent.length > 0) process.stderr.write(`publish: not everything reached the broker; it is published on the next start with --publish\n`);
      // Exit explicitly: the journal is closed and the output is off; a serial port's native poller
      // can otherwise keep the event loop alive after close (seen with socat ptys).
      process.exit(EXIT_CODE[result.outcome]);
    });

  program
    .command('serve')
    .description('the station daemon with its page and API (default: the built-in simulated instrument)')
    .option('--config <file>', 'station config (default config/station.json)')
    .option('--port <n>', 'HTTP port (default: the config\'s, 8470; 0 = any free port)')
    .option('--host <addr>', 'address to listen on (default 127.0.0.1; anything else needs server.token in the config)')
    .option('--scenario <name>', 'use the built-in simulated instrument with this scenario')
    .option('--data <dir>', 'folder for session folders (default: the config\'s, plumbline-data)')
    .option('--fast', 'simulated instrument: answer at once instead of waiting the integration time')
    .option('--no-autostart', 'do not start the default plan at once even if the config says so')
    .option('--start-on-page', 'with autostart: start the default plan when the first page connects (npm start does this, so a newcomer sees the demo from its start)')
    .option('--publish <url>', PUBLISH_HELP)
    .option('--station <id>', STATION_HELP)
    .action(async (o: StationOptions & PublishOptions & { port?: string; host?: string; autostart: boolean; startOnPage?: boolean }) => {
      const config = await stationConfig(o);
      const { dataDir, Station, startServer } = await daemonModules();
      const data = dataDir(config, o.data);
      const port = o.port !== undefined ? Number(o.port) : config.server.port;
      if (!Number.isInteger(port) || port < 0 || port > 65535) throw new UsageError(`--port '${o.port}': expected a port number`);
      const station = new Station(config, data);
      for (const r of station.recovered) process.stderr.write(`journal ${r.dir}: ${r.message}\n`);
      const srv = await startServer(station, { host: o.host ?? config.server.host, port, token: config.server.token, allowedHosts: config.server.allowedHosts });
      const pub = await startPublishing(config, data, o, srv.url);
      guardProcess(station, async () => void (await Promise.all([srv.close(), pub?.stop(1000)])));
      station.events$.subscribe({
        next: (e) => {
          if (e.type === 'session') process.stdout.write(`session ${e.id} started\n`);
          else if (e.type === 'run-end') process.stdout.write(`run ended: ${e.outcome} — ${e.reason}\n`);
          else if (e.type === 'caution') process.stdout.write(`CAUTION [${e.kind}] ${e.message}\n`);
        },
        error: () => undefined,
      });
      process.stdout.write(`plumbline daemon: ${config.name}\n  page  ${srv.url}\n  data  ${data}\n  instrument: ${config.instrument.kind}${station.scenario ? ` (scenario ${station.scenario.name})` : ''}\n`);
      process.stdout.write('CAUTION: on a real station the output can reach hazardous voltages. Follow your lab\'s safety rules.\n');
      if (config.autostart && o.autostart) {
        if (o.startOnPage) {
          // The demo waits for someone to watch it: it starts when the first page connects.
          process.stdout.write(`the demo run starts when the page connects: open ${srv.url}\n`);
          while (srv.hub.stats.clients === 0) await new Promise((r) => setTimeout(r, 200));
        }
        const h = await station.startRun({});
        process.stdout.write(`demo run started: ${h.session}\n`);
        h.done.catch(() => undefined);
      }
      await new Promise(() => undefined);
    });

  program
    .command('watch')
    .description('follow readings another program produces — a CSV it is writing, standard input, a TCP or serial line stream — segment sweeps, and run the live chain, journal and page on them, with no control of the instrument')
    .argument('<source>', 'the CSV being written; - for standard input; tcp://HOST:PORT; or serial:PATH (e.g. serial:/dev/ttyUSB0)')
    .option('--voltage <col>', 'voltage column, by header name or 1-based position (default: the first)')
    .option('--current <col>', 'current column (default: the second)')
    .option('--compliance-column <col>', 'column flagging readings at compliance (non-zero)')
    .option('--temperature-column <col>', 'column with the device temperature in K: each sweep gets a note "T = … K" (for plumbline tseries)')
    .option('--model <id>', 'live-fit model (default: the config\'s)')
    .option('--config <file>', 'station config (analysis, drift, server, data settings)')
    .option('--data <dir>', 'folder for the session folder (default: the config\'s, plumbline-data)')
    .option('--port <n>', 'serve the page on this port (default: the config\'s; 0 = any free port)')
    .option('--no-page', 'do not serve the page')
    .option('--baud <n>', 'serial: baud rate', '9600')
    .option('--data-bits <n>', 'serial: 5, 6, 7 or 8', '8')
    .option('--parity <p>', 'serial: none, even, odd, mark or space', 'none')
    .option('--stop-bits <n>', 'serial: 1, 1.5 or 2', '1')
    .option('--rtscts', 'serial: hardware flow control (RTS/CTS)')
    .option('--xonxoff', 'serial: software flow control (XON/XOFF)')
    .option('--read-terminator <t>', 'serial and TCP: what ends a line: lf (a trailing CR is dropped), crlf or cr', 'lf')
    .option('--publish <url>', PUBLISH_HELP)
    .option('--station <id>', STATION_HELP)
    .action(async (spec: string, o: PublishOptions & { voltage?: string; current?: string; complianceColumn?: string; temperatureColumn?: string; model?: string; config?: string; data?: string; port?: string; page: boolean; baud: string; dataBits: string; parity: string; stopBits: string; rtscts?: boolean; xonxoff?: boolean; readTerminator: string }) => {
      const config = await stationConfig({ config: o.config });
      const { dataDir, Station, startServer } = await daemonModules();
      const { feedPassive } = await import('../pipeline/passive.js');
      const { fileLines, streamLines, tcpLines, serialLines, parseSourceSpec } = await import('../../protocols/line-source.js');
      const { existsSync } = await import('node:fs');
      let src: ReturnType<typeof parseSourceSpec>;
      try {
        src = parseSourceSpec(spec);
      } catch (e) {
        throw new UsageError((e as Error).message);
      }
      if (!['lf', 'crlf', 'cr'].includes(o.readTerminator)) throw new UsageError(`--read-terminator '${o.readTerminator}': expected lf, crlf or cr`);
      const term = o.readTerminator as 'lf' | 'crlf' | 'cr';
      const serial = src.kind === 'serial' ? serialSettings(src.path, o) : undefined;
      if (src.kind === 'file' && !existsSync(src.path)) throw new UsageError(`${src.path}: no such file (watch follows a file that exists; create it first, even empty)`);
      const station = new Station(config, dataDir(config, o.data));
      for (const r of station.recovered) process.stderr.write(`journal ${r.dir}: ${r.message}\n`);
      // Another program's data: the fit window is found automatically unless the config fixes one.
      station.setAnalysis({ ...station.analysisSettings, ...(o.model !== undefined ? { model: o.model } : {}), window: config.analysis?.window ?? 'auto' }, 'cli');
      let srv: Awaited<ReturnType<typeof startServer>> | undefined;
      if (o.page) {
        const port = o.port !== undefined ? Number(o.port) : config.server.port;
        if (!Number.isInteger(port) || port < 0 || port > 65535) throw new UsageError(`--port '${o.port}': expected a port number`);
        srv = await startServer(station, { host: config.server.host, port, token: config.server.token, allowedHosts: config.server.allowedHosts });
      }
      const where = src.kind === 'stdin' ? 'standard input' : src.kind === 'tcp' ? `TCP ${src.host}:${src.port}` : src.kind === 'serial' ? `serial ${src.path}` : src.path;
      let source: import('../../protocols/line-source.js').LineSource;
      try {
        source = src.kind === 'stdin' ? streamLines(process.stdin, 65536, term)
          : src.kind === 'tcp' ? await tcpLines(src.host, src.port, term)
          : src.kind === 'serial' ? await serialLines(serial!, term)
          : await fileLines(src.path);
      } catch (e) {
        await srv?.close();
        throw new UsageError(`cannot open ${where}: ${(e as Error).message}`);
      }
      const pub = await startPublishing(config, dataDir(config, o.data), o, srv?.url ?? null);
      const passive = station.openPassive('watch', where);
      const feed = feedPassive(source, passive.chain, { voltage: o.voltage, current: o.current, compliance: o.complianceColumn, temperature: o.temperatureColumn }, where);
      process.stdout.write(`watching ${where} → session ${passive.session}\n  folder ${passive.dir}\n${srv ? `  page  ${srv.url}\n` : ''}plumbline does not control this instrument; Ctrl-C stops watching.\n`);
      station.events$.subscribe({
        next: (e) => {
          if (e.type === 'caution' && e.kind !== 'passive-source') process.stdout.write(`CAUTION [${e.kind}] ${e.message}\n`);
          else if (e.type === 'rejected') process.stderr.write(`skipped: ${e.reason}\n`);
        },
        error: () => undefined,
      });
      let closed = false;
      const close = async (why: string) => {
        if (closed) return;
        closed = true;
        feed.stop();
        passive.close('completed', why);
        await srv?.close();
        await pub?.stop(3000);
        process.stdout.write(`stopped: ${why}; ${feed.stats.readings} readings in ${feed.stats.sweeps} sweep(s), ${feed.stats.rejected} row(s) skipped\n`);
        process.exit(0);
      };
      process.on('SIGINT', () => void close('interrupted (SIGINT)'));
      process.on('SIGTERM', () => void close('terminated (SIGTERM)'));
      await feed.done;
      await close('the source ended');
    });

  program
    .command('ports')
    .description('list the serial ports this machine has (USB adapters show their stable /dev/serial/by-id name)')
    .option('--json', 'print one JSON object')
    .action(async (o: { json?: boolean }) => {
      const { listSerialPorts } = await import('../../protocols/transport.js');
      const r = await listSerialPorts();
      if (o.json) {
        process.stdout.write(`${JSON.stringify(r)}\n`);
        return;
      }
      if (r.warning) process.stderr.write(`plumbline ports: ${r.warning}\n`);
      if (r.ports.length === 0) process.stdout.write('no serial ports found\n');
      for (const p of r.ports) {
        const about = [p.manufacturer, p.serialNumber ? `serial number ${p.serialNumber}` : undefined, p.vendorId ? `USB ${p.vendorId}:${p.productId ?? '?'}` : undefined].filter(Boolean).join(', ');
        process.stdout.write(`${p.byId ?? p.path}${p.byId ? `  (${p.path})` : ''}${about ? `  ${about}` : ''}\n`);
      }
    });

  program
    .command('report')
    .description('one self-contained HTML file for a session: settings, notes, plots with fits, parameter trends with drift limits, cautions, results')
    .argument('<session-dir>', 'a session folder')
    .option('--out <file>', 'output file (default SESSION_DIR/report.html)')
    .action(async (dir: string, o: { out?: string }) => {
      const { writeReport } = await import('../journal/report.js');
      const r = writeReport(resolve(dir), o.out !== undefined ? resolve(o.out) : undefined);
      process.stdout.write(`report of ${r.sweeps} sweep(s) written to ${r.file}\n`);
    });

  program
    .command('refit')
    .description('analyse every sweep of a session again with another model, window or inputs (the journal is not changed; results go to a new file)')
    .argument('<session-dir>', 'a session folder')
    .option('--model <id>', 'model (default: the session\'s)')
    .option('--from <V>', 'fit window start, V')
    .option('--to <V>', 'fit window end, V')
    .option('--auto', 'choose the fit window automatically')
    .option('--thickness <q>', 'film thickness, e.g. "8 nm"')
    .option('--area <q>', 'device area, e.g. "1e-4 cm^2"')
    .option('--temperature <q>', 'temperature, e.g. "300 K"')
    .option('--mass-ratio <r>', 'tunnelling effective-mass ratio m*/m0')
    .option('--permittivity <r>', 'relative permittivity (static)')
    .option('--refractive-index <r>', 'refractive index')
    .option('--flat-band <q>', 'flat-band voltage, e.g. "-0.9 V"')
    .option('--richardson <q>', 'Richardson constant, e.g. "120 A/(cm^2 K^2)"')
    .option('--out <file>', 'results file (default SESSION_DIR/refit-MODEL-TIME.json)')
    .option('--json', 'print one JSON object')
    .action(async (dir: string, o: Record<string, string | boolean | undefined>) => {
      const { refitSession } = await import('../journal/refit.js');
      const { readInputs, readWindow } = await import('./inputs.js');
      const inputs = Object.fromEntries(Object.entries(readInputs(o as never)).filter(([, v]) => v !== undefined));
      const window = o.auto || o.from !== undefined || o.to !== undefined ? readWindow(o as never) : undefined;
      const r = refitSession(resolve(dir), { model: o.model as string | undefined, window, inputs }, o.out !== undefined ? resolve(String(o.out)) : undefined);
      if (o.json) {
        process.stdout.write(`${JSON.stringify(r)}\n`);
        return;
      }
      process.stdout.write(`refit of ${r.sweeps.length} sweep(s) with model ${r.request.model} → ${r.file}\n`);
      for (const sw of r.sweeps) {
        const p = sw.fit ? Object.entries(sw.fit.parameters).slice(0, 3).map(([k, v]) => `${k} ${formatParameterText(v, k)}`).join(', ') : `no fit: ${sw.error}`;
        process.stdout.write(`  sweep ${String(sw.sweep).padStart(3)}: ${p}\n`);
      }
    });

  program
    .command('tseries')
    .description('Arrhenius plot of a fitted quantity across sweeps at several temperatures (trap depth, barrier, activation energy)')
    .argument('<session-dir>', 'a session folder')
    .option('--model <id>', 'model fitted to each sweep (default: the session\'s)')
    .option('--quantity <q>', 'intercept (the line\'s, a logarithm) or the name of a positive fitted parameter', 'intercept')
    .option('--temperatures <list>', 'temperature of each sweep in order, in K, comma separated (default: from notes "T = 350 K")')
    .option('--json', 'print one JSON object')
    .action(async (dir: string, o: { model?: string; quantity: string; temperatures?: string; json?: boolean }) => {
      const { temperatureSeries } = await import('../journal/tseries.js');
      let temperatures: number[] | undefined;
      if (o.temperatures !== undefined) {
        temperatures = o.temperatures.split(',').map((t) => Number(t.trim().replace(/\s*K$/i, '')));
        const bad = temperatures.findIndex((t) => !(t > 0));
        if (bad >= 0) throw new UsageError(`--temperatures: entry ${bad + 1} ('${o.temperatures.split(',')[bad].trim()}') is not a temperature in K`);
      }
      const r = temperatureSeries(resolve(dir), { model: o.model, quantity: o.quantity, temperatures });
      if (o.json) {
        process.stdout.write(`${JSON.stringify(r)}\n`);
        return;
      }
      process.stdout.write(`Arrhenius plot of the ${r.model} ${r.quantity} over ${r.points.length} sweep(s)\n`);
      for (const p of r.points) process.stdout.write(`  sweep ${String(p.sweep).padStart(3)}  T = ${formatNumber(p.temperature, 5)} K  ${r.quantity} ${formatParameterText({ value: p.value, stdErr: p.stdErr, unit: '' })}\n`);
      for (const k of r.skipped) process.stdout.write(`  skipped sweep ${k.sweep}: ${k.reason}\n`);
      const e = r.result.activationEnergy;
      process.stdout.write(`activation energy ${formatParameterText({ value: e.value, stdErr: e.stdErr, unit: 'eV' })} — ${r.meaning}\n`);
    });

  program
    .command('export')
    .description('write points.csv, sweeps.csv and session.json from a session folder')
    .argument('<session-dir>', 'a session folder (under the data folder)')
    .option('--out <dir>', 'output folder (default SESSION_DIR/export)')
    .option('--json', 'print one JSON object')
    .action(async (dir: string, o: { out?: string; json?: boolean }) => {
      const { exportSession } = await daemonModules();
      const r = exportSession(resolve(dir), o.out !== undefined ? resolve(o.out) : undefined);
      if (o.json) process.stdout.write(`${JSON.stringify(r)}\n`);
      else {
        process.stdout.write(`${r.readings} readings in ${r.sweeps} sweep(s) exported to ${r.outDir}\n`);
        for (const b of r.badLines) process.stdout.write(`  skipped journal line ${b.line}: ${b.problem}\n`);
      }
    });

  withDeviceOptions(program
    .command('annotate')
    .description('add a note (free text and tags) to a session, or to one of its sweeps; with device options, correct the session\'s device identity (wafer, site, x, y, area …)')
    .argument('<session-dir>', 'a session folder')
    .option('--text <text>', 'the note (required unless device options are given)')
    .option('--tag <tag...>', 'tags (repeatable)')
    .option('--sweep <n>', 'the sweep the note is about (default: the whole session)'))
    .action(async (dir: string, o: DeviceOptions & { text?: string; tag?: string[]; sweep?: string }) => {
      const { liveLockHolder, annotateFolder } = await daemonModules();
      const holder = liveLockHolder(resolve(dir));
      if (holder !== undefined) throw new UsageError(`${dir} is being written by the running daemon (pid ${holder}); annotate through its API: POST /api/annotations`);
      let sweep: number | undefined;
      if (o.sweep !== undefined) {
        sweep = Number(o.sweep);
        if (!Number.isInteger(sweep) || sweep < 1) throw new UsageError(`--sweep '${o.sweep}': expected a sweep number ≥ 1`);
      }
      const device = await readDevice(o);
      if (o.text === undefined && device === undefined) throw new UsageError('give --text (the note), device options (--wafer, --site, --x, --y, --area …), or both');
      if (o.text !== undefined && o.text.trim() === '') throw new UsageError('--text is empty');
      const text = o.text ?? `device identity corrected: ${describeDevice(device ?? {})}`;
      const e = annotateFolder(resolve(dir), { type: 'annotation', text, tags: o.tag ?? [], ...(sweep !== undefined ? { sweep } : {}), source: 'cli', ...(device ? { device } : {}) });
      process.stdout.write(`annotation ${e.seq} added to ${dir}\n`);
    });

  program
    .command('recover')
    .description('close sessions a crashed daemon left open (what run and serve do at start)')
    .argument('<dir>', 'a data folder, or one session folder')
    .option('--json', 'print one JSON object')
    .action(async (dir: string, o: { json?: boolean }) => {
      const { recoverSession, recoverAll } = await daemonModules();
      const abs = resolve(dir);
      let reports: import('../journal/reader.js').RecoveryReport[];
      try {
        reports = [recoverSession(abs)];
      } catch {
        reports = recoverAll(abs);
      }
      if (o.json) process.stdout.write(`${JSON.stringify({ reports })}\n`);
      else if (reports.length === 0) process.stdout.write('nothing to recover\n');
      else for (const r of reports) process.stdout.write(`${r.dir}: ${r.message}\n`);
    });
}
