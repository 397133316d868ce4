/**
 * Rankings are throttled in time (a ranking fits every mechanism); on a fast run whose sweeps end
 * within milliseconds, the one the page and the journal end on must still be the last complete
 * sweep's, not the first's. Real station, driver and SCPI session against the simulator (fast mode).
 */
import { readdirSync } from 'node:fs';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { scanJournal } from '../../daemon/journal/reader.js';
import { runCli } from '../helpers/cli.js';
import { tempDir } from '../helpers/daemon.js';

describe('the ranking a fast run ends on', () => {
  it('is the last complete sweep’s', () => {
    const data = join(tempDir(), 'data');
    const r = runCli(['run', '--scenario', 'oxide-fn', '--fast', '--sweeps', '6', '--data', data]);
    expect(r.code, r.stderr).toBe(0);
    const ranked: number[] = [];
    let lastSweep = 0;
    scanJournal(join(data, readdirSync(data)[0]), (e) => {
      if (e.type === 'ranking') ranked.push(e.sweep);
      if (e.type === 'sweep-end' && e.complete) lastSweep = e.sweep;
    });
    expect(lastSweep).toBe(6);
    expect(ranked.at(-1)).toBe(6);
    // Still throttled in between: not every sweep is ranked on a fast run.
    expect(ranked.length).toBeLessThanOrEqual(6);
  });
});
