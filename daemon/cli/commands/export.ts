/**
 * `plumbline export`: points.csv, sweeps.csv and session.json from a session folder.
 */
import { resolve } from 'node:path';
import type { Command } from 'commander';
import { UsageError } from '../usage.js';
import { sessionDirs, withArchiveSessions, type ArchiveSessionOptions } from '../lab.js';
import { daemonModules } from '../station-common.js';

export function registerExport(program: Command): void {
  withArchiveSessions(
    program
      .command('export')
      .description('write points.csv, sweeps.csv and session.json from a session folder (or from sessions in the archive)')
      .argument('[session-dir]', 'a session folder (under the data folder)')
      .option('--out <dir>', 'output folder (default SESSION_DIR/export)')
      .option('--json', 'print one JSON object (one per session with --postgres)'),
    true,
  ).action(async (dir: string | undefined, o: ArchiveSessionOptions & { out?: string; json?: boolean }) => {
    const { exportSession } = await daemonModules();
    const dirs = await sessionDirs(dir, o, false);
    if (o.out !== undefined && dirs.length > 1)
      throw new UsageError("--out names one folder: with several sessions each is exported into its own folder's export/");
    for (const d of dirs) {
      const r = exportSession(d, o.out !== undefined ? resolve(o.out) : undefined);
      if (r.unfinished) process.stderr.write(`warning: ${d}: ${r.unfinished}\n`);
      if (o.json) process.stdout.write(`${JSON.stringify(r)}\n`);
      else {
        process.stdout.write(`${r.readings} readings in ${r.sweeps} sweep(s) exported to ${r.outDir}\n`);
        for (const b of r.badLines) process.stdout.write(`  skipped journal line ${b.line}: ${b.problem}\n`);
      }
    }
  });
}
