/**
 * `plumbline report`: one self-contained HTML file for a session.
 */
import { resolve } from 'node:path';
import type { Command } from 'commander';
import { sessionDirs, withArchiveSessions, type ArchiveSessionOptions } from '../lab.js';

export function registerReport(program: Command): void {
  withArchiveSessions(
    program
      .command('report')
      .description('one self-contained HTML file for a session: settings, notes, plots with fits, parameter trends with drift limits, cautions, results')
      .argument('[session-dir]', 'a session folder')
      .option('--out <file>', 'output file (default SESSION_DIR/report.html)'),
    false,
  ).action(async (dir: string | undefined, o: ArchiveSessionOptions & { out?: string }) => {
    const { writeReport } = await import('../../journal/report.js');
    const [d] = await sessionDirs(dir, o, true);
    const r = writeReport(d, o.out !== undefined ? resolve(o.out) : undefined);
    if (r.unfinished) process.stderr.write(`warning: ${d}: ${r.unfinished}\n`);
    process.stdout.write(`report of ${r.sweeps} sweep(s) written to ${r.file}\n`);
  });
}
