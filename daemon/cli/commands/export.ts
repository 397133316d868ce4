/**
 * `plumbline export`: points.csv, sweeps.csv and session.json from a session folder.
 */
import { resolve } from 'node:path';
import type { Command } from 'commander';
import { daemonModules, } from '../station-common.js';

export function registerExport(program: Command): void {
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
}
