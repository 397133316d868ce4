/**
 * The built CLI, as a user runs it: the simulated solar cell's default analysis is a straight line
 * through the raw columns, whose fit gives no parameter, while the station's drift watch is on with
 * action 'abort'. The run says once — on the terminal, in --json and in the journal — that no drift
 * is watched, and which settings to change.
 */
import { readdirSync } from 'node:fs';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { scanJournal } from '../../daemon/journal/reader.js';
import type { WireEvent } from '../../protocols/wire.js';
import { runCli } from '../helpers/cli.js';
import { tempDir } from '../helpers/daemon.js';

describe('a drift watch on a model with no parameter', () => {
  it('the solar cell on its default straight line: one drift-not-watched caution on the terminal and in the journal', () => {
    const data = join(tempDir(), 'data');
    const r = runCli(['run', '--scenario', 'solar-cell', '--sweeps', '7', '--fast', '--data', data]);
    expect(r.code, r.stderr).toBe(0);
    const lines = r.stdout.split('\n').filter((l) => l.startsWith('CAUTION [drift-not-watched]'));
    expect(lines).toHaveLength(1);
    expect(lines[0]).toMatch(/no drift is watched/);
    expect(lines[0]).toMatch(/analysis model \(--model/);
    const journal: Extract<WireEvent, { type: 'caution' }>[] = [];
    scanJournal(join(data, readdirSync(data)[0]), (e) => {
      if (e.type === 'caution' && e.kind === 'drift-not-watched') journal.push(e);
    });
    expect(journal).toHaveLength(1);
    expect(journal[0].sweep).toBe(1);

    const json = runCli(['run', '--scenario', 'solar-cell', '--sweeps', '2', '--fast', '--json', '--data', data]);
    expect(json.code, json.stderr).toBe(0);
    const out = JSON.parse(json.stdout) as { cautions: { kind: string }[]; fits: { warnings: string[] }[] };
    expect(out.cautions.filter((c) => c.kind === 'drift-not-watched')).toHaveLength(1);
    // The lit cell's current against the bias is its photocurrent, what it is measured for: not
    // warned about as a current "too large to be noise" on every sweep.
    expect(out.fits).toHaveLength(2);
    for (const f of out.fits) expect(f.warnings.join(' ')).not.toMatch(/too large to be noise/);
  }, 60_000);
});
