/**
 * Ramps between levels: steps of at most rampStep with rampDelay between them, whatever clock the
 * wait runs on. A real instrument waits wall time; the built-in simulator in fast mode lets the wait
 * pass on its own clock (the same steps reach it, at no wall-time cost); a rampDelay of 0 waits
 * nothing at all. Checked at the guard (a recording driver) and at the simulated instrument's end of
 * the wire (the levels it received).
 */
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import type { SmuDriver } from '../../daemon/instrument/smu-driver.js';
import { parseConfig } from '../../daemon/run/config.js';
import { GuardedSource, limitsSchema } from '../../daemon/run/guard.js';
import { Station } from '../../daemon/run/station.js';
import { tempDir } from '../helpers/daemon.js';

/** A driver that only records the levels it is asked for (unit level: the guard's own arithmetic). */
function recordingDriver(): { driver: SmuDriver; levels: number[] } {
  const levels: number[] = [];
  const driver = {
    sourcesCurrent: false,
    configure: async () => undefined,
    setVoltage: async (v: number) => void levels.push(v),
  } as unknown as SmuDriver;
  return { driver, levels };
}

describe('ramps', () => {
  it('step by rampStep with rampDelay between the steps, on the clock given; a 0 s rampDelay waits nothing', async () => {
    const limits = limitsSchema.parse({ maxVoltage: 10, maxCompliance: 1e-3, maxPower: 1e-2, rampStep: 1, rampDelay: 0.02 });
    const { driver, levels } = recordingDriver();
    const waits: number[] = [];
    const g = new GuardedSource(driver, limits, async (s) => void waits.push(s));
    await g.configure(1e-3);
    await g.rampTo(5);
    await g.rampTo(2.5);
    // Up in five 1 V steps; down 2.5 V in three equal steps (none larger than rampStep).
    const expected = [1, 2, 3, 4, 5, 5 - 2.5 / 3, 5 - 5 / 3, 2.5];
    expect(levels).toHaveLength(expected.length);
    levels.forEach((v, k) => expect(v).toBeCloseTo(expected[k], 12));
    expect(waits).toEqual(Array(6).fill(0.02)); // between steps, not after the last of each ramp
    const none = new GuardedSource(recordingDriver().driver, { ...limits, rampDelay: 0 }, async (s) => void waits.push(s));
    waits.length = 0;
    await none.configure(1e-3);
    await none.rampTo(5);
    expect(waits).toEqual([]);
  });

  it('by default the waits are wall time (a real instrument settles between steps)', async () => {
    const limits = limitsSchema.parse({ maxVoltage: 10, maxCompliance: 1e-3, maxPower: 1e-2, rampStep: 1, rampDelay: 0.02 });
    const g = new GuardedSource(recordingDriver().driver, limits);
    await g.configure(1e-3);
    const t0 = performance.now();
    await g.rampTo(5);
    expect(performance.now() - t0).toBeGreaterThanOrEqual(4 * 20 - 1); // four waits of 20 ms at least
  });

  it('the built-in simulator in fast mode: between sweeps it receives the ramp down in 1 V steps, and the waits pass on its clock', async () => {
    const limits = { maxVoltage: 12, maxCompliance: 2e-3, maxPower: 1.5e-2, rampStep: 1, rampDelay: 0.05 };
    const run = async (realTime: boolean) => {
      const st = new Station(
        parseConfig(
          {
            instrument: { kind: 'simulator', scenario: 'oxide-fn', realTime, seed: 1 },
            limits,
            drift: { enabled: false },
          },
          'test',
        ),
        join(tempDir(), 'data'),
      );
      const h = await st.startRun({ plan: { start: 0, stop: 9, points: 10, compliance: 1e-3, repeat: 3 } });
      const r = await h.done;
      expect(r.outcome).toBe('completed');
      const sim = st.simulator!;
      const levels = sim.log.filter((l) => l.startsWith(':SOUR:VOLT ')).map((l) => Number(l.split(' ')[1]));
      return { levels, elapsed: sim.elapsedAtOnce };
    };
    const fast = await run(false);
    // Sweep 0…9 V, ramp 8, 7, … 0 (the next sweep's start), twice, then the end-of-run ramp to 0.
    const sweep = [0, 1, 2, 3, 4, 5, 6, 7, 8, 9];
    const down = [8, 7, 6, 5, 4, 3, 2, 1, 0];
    expect(fast.levels.slice(1)).toEqual([...sweep, ...down, ...sweep, ...down, ...sweep, ...down]);
    // Three ramps of nine steps, eight waits of 50 ms each.
    expect(fast.elapsed).toBeCloseTo(3 * 8 * 0.05, 9);
    // In real time nothing passes at once: the guard waited the wall clock.
    const real = await run(true);
    expect(real.levels).toEqual(fast.levels);
    expect(real.elapsed).toBe(0);
  });
});
