/**
 * The drift watch's baseline, checked for a trend before its limits are used: on the simulated
 * trapping oxide (charge trapped each sweep raises the barrier) the baseline sweeps already climb,
 * and a caution says so with the slope per sweep; the stable oxide gives none. The run goes through
 * the real station, driver and SCPI session against the simulated instrument (fast mode).
 */
import { readdirSync } from 'node:fs';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { scanJournal } from '../../daemon/journal/reader.js';
import type { WireEvent } from '../../protocols/wire.js';
import { runCli } from '../helpers/cli.js';
import { tempDir } from '../helpers/daemon.js';

function cautions(scenario: string): Extract<WireEvent, { type: 'caution' }>[] {
  const data = join(tempDir(), 'data');
  const r = runCli(['run', '--scenario', scenario, '--fast', '--data', data]);
  expect([0, 4], r.stderr).toContain(r.code);
  const out: Extract<WireEvent, { type: 'caution' }>[] = [];
  scanJournal(join(data, readdirSync(data)[0]), (e) => {
    if (e.type === 'caution') out.push(e);
  });
  return out;
}

describe('a baseline that trends', () => {
  it('the trapping oxide: a caution at the end of the baseline names the climb per sweep; the stable oxide: none', () => {
    const trap = cautions('oxide-fn-trapping').filter((c) => /trends through the baseline/.test(c.message));
    expect(trap).toHaveLength(1);
    expect(trap[0].kind).toBe('drift-baseline-trend');
    expect(trap[0].message).toMatch(/barrierHeight trends through the baseline sweeps 1–5: \+0\.0\d+ eV per sweep/);
    expect(trap[0].numbers?.slope).toBeGreaterThan(0);
    expect(cautions('oxide-fn').filter((c) => /trends through the baseline/.test(c.message))).toEqual([]);
  }, 60_000);
});
