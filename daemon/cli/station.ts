/**
 * The station commands, one file each in daemon/cli/commands/: run, serve, watch, ports, report,
 * refit, tseries, export, annotate, recover.
 */
import type { Command } from 'commander';
import { registerRun } from './commands/run.js';
import { registerServe } from './commands/serve.js';
import { registerWatch } from './commands/watch.js';
import { registerPorts } from './commands/ports.js';
import { registerReport } from './commands/report.js';
import { registerRefit } from './commands/refit.js';
import { registerTseries } from './commands/tseries.js';
import { registerExport } from './commands/export.js';
import { registerAnnotate } from './commands/annotate.js';
import { registerRecover } from './commands/recover.js';

export function registerStation(program: Command): void {
  registerRun(program);
  registerServe(program);
  registerWatch(program);
  registerPorts(program);
  registerReport(program);
  registerRefit(program);
  registerTseries(program);
  registerExport(program);
  registerAnnotate(program);
  registerRecover(program);
}
