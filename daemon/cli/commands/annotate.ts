/**
 * `plumbline annotate`: a note (and device corrections) added to a session.
 */
import { resolve } from 'node:path';
import type { Command } from 'commander';
import { deviceLine } from '../../../protocols/breakdown-display.js';
import { readDevice, withDeviceOptions, type DeviceOptions } from '../device.js';
import { UsageError } from '../usage.js';
import { daemonModules } from '../station-common.js';

export function registerAnnotate(program: Command): void {
  withDeviceOptions(
    program
      .command('annotate')
      .description(
        "add a note (free text and tags) to a session, or to one of its sweeps; with device options, correct the session's device identity (wafer, site, x, y, area …)",
      )
      .argument('<session-dir>', 'a session folder')
      .option('--text <text>', 'the note (required unless device options are given)')
      .option('--tag <tag...>', 'tags (repeatable)')
      .option('--sweep <n>', 'the sweep the note is about (default: the whole session)'),
  ).action(async (dir: string, o: DeviceOptions & { text?: string; tag?: string[]; sweep?: string }) => {
    const { liveLockHolder, annotateFolder } = await daemonModules();
    const holder = liveLockHolder(resolve(dir));
    if (holder !== undefined)
      throw new UsageError(
        `${dir} is being written by a running plumbline process (pid ${holder}); if it is \`plumbline serve\`, add the note through its page (Note) or its API (POST /api/annotations); if it is \`plumbline run\` or \`watch\` without a page, annotate once it has ended`,
      );
    let sweep: number | undefined;
    if (o.sweep !== undefined) {
      sweep = Number(o.sweep);
      if (!Number.isInteger(sweep) || sweep < 1) throw new UsageError(`--sweep '${o.sweep}': expected a sweep number ≥ 1`);
    }
    const device = await readDevice(o);
    if (o.text === undefined && device === undefined)
      throw new UsageError('give --text (the note), device options (--wafer, --site, --x, --y, --area …), or both');
    if (o.text !== undefined && o.text.trim() === '') throw new UsageError('--text is empty');
    const text = o.text ?? `device identity corrected: ${deviceLine(device as Record<string, unknown> | undefined)}`;
    let e: ReturnType<typeof annotateFolder>;
    try {
      e = annotateFolder(resolve(dir), {
        type: 'annotation',
        text,
        tags: o.tag ?? [],
        ...(sweep !== undefined ? { sweep } : {}),
        source: 'cli',
        ...(device ? { device } : {}),
      });
    } catch (err) {
      // A sweep the session does not hold: the user's mistake, said as such.
      if ((err as { status?: number }).status === 400) throw new UsageError(`--sweep: ${(err as Error).message}`);
      throw err;
    }
    process.stdout.write(`annotation ${e.seq} added to ${dir}\n`);
  });
}
