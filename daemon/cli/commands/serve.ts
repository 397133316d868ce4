/**
 * `plumbline serve`: the station daemon with its page and API; the output goes off on SIGINT,
 * SIGTERM and uncaught exceptions.
 */
import type { Command } from 'commander';
import { UsageError } from '../usage.js';
import { Log } from '../log.js';
import {
  daemonModules,
  describe,
  guardProcess,
  PUBLISH_HELP,
  STATION_HELP,
  startPublishing,
  stationConfig,
  type PublishOptions,
  type StationOptions,
} from '../station-common.js';

export function registerServe(program: Command): void {
  program
    .command('serve')
    .description('the station daemon with its page and API (default: the built-in simulated instrument)')
    .option('--config <file>', 'station config (default config/station.json)')
    .option('--port <n>', "HTTP port (default: the config's, 8470; 0 = any free port)")
    .option('--host <addr>', 'address to listen on (default 127.0.0.1; anything else needs server.token in the config)')
    .option('--scenario <name>', 'use the built-in simulated instrument with this scenario')
    .option('--data <dir>', "folder for session folders (default: the config's, plumbline-data)")
    .option(
      '--fast',
      "simulated instrument: answer at once, and let every wait (ramp delays, point delays, a breakdown test's step and sampling times) pass on its own clock",
    )
    .option('--no-autostart', 'do not start the default plan at once even if the config says so')
    .option(
      '--start-on-page',
      'with autostart: start the default plan when the first page connects (npm start does this, so a newcomer sees the demo from its start)',
    )
    .option('--publish <url>', PUBLISH_HELP)
    .option('--station <id>', STATION_HELP)
    .option('--quiet', 'log only notices (the page address, runs starting and ending), cautions and errors')
    .option('--verbose', 'also log every fit, drift statistic, decision and output change')
    .action(
      async (
        o: StationOptions & PublishOptions & { port?: string; host?: string; autostart: boolean; startOnPage?: boolean; quiet?: boolean; verbose?: boolean },
      ) => {
        const log = Log.from(o);
        const config = await stationConfig(o);
        const { dataDir, Station, startServer } = await daemonModules();
        const data = dataDir(config, o.data);
        const port = o.port !== undefined ? Number(o.port) : config.server.port;
        if (!Number.isInteger(port) || port < 0 || port > 65535) throw new UsageError(`--port '${o.port}': expected a port number`);
        const station = new Station(config, data);
        for (const r of station.recovered) (r.outputMayBeOn ? log.warn.bind(log) : log.notice.bind(log))(`journal ${r.dir}: ${r.message}`);
        const srv = await startServer(station, {
          host: o.host ?? config.server.host,
          port,
          token: config.server.token,
          allowedHosts: config.server.allowedHosts,
        });
        const pub = await startPublishing(config, data, o, srv.url);
        guardProcess(station, async () => void (await Promise.all([srv.close(), pub?.stop(1000)])));
        station.events$.subscribe({
          next: (e) => {
            if (e.type === 'session') log.notice(`session ${e.id} started`);
            else if (e.type === 'run-end') log.notice(`run ended: ${e.outcome} — ${e.reason}`);
            else if (e.type === 'caution') log.warn(`CAUTION [${e.kind}] ${e.message}`);
            else if (e.type === 'output') {
              // Whether the output went off, and whether the instrument said so, at every log level.
              const line = describe(e) ?? '';
              // A command that could not be sent, or an instrument that does not confirm it, is a warning;
              // the command on its way before the instrument's answer is not.
              if (e.sent === false || (e.queried && !e.confirmed)) log.warn(line);
              else log.notice(line);
            } else if (log.threshold === 'debug') {
              const line = describe(e);
              if (line) log.debug(line.trim());
            }
          },
          error: () => undefined,
        });
        log.notice(`plumbline daemon: ${config.name}`);
        log.notice(`page  ${srv.url}`);
        log.notice(`data  ${data}`);
        log.notice(`instrument: ${config.instrument.kind}${station.scenario ? ` (scenario ${station.scenario.name})` : ''}`);
        log.warn("CAUTION: on a real station the output can reach hazardous voltages. Follow your lab's safety rules.");
        if (config.autostart && o.autostart) {
          if (o.startOnPage) {
            // The demo waits for someone to watch it: it starts when the first page connects.
            log.notice(`the demo run starts when the page connects: open ${srv.url}`);
            while (srv.hub.stats.clients === 0) await new Promise((r) => setTimeout(r, 200));
          }
          const h = await station.startRun({});
          log.notice(`demo run started: ${h.session}`);
          h.done.catch(() => undefined);
        }
        await new Promise(() => undefined);
      },
    );
}
