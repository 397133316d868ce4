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
import type { SmuDriver, Measurement } from '../instrument/smu-driver.js';
import type { Plan } from './plan.js';
import { sweepValues } from './plan.js';

export const limitsSchema = z.object({
  /** Largest |V| the station may source, V. */
  maxVoltage: z.number().positive().finite(),
  /** Largest compliance current, A. */
  maxCompliance: z.number().positive().finite(),
  /** Largest |V| × compliance, W. */
  maxPower: z.number().positive().finite(),
  /** Above this |V| the page and the CLI show the high-voltage caution, V (common practice: 30 V). */
  hazardVoltage: z.number().positive().finite().default(30),
  /** Largest step the source takes when moving between levels outside a sweep, V. */
  rampStep: z.number().positive().finite().default(1),
  /** Wait per ramp step, s. */
  rampDelay: z.number().min(0).max(10).default(0.01),
}).strict();

export type Limits = z.infer<typeof limitsSchema>;

export class GuardError extends Error {
  readonly code = 'GUARD';
  constructor(message: string, readonly setting: string, readonly numbers: Record<string, number>) {
    super(message);
  }
}

export function checkLevel(limits: Limits, v: number, compliance: number): void {
  if (!Number.isFinite(v)) throw new GuardError(`bias ${v} is not a number`, 'voltage', { voltage: v });
  if (Math.abs(v) > limits.maxVoltage) {
    throw new GuardError(`|${v} V| exceeds the station limit maxVoltage = ${limits.maxVoltage} V`, 'maxVoltage', { voltage: v, maxVoltage: limits.maxVoltage });
  }
  if (Math.abs(v) * compliance > limits.maxPower) {
    throw new GuardError(
      `${v} V at the ${compliance} A compliance could deliver ${(Math.abs(v) * compliance).toPrecision(3)} W, above the station limit maxPower = ${limits.maxPower} W`,
      'maxPower',
      { voltage: v, compliance, maxPower: limits.maxPower },
    );
  }
}

export function checkCompliance(limits: Limits, compliance: number): void {
  if (!(compliance > 0) || !Number.isFinite(compliance)) throw new GuardError(`compliance ${compliance} A must be a positive number`, 'compliance', { compliance });
  if (compliance > limits.maxCompliance) {
    throw new GuardError(`compliance ${compliance} A exceeds the station limit maxCompliance = ${limits.maxCompliance} A`, 'maxCompliance', { compliance, maxCompliance: limits.maxCompliance });
  }
}

/** Checks a whole plan before anything is sent; throws the first violation, naming the setting. */
export function checkPlan(limits: Limits, plan: Plan): void {
  checkCompliance(limits, plan.compliance);
  for (const v of sweepValues(plan)) checkLevel(limits, v, plan.compliance);
}

const sleep = (s: number) => (s > 0 ? new Promise((r) => setTimeout(r, s * 1000)) : Promise.resolve());

/** The only path from a run to the driver. */
export class GuardedSource {
  private compliance: number | undefined;
  private level = 0;
  private on = false;
  private inhibited = false;
  /** Every level this guard let through, for tests and the journal. */
  readonly passed: number[] = [];

  constructor(readonly driver: SmuDriver, readonly limits: Limits) {}

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
    this.compliance = compliance;
    this.on = false;
    this.level = 0;
  }

  /**
   * After an abort nothing may turn the output on again: checked synchronously right before the
   * output-on command is queued, so an abort that lands while this call is in flight wins.
   */
  inhibit(): void {
    this.inhibited = true;
  }

  /** Output on at 0 V (compliance must have been set). */
  async outputOn(): Promise<void> {
    if (this.compliance === undefined) throw new GuardError('output on refused: no compliance has been set', 'compliance', {});
    if (this.inhibited) throw new GuardError('output on refused: the run was aborted', 'abort', {});
    await this.driver.setVoltage(0);
    this.level = 0;
    if (this.inhibited) throw new GuardError('output on refused: the run was aborted', 'abort', {});
    await this.driver.outputOn();
    this.on = true;
  }

  /** One step to v (inside a sweep: the plan's own staircase). */
  async step(v: number): Promise<void> {
    if (this.compliance === undefined) throw new GuardError('no compliance set', 'compliance', {});
    checkLevel(this.limits, v, this.compliance);
    await this.driver.setVoltage(v);
    this.passed.push(v);
    this.level = v;
  }

  /** Moves to v in steps of at most rampStep (between sweeps, and down at the end of a run). */
  async rampTo(v: number): Promise<void> {
    if (this.compliance === undefined) throw new GuardError('no compliance set', 'compliance', {});
    checkLevel(this.limits, v, this.compliance);
    const from = this.level;
    const n = Math.ceil(Math.abs(v - from) / this.limits.rampStep);
    for (let k = 1; k <= n; k++) {
      await this.step(from + ((v - from) * k) / n);
      if (k < n) await sleep(this.limits.rampDelay);
    }
  }

  measure(): Promise<Measurement> {
    return this.driver.measure();
  }

  /** Output off at once (no ramp); never throws. Returns whether the command reached the transport. */
  async outputOff(): Promise<boolean> {
    const ok = await this.driver.outputOff();
    this.on = false;
    return ok;
  }
}
