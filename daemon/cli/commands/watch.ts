/**
 * `plumbline watch`: readings another program produces (a growing CSV, standard input, a TCP or
 * serial line stream) through the live chain, journal and page, with no control of the instrument.
 */
import type { Command } from 'commander';
import { UsageError } from '../usage.js';
import { notFound } from '../../../protocols/file-problem.js';
import { Log } from '../log.js';
import { daemonModules, describe, PUBLISH_HELP, serialSettings, STATION_HELP, startPublishing, stationConfig, type PublishOptions } from '../station-common.js';

export function registerWatch(program: Command): void {
  program
    .command('watch')
    .description(
      'follow readings another program produces — a CSV it is writing, standard input, a TCP or serial line stream — segment sweeps, and run the live chain, journal and page on them, with no control of the instrument',
    )
    .argument('<source>', 'the CSV being written; - for standard input; tcp://HOST:PORT; or serial:PATH (e.g. serial:/dev/ttyUSB0)')
    .option(
      '--voltage <col>',
      'voltage column, by header name or 1-based position (default: a column named voltage, bias or V, with or without a unit such as _V or (mV), else the first); a unit in the header is converted to V',
    )
    .option(
      '--current <col>',
      'current column (default: a column named current or I, with or without a unit such as _A or (nA), else the next one); a unit in the header is converted to A',
    )
    .option('--compliance-column <col>', 'column flagging readings at compliance (non-zero; default: a column named compliance, if any)')
    .option('--temperature-column <col>', 'column with the device temperature in K: each sweep gets a note "T = … K" (for plumbline tseries)')
    .option(
      '--temperature-step <kelvin>',
      "with --temperature-column: a reading this many kelvin from the sweep's recent temperatures starts a new sweep (default 2)",
    )
    .option('--model <id>', "live-fit model (default: the --config's analysis model, else ohmic)")
    .option(
      '--thickness <q>',
      'film thickness, e.g. "8 nm" (the live fit\'s inputs come from these options and the analysis section of a --config, nothing else)',
    )
    .option('--area <q>', 'device area, e.g. "1e-4 cm^2"')
    .option('--temperature <q>', 'temperature, e.g. "300 K" or "25 degC"')
    .option('--mass-ratio <r>', 'tunnelling effective-mass ratio m*/m0')
    .option('--permittivity <r>', 'relative permittivity (static)')
    .option('--refractive-index <r>', 'refractive index n')
    .option('--flat-band <q>', 'flat-band voltage, e.g. "-0.9 V"')
    .option('--richardson <q>', 'Richardson constant, e.g. "120 A/(cm^2 K^2)"')
    .option('--config <file>', 'station config (analysis, drift, server, data settings)')
    .option('--data <dir>', "folder for the session folder (default: the config's, plumbline-data)")
    .option('--port <n>', "serve the page on this port (default: the config's; 0 = any free port)")
    .option('--no-page', 'do not serve the page')
    .option('--baud <n>', 'serial: baud rate', '9600')
    .option('--data-bits <n>', 'serial: 5, 6, 7 or 8', '8')
    .option('--parity <p>', 'serial: none, even, odd, mark or space', 'none')
    .option('--stop-bits <n>', 'serial: 1, 1.5 or 2', '1')
    .option('--rtscts', 'serial: hardware flow control (RTS/CTS)')
    .option('--xonxoff', 'serial: software flow control (XON/XOFF)')
    .option('--quiet', 'log only notices, cautions and errors')
    .option('--verbose', 'also log every fit, drift statistic, decision and output change')
    .option('--read-terminator <t>', 'serial and TCP: what ends a line: lf (a trailing CR is dropped), crlf or cr', 'lf')
    .option('--publish <url>', PUBLISH_HELP)
    .option('--station <id>', STATION_HELP)
    .action(
      async (
        spec: string,
        o: PublishOptions & {
          voltage?: string;
          current?: string;
          complianceColumn?: string;
          temperatureColumn?: string;
          temperatureStep?: string;
          model?: string;
          config?: string;
          data?: string;
          port?: string;
          page: boolean;
          baud: string;
          dataBits: string;
          parity: string;
          stopBits: string;
          rtscts?: boolean;
          xonxoff?: boolean;
          readTerminator: string;
          quiet?: boolean;
          verbose?: boolean;
        },
      ) => {
        const log = Log.from(o);
        const config = await stationConfig({ config: o.config });
        const { dataDir, Station, startServer } = await daemonModules();
        const { feedPassive, DEFAULT_TEMPERATURE_STEP } = await import('../../pipeline/passive.js');
        let temperatureStep = DEFAULT_TEMPERATURE_STEP;
        if (o.temperatureStep !== undefined) {
          temperatureStep = Number(o.temperatureStep);
          if (o.temperatureStep.trim() === '' || !(temperatureStep > 0) || !Number.isFinite(temperatureStep))
            throw new UsageError(`--temperature-step '${o.temperatureStep}': expected a positive number of kelvin, e.g. 2`);
          if (o.temperatureColumn === undefined) throw new UsageError('--temperature-step needs --temperature-column (the column it watches)');
        }
        const { fileLines, streamLines, tcpLines, serialLines, parseSourceSpec } = await import('../../../protocols/line-source.js');
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
        if (src.kind === 'file' && !existsSync(src.path))
          throw new UsageError(`${src.path}: ${notFound(src.path)} (watch follows a file that exists: create it first, even empty)`);
        const where =
          src.kind === 'stdin'
            ? 'standard input'
            : src.kind === 'tcp'
              ? `TCP ${src.host}:${src.port}`
              : src.kind === 'serial'
                ? `serial ${src.path}`
                : src.path;
        const station = new Station(config, dataDir(config, o.data));
        for (const r of station.recovered) log.notice(`journal ${r.dir}: ${r.message}`);
        // Another program's data, another device: the analysis and the device's inputs come from the
        // options and from a config the user names (its analysis section), never from the demo
        // scenario of the default station config. The fit window is found automatically unless the
        // config fixes one.
        const { readInputs } = await import('../inputs.js');
        const given = Object.fromEntries(Object.entries(readInputs(o as never)).filter(([, v]) => v !== undefined));
        const own = config.analysis;
        const analysis = station.setAnalysis(
          {
            ...(own ?? {}),
            model: o.model ?? own?.model ?? 'ohmic',
            inputs: { ...(own?.inputs ?? {}), ...given },
            window: own?.window ?? 'auto',
          },
          'cli',
        );
        // A model that needs an input nobody gave stops here, as `fit` does (exit 2).
        const { MODEL_IDS, getMechanism } = await import('../../analysis/mechanisms/index.js');
        if (MODEL_IDS.includes(analysis.model) && analysis.model !== 'custom') {
          const { resolveInputs } = await import('../../analysis/analyze.js');
          resolveInputs(getMechanism(analysis.model), analysis.inputs);
        }
        const { formatInputs } = await import('../../../protocols/display-units.js');
        const fromConfig = Object.fromEntries(Object.entries(analysis.inputs).filter(([k]) => !(k in given)));
        log.notice(
          `analysis: ${analysis.model}${o.model === undefined ? (own?.model !== undefined ? ` (from ${o.config})` : ' (the default; choose one with --model)') : ''}; inputs ${formatInputs(given) || 'none'} from the options${Object.keys(fromConfig).length ? `, ${formatInputs(fromConfig)} from ${o.config}` : ''}${Object.keys(given).length ? '' : ' (give --thickness, --area, --temperature … for this device)'}`,
        );
        const mapping = { voltage: o.voltage, current: o.current, compliance: o.complianceColumn, temperature: o.temperatureColumn };
        // A file's header is read before the session opens: columns it lacks stop watch here (exit 2).
        if (src.kind === 'file') {
          const { CsvRowMapper } = await import('../../../protocols/csv-rows.js');
          const { openSync, readSync, closeSync } = await import('node:fs');
          const fd = openSync(src.path, 'r');
          const head = Buffer.alloc(65536);
          const n = readSync(fd, head, 0, head.length, 0);
          closeSync(fd);
          const lines = head.subarray(0, n).toString('utf8').split('\n');
          // The last piece may be a line still being written.
          if (n === head.length || !head.subarray(0, n).toString('utf8').endsWith('\n')) lines.pop();
          const peek = new CsvRowMapper(mapping, where);
          for (const line of lines) {
            peek.map(line.replace(/\r$/, ''));
            if (peek.columns) break;
          }
        }
        let srv: Awaited<ReturnType<typeof startServer>> | undefined;
        if (o.page) {
          const port = o.port !== undefined ? Number(o.port) : config.server.port;
          if (!Number.isInteger(port) || port < 0 || port > 65535) throw new UsageError(`--port '${o.port}': expected a port number`);
          srv = await startServer(station, { host: config.server.host, port, token: config.server.token, allowedHosts: config.server.allowedHosts });
        }
        let source: import('../../../protocols/line-source.js').LineSource;
        try {
          source =
            src.kind === 'stdin'
              ? streamLines(process.stdin, 65536, term)
              : src.kind === 'tcp'
                ? await tcpLines(src.host, src.port, term)
                : src.kind === 'serial'
                  ? await serialLines(serial!, term)
                  : await fileLines(src.path);
        } catch (e) {
          await srv?.close();
          throw new UsageError(`cannot open ${where}: ${(e as Error).message}`);
        }
        const pub = await startPublishing(config, dataDir(config, o.data), o, srv?.url ?? null);
        // Subscribed before the session opens: its first caution (no control of the instrument) is printed too.
        station.events$.subscribe({
          next: (e) => {
            if (e.type === 'caution') log.warn(`CAUTION [${e.kind}] ${e.message}`);
            else if (e.type === 'rejected') log.warn(`skipped: ${e.reason}`);
            else if (log.threshold === 'debug') {
              const line = describe(e);
              if (line) log.debug(line.trim());
            }
          },
          error: () => undefined,
        });
        const passive = station.openPassive('watch', where);
        const feed = feedPassive(source, passive.chain, mapping, where, temperatureStep, (_c, text) => log.notice(text));
        log.notice(`watching ${where} → session ${passive.session}`);
        log.notice(`folder ${passive.dir}`);
        if (srv) log.notice(`page  ${srv.url}`);
        log.notice('Ctrl-C stops watching.');
        let closed = false;
        /** Ends the session; `failure`: the source's header does not fit the options (exit 2). */
        const close = async (why: string, failure?: Error) => {
          if (closed) return;
          closed = true;
          feed.stop(why);
          passive.close(failure ? 'stopped' : 'completed', why);
          await srv?.close();
          await pub?.stop(3000);
          log.notice(`stopped: ${why}; ${feed.stats.readings} readings in ${feed.stats.sweeps} sweep(s), ${feed.stats.rejected} row(s) skipped`);
          if (failure) throw failure;
          process.exit(0);
        };
        process.on('SIGINT', () => void close('interrupted (SIGINT)'));
        process.on('SIGTERM', () => void close('terminated (SIGTERM)'));
        let failure: Error | undefined;
        await feed.done.catch((e: Error) => {
          failure = e;
        });
        await close(failure ? `the source's columns do not fit the options: ${failure.message}` : 'the source ended', failure);
      },
    );
}
