/**
 * The time a breakdown test has left, from its plan's own timing, against plans worked out by hand:
 * a ramp holds each level one step time (set to set), so what is left is the levels not yet set ×
 * the step time; a constant-voltage stress has its duration less the stress so far, plus the sense
 * sweeps still to come at the mean time of those done.
 */
import { describe, expect, it } from 'vitest';
import { rampLevelCount, testRemaining } from '../../daemon/run/eta.js';
import { parsePlan, type StressPlan } from '../../daemon/run/plan.js';

const plan = (p: Record<string, unknown>) => parsePlan(p) as StressPlan;

describe('the time a breakdown test has left, by its plan', () => {
  // 0 → 15 V in 0.1 V steps: 0, 0.1, …, 15.0 is 151 levels; 0.1 s each is 15.1 s.
  const ramp = plan({ kind: 'voltage-ramp', start: 0, stop: 15, step: 0.1, stepTime: 0.1, compliance: 0.01, useVoltage: 1 });

  it('a voltage ramp: the levels not yet set × the step time', () => {
    expect(rampLevelCount(ramp)).toBe(151);
    expect(testRemaining(ramp, { phase: 'before' })).toBeCloseTo(15.1, 12);
    // The 15th level set (14 V·0.1 = 1.4 V held): 136 levels to come, 13.6 s.
    expect(testRemaining(ramp, { phase: 'ramp', set: 15 })).toBeCloseTo(13.6, 12);
    expect(testRemaining(ramp, { phase: 'ramp', set: 151 })).toBe(0);
    expect(testRemaining(ramp, { phase: 'after' })).toBe(0);
  });

  it('a ramp whose stop is off the step grid ends on the stop itself: one level more', () => {
    // 0 → 12.05 V in 0.1 V steps: 0 … 12.0 (121 levels) and then 12.05: 122 levels of 0.05 s, 6.1 s.
    const p = plan({ kind: 'voltage-ramp', start: 0, stop: 12.05, step: 0.1, stepTime: 0.05, compliance: 0.01 });
    expect(rampLevelCount(p)).toBe(122);
    expect(testRemaining(p, { phase: 'before' })).toBeCloseTo(6.1, 12);
    expect(testRemaining(p, { phase: 'ramp', set: 100 })).toBeCloseTo(1.1, 12);
  });

  it('a current ramp: 1 nA → 1 mA at 10 steps per decade is 61 levels', () => {
    const p = plan({ kind: 'current-ramp', start: 1e-9, stop: 1e-3, stepsPerDecade: 10, stepTime: 0.5, voltageLimit: 20 });
    expect(rampLevelCount(p)).toBe(61);
    expect(testRemaining(p, { phase: 'before' })).toBeCloseTo(30.5, 12);
    expect(testRemaining(p, { phase: 'ramp', set: 21 })).toBeCloseTo(20, 12);
  });

  it('a constant-voltage stress: the duration less the stress so far, and the sense sweeps to come at the mean of those done', () => {
    // 600 s with a sense sweep every 100 s: at 100, 200, 300, 400 and 500 s — five.
    const p = plan({
      kind: 'constant-voltage',
      stress: 9,
      duration: 600,
      sampleEvery: 1,
      compliance: 0.01,
      sense: { start: 0, stop: 2, points: 11, every: 100 },
    });
    expect(testRemaining(p, { phase: 'before' })).toBe(600);
    // No sense sweep timed yet: the stress time only.
    expect(testRemaining(p, { phase: 'stress', stressTime: 16, sensesDone: 0, senseSeconds: 0 })).toBe(584);
    // 150 s stressed, one sense sweep of 2.5 s done: 450 s of stress and four more sense sweeps, 460 s.
    expect(testRemaining(p, { phase: 'stress', stressTime: 150, sensesDone: 1, senseSeconds: 2.5 })).toBe(460);
    // Two done in 6 s together: 3 s each; 250 s of stress left and three to come, 259 s.
    expect(testRemaining(p, { phase: 'stress', stressTime: 350, sensesDone: 2, senseSeconds: 6 })).toBe(259);
    // Steady through an interval: it falls by the stress time that passed, without jumps.
    const left = [151, 152, 153].map((t) => testRemaining(p, { phase: 'stress', stressTime: t, sensesDone: 1, senseSeconds: 2.5 }));
    expect(left).toEqual([459, 458, 457]);
    expect(testRemaining(p, { phase: 'stress', stressTime: 600, sensesDone: 5, senseSeconds: 12.5 })).toBe(0);
  });
});
