/**
 * The safety guard: the station's hard limits, checked on every command that would reach the
 * instrument — from a plan, the API, the page or a script. Nothing else in the daemon talks to the
 * SMU driver directly while a run holds it.
 *
 *  - |V| ≤ maxVoltage for every level the source is asked to hold (ramp steps included);
 *  - compliance ≤ maxCompliance;
 *  - |V| × compliance ≤ maxPower (the most the device can take at that step);
 *  - compliance is set before the output goes on; the source ramps in steps of at most rampStep;
 *  - output off is always allowed and never throws.
 *
 * These are software limits. They add to, and never replace, the instrument's own limits, the
 * fixture's interlock and the lab's safety rules.
 */
import { z } from 'zod';
import type { Measurement, OffCheck, SmuDriver } from '../instrument/smu-driver.js';
import type { Plan } from './plan.js';
import { sweepValues } from './plan.js';

/** Most steps a ramp over the whole range may take, and its longest duration, s. */
export const MAX_RAMP_STEPS = 10000;
export const MAX_RAMP_SECONDS = 600;

export const limitsSchema = z
  .object({
    /** Largest |V| the station may source, V. */
    maxVoltage: z.number().positive().finite(),
    /** Largest compliance current, A. */
    maxCompliance: z.number().positive().finite(),
    /** Largest |V| × compliance, W. */
    maxPower: z.number().positive().finite(),
    /** Above this |V| the page and the CLI show the high-voltage caution, V (common practice: 30 V). */
    hazardVoltage: z.number().positive().finite().default(30),
    /** Largest step the source takes when moving between levels outside a sweep, V (at least 1 mV). */
    rampStep: z.number().min(1e-3, 'must be at least 0.001 V (a smaller step makes a ramp that never ends with the output on)').finite().default(1),
    /** Wait per ramp step, s. */
    rampDelay: z.number().min(0).max(10).default(0.01),
  })
  .strict()
  .superRefine((l, ctx) => {
    // A ramp across the whole range must end in reasonable time with the output on.
    const steps = l.maxVoltage / l.rampStep;
    if (steps > MAX_RAMP_STEPS) {
      ctx.addIssue({
        code: 'custom',
        path: ['rampStep'],
        message: `${l.rampStep} V makes ${Math.ceil(steps)} steps from 0 to maxVoltage = ${l.maxVoltage} V; at most ${MAX_RAMP_STEPS} are allowed (raise rampStep)`,
      });
    } else if (steps * l.rampDelay > MAX_RAMP_SECONDS) {
      ctx.addIssue({
        code: 'custom',
        path: ['rampDelay'],
        message: `a ramp from 0 to maxVoltage = ${l.maxVoltage} V would take ${Math.round(steps * l.rampDelay)} s (${Math.ceil(steps)} steps × ${l.rampDelay} s); at most ${MAX_RAMP_SECONDS} s are allowed`,
      });
    }
  });

export type Limits = z.infer<typeof limitsSchema>;

export class GuardError extends Error {
  readonly code = 'GUARD';
  constructor(
    message: string,
    readonly setting: string,
    readonly numbers: Record<string, number>,
  ) {
    super(message);
  }
}

/** A number as people write it: 20.555555555555557 → 20.5556. */
const show = (x: number) => String(+x.toPrecision(6));

export function checkLevel(limits: Limits, v: number, compliance: number, where = 'bias'): void {
  if (!Number.isFinite(v)) throw new GuardError(`${where} ${v} is not a number`, 'voltage', { voltage: v });
  if (Math.abs(v) > limits.maxVoltage) {
    throw new GuardError(`${where} = ${show(v)} V exceeds the station limit maxVoltage = ${show(limits.maxVoltage)} V`, 'maxVoltage', {
      voltage: v,
      maxVoltage: limits.maxVoltage,
    });
  }
  if (Math.abs(v) * compliance > limits.maxPower) {
    throw new GuardError(
      `${where} = ${show(v)} V at the ${show(compliance)} A compliance could deliver ${show(Math.abs(v) * compliance)} W, above the station limit maxPower = ${show(limits.maxPower)} W`,
      'maxPower',
      { voltage: v, compliance, maxPower: limits.maxPower },
    );
  }
}

export function checkCompliance(limits: Limits, compliance: number): void {
  if (!(compliance > 0) || !Number.isFinite(compliance))
    throw new GuardError(`compliance ${compliance} A must be a positive number`, 'compliance', { compliance });
  if (compliance > limits.maxCompliance) {
    throw new GuardError(`plan compliance = ${show(compliance)} A exceeds the station limit maxCompliance = ${show(limits.maxCompliance)} A`, 'maxCompliance', {
      compliance,
      maxCompliance: limits.maxCompliance,
    });
  }
}

