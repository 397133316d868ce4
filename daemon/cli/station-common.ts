/**
 * What the station commands (run, serve, watch, export, annotate, recover, report, refit, tseries)
 * share: the daemon's modules loaded lazily, the station config with its command-line overrides,
 * publishing to a lab broker, the guard that turns the output off on every way out of the process,
 * and one line of text per journal event for the terminal.
 */
import { readFileSync } from 'node:fs';
import type { WireEvent } from '../../protocols/wire.js';
import type { StationConfig } from '../run/config.js';
import type { Station } from '../run/station.js';
import { UsageError } from './usage.js';
import { fileProblem } from '../../protocols/file-problem.js';
import { formatSweepFit } from './format.js';
import { numberRows, resultFigureRows, rowText } from '../../protocols/breakdown-display.js';
import { formatParameterText, formatQuantity } from '../../protocols/display-units.js';

// The daemon's modules (express, ws, serialport, rxjs) load only when a station command runs, so
// `plumbline fit` and friends keep their short start-up.
export const daemonModules = async () => ({
  ...(await import('../run/config.js')),
  ...(await import('../run/station.js')),
  ...(await import('../run/runner.js')),
  ...(await import('../server/app.js')),
  ...(await import('../journal/export.js')),
  ...(await import('../journal/journal.js')),
  ...(await import('../journal/reader.js')),
  ...(await import('../run/plan.js')),
});

export interface StationOptions {
  config?: string;
  scenario?: string;
  data?: string;
  fast?: boolean;
}

export interface PublishOptions {
  publish?: string;
  station?: string;
}

/**
 * Publishing to the lab's broker (--publish or the config's `publish`): it reads the journal in a
 * thread of its own, so the run neither waits for it nor notices a missing broker.
 */
export async function startPublishing(config: StationConfig, data: string, o: PublishOptions, page: string | null) {
  const url = o.publish ?? config.publish?.url;
  if (url === undefined) return undefined;
  const lab = await import('../lab/publishing.js');
  const h = lab.startPublishing({
    url,
    station: o.station ?? config.publish?.station,
    name: config.name,
    dataDir: data,
    page,
    tokenRequired: config.server.token !== undefined,
    log: (line) => process.stderr.write(`${line}\n`),
  });
  process.stderr.write(`publishing to ${h.display} as station ${h.station}\n`);
  return h;
}

export const PUBLISH_HELP =
  'publish the sessions to an MQTT broker (mqtt://HOST:PORT[/PREFIX]); credentials as user:password@ or PLUMBLINE_MQTT_USERNAME/PASSWORD';
export const STATION_HELP = "station id in the broker's topics (default: host name and data folder name)";

