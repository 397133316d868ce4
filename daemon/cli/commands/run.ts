/**
 * `plumbline run`: a plan headless — progress on the terminal, a session folder, an exit code by
 * outcome; the output goes off on SIGINT, SIGTERM and uncaught exceptions.
 */
import type { Command } from 'commander';
import { readDevice, withDeviceOptions, type DeviceOptions } from '../device.js';
import { UsageError } from '../usage.js';
import {
  daemonModules,
  describe,
  guardProcess,
  PUBLISH_HELP,
  readJson,
  STATION_HELP,
  startPublishing,
  stationConfig,
  type PublishOptions,
  type StationOptions,
} from '../station-common.js';

export function registerRun(program: Command): void {
  withDeviceOptions(
    program
      .command('run')
      .description('run a sweep plan headless: progress on the terminal, a session folder under --data, exit code by outcome')
      .option('--config <file>', 'station config (default config/station.json: the built-in simulated instrument)')
      .option('--plan <file>', "sweep plan JSON (default: the config's plan, or the scenario's)")
      .option('--sweeps <n>', "number of sweeps (overrides the plan's repeat)")
      .option('--scenario <name>', 'use the built-in simulated instrument with this scenario (plumbline sim --list)')
      .option('--model <id>', "live-fit model (default: the config's or the scenario's)")
      .option('--data <dir>', "folder under which the run creates its session folder (default: the config's, plumbline-data)")
      .option(
        '--fast',
        "simulated instrument: answer at once, and let every wait (ramp delays, point delays, a breakdown test's step and sampling times) pass on its own clock",
      )
      .option('--json', 'print one JSON object at the end instead of the progress text')
      .option('--publish <url>', PUBLISH_HELP)
      .option('--station <id>', STATION_HELP)
      .option('--override-disk-check', 'run a plan whose journal would not fit in the free disk space (refused otherwise)')
      .addHelpText(
        'after',
        '\nA plan file may also carry the device under test: {"kind": …, "device": {"wafer": "W07", "site": "C4", "x": 3, "y": -2, "area": 1e-8}} (SI); the options above override its fields.\nExit codes: 0 completed or stopped, 2 bad input, 3 aborted by the user, 4 aborted by drift, 5 aborted by breakdown, 6 instrument fault (no usable reading, replies out of step, no answer), 7 refused by the safety guard (a plan beyond the station limits too), 8 interrupted (a signal), 9 the journal could not be written (disk full), 10 internal error.',
      ),
  ).action(
    async (
      o: StationOptions & DeviceOptions & PublishOptions & { plan?: string; sweeps?: string; model?: string; json?: boolean; overrideDiskCheck?: boolean },
    ) => {
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
          const { parseDeviceIdentity } = await import('../../../protocols/device-results.js');
          parseDeviceIdentity(planDevice, `${o.plan}: device`);
        }
      } else if (o.plan !== undefined) parsePlan(plan, o.plan);
      if (o.sweeps !== undefined) {
        const n = Number(o.sweeps);
        if (!Number.isInteger(n) || n < 1) throw new UsageError(`--sweeps '${o.sweeps}': expected a whole number ≥ 1`);
        plan = plan === undefined ? { ...station.defaultPlan(n) } : { ...(plan as object), repeat: n };
      }
      if (o.overrideDiskCheck) plan = { ...((plan ?? station.defaultPlan()) as object), overrideDiskCheck: true };
      const analysis =
        o.model !== undefined
          ? { ...station.analysisSettings, model: o.model, ...(o.model !== station.analysisSettings.model ? { window: 'auto' } : {}) }
          : undefined;
      const device = await readDevice(o);
      const pub = await startPublishing(config, data, o, null);
      const leaving = guardProcess(station, async () => void (await pub?.stop(1000)), { signal: EXIT_CODE.interrupted, error: EXIT_CODE['internal-error'] });
      const tty = process.stdout.isTTY && !o.json;
      let progressShown = false;
      // Every caution of the run, for --json: a script must see what a person at the terminal sees.
      const cautions: { kind: string; sweep?: number; message: string }[] = [];
      // And every sweep's final fit, as the text mode prints it: parameters in SI with their errors.
      const fits: { sweep: number; model: string; plausible: boolean; parameters: Record<string, unknown>; warnings: readonly string[] }[] = [];
      station.events$.subscribe({
        next: (e) => {
          if (e.type === 'caution') cautions.push({ kind: e.kind, ...(e.sweep !== undefined ? { sweep: e.sweep } : {}), message: e.message });
          if (e.type === 'fit' && e.final && e.fit)
            fits.push({ sweep: e.sweep, model: e.fit.model, plausible: e.fit.plausible, parameters: e.fit.parameters, warnings: e.fit.warnings });
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
          // Nothing was started: no session, and the output was never turned on.
          if (o.json) process.stdout.write(`${JSON.stringify({ outcome: 'instrument-fault', reason: (e as Error).message, session: null, cautions })}\n`);
          process.stderr.write(`plumbline run: ${(e as Error).message}\n`);
          process.exit(EXIT_CODE['instrument-fault']);
        }
        // A plan beyond the station's limits is refused by the guard before anything is sent.
        const { GuardError } = await import('../../run/guard.js');
        if (e instanceof GuardError) {
          const reason = `refused by the safety guard: ${o.plan !== undefined ? `${o.plan}: ` : ''}${e.message} (station setting '${e.setting}')`;
          if (o.json) process.stdout.write(`${JSON.stringify({ outcome: 'guard-refused', reason, cautions })}\n`);
          process.stderr.write(`plumbline run: ${reason}\n`);
          process.exit(EXIT_CODE['guard-refused']);
        }
        // A plan the station refuses names the plan file, as the plan's own checks do.
        if (o.plan !== undefined && e instanceof Error && e.message.startsWith('plan: ')) e.message = `${o.plan}: ${e.message.slice(6)}`;
        throw e;
      }
      if (!o.json) {
        process.stdout.write(`session ${h.session}\n  folder ${h.dir}\n  plan: ${describePlan(h.plan)}\n`);
        process.stdout.write(
          "CAUTION: on a real station the output can reach hazardous voltages. Follow your lab's safety rules; these software limits do not replace the instrument's interlock.\n",
        );
      }
      const result = await h.done;
      if (o.json) process.stdout.write(`${JSON.stringify({ session: h.session, dir: h.dir, ...result, fits, cautions })}\n`);
      else
        process.stdout.write(
          `${progressShown ? '\n' : ''}run ended: ${result.outcome} — ${result.reason} (${result.sweeps} sweep(s) finished)\nexport it: plumbline export ${h.dir}\n`,
        );
      if (leaving()) return; // a signal or error ended the run: its handler finishes and exits
      // The journal is closed: hand the broker what it has not got yet (a broker that is down costs
      // a few seconds here, nothing more; the rest goes out on the next start).
      const left = await pub?.stop(5000);
      if (left && left.unsent.length > 0)
        process.stderr.write(`publish: not everything reached the broker; it is published on the next start with --publish\n`);
      // Exit explicitly: the journal is closed and the output is off; a serial port's native poller
      // can otherwise keep the event loop alive after close (seen with socat ptys).
      process.exit(EXIT_CODE[result.outcome]);
    },
  );
}