/** A forced current: |I| ≤ maxCompliance and |I| × voltage limit ≤ maxPower. */
export function checkCurrentLevel(limits: Limits, i: number, voltageLimit: number, where = 'current'): void {
  if (!Number.isFinite(i)) throw new GuardError(`${where} ${i} is not a number`, 'current', { current: i });
  if (Math.abs(i) > limits.maxCompliance) {
    throw new GuardError(
      `${where} = ${show(i)} A exceeds the station limit maxCompliance = ${show(limits.maxCompliance)} A (the most current the station may drive)`,
      'maxCompliance',
      { current: i, maxCompliance: limits.maxCompliance },
    );
  }
  if (Math.abs(i) * voltageLimit > limits.maxPower) {
    throw new GuardError(
      `${where} = ${show(i)} A at the ${show(voltageLimit)} V voltage limit could deliver ${show(Math.abs(i) * voltageLimit)} W, above the station limit maxPower = ${show(limits.maxPower)} W`,
      'maxPower',
      { current: i, voltageLimit, maxPower: limits.maxPower },
    );
  }
}

/** The current compliance of a use-condition check (a current ramp has none of its own). */
export function useCheckCompliance(limits: Limits, plan: Plan): number {
  return plan.kind === 'current-ramp' ? Math.min(limits.maxCompliance, Math.abs(plan.stop)) : (plan as { compliance: number }).compliance;
}

/**
 * Checks a whole plan before anything is sent; throws the first violation, naming the plan field
 * that holds the offending level as the user wrote it and the station limit it breaks.
 */
export function checkPlan(limits: Limits, plan: Plan): void {
  if ((plan.kind === 'voltage-ramp' || plan.kind === 'current-ramp' || plan.kind === 'constant-voltage') && plan.useVoltage !== undefined) {
    const c = useCheckCompliance(limits, plan);
    checkCompliance(limits, c);
    checkLevel(limits, plan.useVoltage, c, 'plan useVoltage');
  }
  switch (plan.kind) {
    case 'current-ramp':
      if (plan.voltageLimit > limits.maxVoltage) {
        throw new GuardError(
          `plan voltageLimit = ${show(plan.voltageLimit)} V exceeds the station limit maxVoltage = ${show(limits.maxVoltage)} V`,
          'maxVoltage',
          { voltageLimit: plan.voltageLimit, maxVoltage: limits.maxVoltage },
        );
      }
      checkCurrentLevel(limits, plan.start, plan.voltageLimit, 'plan start');
      checkCurrentLevel(limits, plan.stop, plan.voltageLimit, 'plan stop');
      return;
    case 'constant-voltage':
      checkCompliance(limits, plan.compliance);
      checkLevel(limits, plan.stress, plan.compliance, 'plan stress');
      if (plan.sense) {
        checkLevel(limits, plan.sense.start, plan.compliance, 'plan sense.start');
        checkLevel(limits, plan.sense.stop, plan.compliance, 'plan sense.stop');
      }
      return;
    case 'adaptive':
    case 'voltage-ramp':
      checkCompliance(limits, plan.compliance);
      checkLevel(limits, plan.start, plan.compliance, 'plan start');
      checkLevel(limits, plan.stop, plan.compliance, 'plan stop');
      return;
    case 'list':
      checkCompliance(limits, plan.compliance);
      (plan.values ?? []).forEach((v, k) => checkLevel(limits, v, plan.compliance, `plan values[${k}]`));
      return;
    default:
      checkCompliance(limits, plan.compliance);
      // Linear and log staircases never go beyond their ends.
      checkLevel(limits, plan.start ?? 0, plan.compliance, 'plan start');
      checkLevel(limits, plan.stop ?? 0, plan.compliance, 'plan stop');
      for (const v of sweepValues(plan)) checkLevel(limits, v, plan.compliance);
  }
}

/** Waits s seconds of wall time. */
export const wallClockWait = (s: number): Promise<void> => new Promise((r) => setTimeout(r, s * 1000));

/** The only path from a run to the driver. */
export class GuardedSource {
  private compliance: number | undefined;
  private voltageLimit: number | undefined;
  private level = 0;
  private on = false;
  private inhibited = false;
  /**
   * `settle(s)` waits s seconds between ramp steps: wall time for a real instrument (the default);
   * a simulated instrument that answers at once (--fast) lets the time pass on its own clock
   * instead, so its ramps still step by rampStep with rampDelay between steps, at no cost.
   */
  constructor(
    readonly driver: SmuDriver,
    readonly limits: Limits,
    private readonly settle: (s: number) => Promise<void> = wallClockWait,
  ) {}

  get isOn(): boolean {
    return this.on;
  }

  get present(): number {
    return this.level;
  }

  async configure(compliance: number, nplc?: number): Promise<void> {
    checkCompliance(this.limits, compliance);
    if (this.on) {
      // Lowering compliance is always safe; raising it with the output on is refused.
      if (this.compliance !== undefined && compliance > this.compliance) {
        throw new GuardError('raising the compliance with the output on is refused; turn the output off first', 'compliance', { compliance });
      }
    }
    await this.driver.configure({ compliance, nplc });
    this.voltageLimit = undefined;
    this.compliance = compliance;
    this.on = false;
    this.level = 0;
  }

