/**
 * How long a breakdown test has left, from its plan's own timing rather than from the pace of the
 * readings so far (the phases of a test differ in length: a one-reading use-condition check, a
 * ramp of hundreds of levels, stress intervals cut by sense sweeps — a pace per reading averaged
 * across them is far off and jumps from phase to phase).
 *
 *  - a ramp (voltage or current): the levels not yet set × the step time — each level is held one
 *    step time, set to set (run/stress.ts `StepPacer`);
 *  - constant-voltage stress: the stress time the plan's duration has left, plus the sense sweeps
 *    still to come at the mean time of those already done (none done yet: not counted — a sense
 *    sweep has no step time in the plan).
 *
 * The estimate is of the longest the test can take: a breakdown ends it sooner. The use-condition
 * checks (one reading each, 10 ms of settling) are not counted. Times are on the run's clock: the
 * instrument's, or a fast simulator's own.
 */
import { currentRampLevels, senseSweeps, voltageRampLevels, type StressPlan } from './plan.js';

/** Where a breakdown test stands. */
export type TestMoment =
  /** Not yet at the stress (the check before it, or before anything). */
  | { readonly phase: 'before' }
  /** On a ramp: `set` levels have been set (the one being held counted). */
  | { readonly phase: 'ramp'; readonly set: number }
  /** Under constant stress: seconds of stress so far, sense sweeps done and the seconds they took together. */
  | { readonly phase: 'stress'; readonly stressTime: number; readonly sensesDone: number; readonly senseSeconds: number }
  /** The stress is over (the check after it, or the end). */
  | { readonly phase: 'after' };

/** The levels of a ramp plan (0 for a stress). */
export function rampLevelCount(plan: StressPlan): number {
  return plan.kind === 'voltage-ramp' ? voltageRampLevels(plan).length : plan.kind === 'current-ramp' ? currentRampLevels(plan).length : 0;
}

/** Seconds the test has left at moment `at`, by its plan (at most; a breakdown ends it sooner). */
export function testRemaining(plan: StressPlan, at: TestMoment): number {
  if (at.phase === 'after') return 0;
  if (plan.kind === 'constant-voltage') {
    const senses = senseSweeps(plan);
    if (at.phase !== 'stress') return plan.duration;
    const perSense = at.sensesDone > 0 ? at.senseSeconds / at.sensesDone : 0;
    return Math.max(0, plan.duration - at.stressTime) + Math.max(0, senses - at.sensesDone) * perSense;
  }
  const levels = rampLevelCount(plan);
  const set = at.phase === 'ramp' ? at.set : 0;
  return Math.max(0, levels - set) * plan.stepTime;
}