export async function stationConfig(o: StationOptions): Promise<StationConfig> {
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

export function readJson(file: string, what: string): unknown {
  let text: string;
  try {
    text = readFileSync(file, 'utf8');
  } catch (e) {
    throw new UsageError(`${what} ${file}: ${fileProblem(file, e)}`);
  }
  try {
    return JSON.parse(text);
  } catch (e) {
    // Say where, as a person counts: line and column (JSON.parse gives a character position).
    const msg = (e as Error).message;
    const pos = /at position (\d+)/.exec(msg);
    let where = '';
    if (pos) {
      const before = text.slice(0, Number(pos[1]));
      const line = before.split('\n').length;
      where = `line ${line}, column ${Number(pos[1]) - before.lastIndexOf('\n')}: `;
    }
    throw new UsageError(`${what} ${file}, ${where}not valid JSON: ${msg}`);
  }
}

/** Serial settings from watch's options; a bad value names its option. */
export function serialSettings(path: string, o: { baud: string; dataBits: string; parity: string; stopBits: string; rtscts?: boolean; xonxoff?: boolean }) {
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

/**
 * Output off on the way out, whatever the way out is: a signal ends the run as 'interrupted', an
 * uncaught error as 'internal-error'. `codes` are the process's exit codes for the two; by default
 * the shell's 128 + signal number (130 SIGINT, 143 SIGTERM, 129 SIGHUP) and 1. Returns a probe the
 * caller checks before exiting on its own, so the two exits never race.
 */
export function guardProcess(station: Station, onExit: () => Promise<void> | void, codes?: { signal: number; error: number }): () => boolean {
  let exiting = false;
  const leave = async (why: string, code: number, outcome: 'interrupted' | 'internal-error') => {
    if (exiting) return;
    exiting = true;
    // Only a run drives the output; with none running nothing is sent, and the message says so.
    process.stderr.write(
      `\nplumbline: ${why}; ${station.running ? 'turning the output off' : 'no run in progress (the station sends nothing to the instrument)'}\n`,
    );
    try {
      await station.emergencyStop(why, outcome);
      await onExit();
    } finally {
      process.exit(code);
    }
  };
  const signal = (name: string, why: string, n: number) => process.on(name, () => void leave(`${why} (${name})`, codes?.signal ?? 128 + n, 'interrupted'));
  signal('SIGINT', 'interrupted', 2);
  signal('SIGTERM', 'terminated', 15);
  // A closed terminal or ssh session: nobody is left watching the output.
  signal('SIGHUP', 'the terminal closed', 1);
  // A reader that went away (stderr closed) must not turn a message into a crash with the output on.
  process.stderr.on('error', () => undefined);
  process.on('uncaughtException', (e) => void leave(`uncaught exception: ${e.stack ?? e.message}`, codes?.error ?? 1, 'internal-error'));
  process.on('unhandledRejection', (e) => void leave(`unhandled rejection: ${(e as Error)?.stack ?? String(e)}`, codes?.error ?? 1, 'internal-error'));
  return () => exiting;
}

export function describe(e: WireEvent): string | undefined {
  switch (e.type) {
    case 'caution':
      return `CAUTION [${e.kind}] ${e.message}`;
    case 'decision':
      return `decision: ${e.action} — ${e.reason}`;
    case 'fit': {
      if (!e.final) return undefined;
      if (!e.fit) return `sweep ${e.sweep}: no fit (${e.error})`;
      // A wrong answer is never silent: an implausible fit says so, with every warning.
      const head = formatSweepFit(`sweep ${e.sweep}`, e.fit);
      const lines = [head, ...e.fit.warnings.map((w) => `         warning: ${w}`)];
      // An illuminated cell (analysis option solar): its figures of merit, in the trade's units.
      if (e.solar) {
        const figs = Object.entries(e.solar.figures)
          .filter(([, v]) => v && Number.isFinite(v.value))
          .map(([k, v]) => `${k} ${formatParameterText(v, k)}`);
        if (figs.length) lines.push(`         solar cell: ${figs.join(', ')}`);
        if (e.solar.error) lines.push(`         solar cell: no figures (${e.solar.error})`);
        for (const w of e.solar.warnings) lines.push(`         warning: ${w}`);
      }
      return lines.join('\n');
    }
    case 'drift':
      return e.state === 'baseline' || e.state === 'no-value'
        ? undefined
        : (() => {
            // In the parameter's display unit, as the fit line above it (mobility in cm²/(V·s), not m²/(V·s)).
            const u = e.unit ?? '';
            const q = (x: number | null) => formatQuantity(x ?? Number.NaN, u, e.parameter, 5);
            return `         drift of ${e.parameter}: ${e.state} (${e.method} ${q(e.statistic)}, limits ${q(e.lower)} … ${q(e.upper)})`;
          })();
    case 'output':
      if (e.queried) {
        if (e.on) return `output ON, confirmed by the instrument — ${e.reason}`;
        return e.confirmed ? `output off, confirmed by the instrument — ${e.reason}` : `output off NOT confirmed — ${e.reason}`;
      }
      if (e.on) return `output ON — ${e.reason}`;
      return e.sent === false ? `output off could NOT be sent — ${e.reason}` : `output off sent — ${e.reason}`;
    case 'test-result': {
      // The figures as the page and the report name and show them, one per line.
      const lines = resultFigureRows(e).map((r) => `         ${rowText(r)}`);
      const pace = numberRows(e.numbers, 'pace');
      if (pace.length) lines.push(`         ${pace.map(rowText).join(', ')}`);
      return [`${e.test}: ${e.outcome} — ${e.reason}`, ...lines].join('\n');
    }
    case 'adaptive-sweep':
      // The same number forms as the fit lines ("1.39e-6 C", "3.09988 ± 0.00015 eV"), not toPrecision's
      // "0.00000139".
      return `sweep ${e.sweep}: ${e.readings} readings, |bias| up to ${e.maxAbsBias.toPrecision(4)} V, ${formatQuantity(e.charge, 'C', undefined, 3)} passed; ${e.parameter ? `${e.parameter.name} = ${formatParameterText(e.parameter, e.parameter.name)}; ` : ''}stopped: ${e.stopReason}`;
    case 'recovery':
      return `journal: ${e.message}`;
    default:
      return undefined;
  }
}
