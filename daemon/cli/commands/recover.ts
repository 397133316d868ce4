/**
 * `plumbline recover`: close sessions a crashed daemon left open.
 */
import { existsSync } from 'node:fs';
import { resolve } from 'node:path';
import type { Command } from 'commander';
import { notFound } from '../../../protocols/file-problem.js';
import { UsageError } from '../usage.js';
import { daemonModules } from '../station-common.js';

export function registerRecover(program: Command): void {
  program
    .command('recover')
    .description('close sessions a crashed daemon left open (what run and serve do at start)')
    .argument('<dir>', 'a data folder, or one session folder')
    .option('--json', 'print one JSON object')
    .action(async (dir: string, o: { json?: boolean }) => {
      const { recoverSession, recoverAll } = await daemonModules();
      const abs = resolve(dir);
      if (!existsSync(abs)) throw new UsageError(`${dir}: ${notFound(dir, 'folder')}`);
      let reports: import('../../journal/reader.js').RecoveryReport[];
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