  /**
   * After an abort nothing may move the source or turn the output on again: checked synchronously
   * right before each command is queued, so an abort that lands while a call is in flight wins.
   */
  inhibit(): void {
    this.inhibited = true;
  }

  get isInhibited(): boolean {
    return this.inhibited;
  }

  private refuseIfInhibited(what: string): void {
    if (this.inhibited) throw new GuardError(`${what} refused: the run was aborted`, 'abort', {});
  }

  /**
   * Current sourcing (a current ramp): the voltage compliance must be within maxVoltage; then each
   * forced current within maxCompliance and |I| × voltage limit within maxPower.
   */
  async configureCurrent(voltageLimit: number, nplc?: number): Promise<void> {
    if (!(voltageLimit > 0) || voltageLimit > this.limits.maxVoltage) {
      throw new GuardError(`voltage limit = ${show(voltageLimit)} V exceeds the station limit maxVoltage = ${show(this.limits.maxVoltage)} V`, 'maxVoltage', {
        voltageLimit,
        maxVoltage: this.limits.maxVoltage,
      });
    }
    if (this.on) throw new GuardError('changing to current sourcing with the output on is refused', 'mode', {});
    await this.driver.configureCurrentSource({ voltageLimit, nplc });
    this.voltageLimit = voltageLimit;
    // Stands in for the current compliance: output on and the checks below need it set.
    this.compliance = this.limits.maxCompliance;
    this.on = false;
    this.level = 0;
  }

  /** One forced current, A (current sourcing only). */
  async stepCurrent(i: number): Promise<void> {
    if (this.voltageLimit === undefined) throw new GuardError('no voltage limit set for current sourcing', 'voltageLimit', {});
    this.refuseIfInhibited('a source current');
    checkCurrentLevel(this.limits, i, this.voltageLimit);
    await this.driver.setCurrent(i);
    this.level = i;
  }

  /** Output on at 0 (V or A; compliance must have been set); the instrument must confirm it. */
  async outputOn(): Promise<void> {
    if (this.compliance === undefined) throw new GuardError('output on refused: no compliance has been set', 'compliance', {});
    this.refuseIfInhibited('output on');
    await this.driver.setZero();
    this.level = 0;
    this.refuseIfInhibited('output on');
    this.on = true;
    await this.driver.outputOn();
  }

  /** One step to v (inside a sweep: the plan's own staircase). */
  async step(v: number): Promise<void> {
    if (this.compliance === undefined) throw new GuardError('no compliance set', 'compliance', {});
    this.refuseIfInhibited('a source level');
    checkLevel(this.limits, v, this.compliance);
    await this.driver.setVoltage(v);
    this.level = v;
  }

  /** Moves to v in steps of at most rampStep (between sweeps, and down at the end of a run); an abort stops it at once. */
  async rampTo(v: number): Promise<void> {
    if (this.compliance === undefined) throw new GuardError('no compliance set', 'compliance', {});
    checkLevel(this.limits, v, this.compliance);
    const from = this.level;
    const n = Math.ceil(Math.abs(v - from) / this.limits.rampStep);
    for (let k = 1; k <= n; k++) {
      await this.step(from + ((v - from) * k) / n);
      if (k < n && this.limits.rampDelay > 0) await this.settle(this.limits.rampDelay);
    }
  }

  /** Back to zero at the end of a run: a ramp to 0 V, or 0 A when forcing current. */
  async toZero(): Promise<void> {
    // With the output already off (a breakdown test turns it off at once) there is nothing to ramp.
    if (!this.on) return;
    if (this.driver.sourcesCurrent) await this.stepCurrent(0);
    else await this.rampTo(0);
  }

  measure(): Promise<Measurement> {
    return this.driver.measure();
  }

  /**
   * An instrument-paced block: every level passes the same checks as a step before the block is
   * loaded; the instrument's compliance is set (it protects the device between readings).
   */
  async block(levels: readonly number[], delay: number, expectedMs: number): Promise<Measurement[]> {
    if (this.compliance === undefined) throw new GuardError('no compliance set', 'compliance', {});
    this.refuseIfInhibited('an instrument-paced block');
    for (const v of levels) checkLevel(this.limits, v, this.compliance);
    const m = await this.driver.runBlock(levels, delay, expectedMs);
    this.level = levels[levels.length - 1];
    return m;
  }

  /** Output off through the queue, at the normal end of a run; never throws. Resolves whether the bytes were written. */
  async outputOff(): Promise<boolean> {
    const ok = await this.driver.outputOff();
    this.on = false;
    return ok;
  }

  /**
   * Output off now, ahead of everything queued and of any reply still awaited; nothing moves the
   * source afterwards. Never throws; resolves whether the bytes were handed to the transport.
   */
  emergencyOff(reason: string): Promise<boolean> {
    this.inhibit();
    this.on = false;
    return this.driver.emergencyOff(reason);
  }

  /** Whether the instrument itself reports its output off. */
  confirmOff(timeoutMs?: number): Promise<OffCheck> {
    return this.driver.confirmOff(timeoutMs);
  }
}
