/**
 * Plans: what a run does with the instrument. Validated with zod so a bad plan names its field.
 *  - sweeps (`linear`, `log`, `list`): staircases or lists of levels, single or dual (out and
 *    back), repeated with a dwell between sweeps, with per-point settling delay, integration time
 *    and the compliance for the run;
 *  - `adaptive` sweeps: the next level is chosen from what has been measured, and a sweep stops as
 *    soon as a fitted parameter is known to a target standard error;
 *  - breakdown tests of thin dielectrics after the wafer-level procedures of JEDEC JESD35-A: a
 *    voltage ramp (`voltage-ramp`), a current ramp (`current-ramp`) and constant-voltage stress
 *    with periodic sense sweeps (`constant-voltage`).
 */
import { statfsSync } from 'node:fs';
import { z } from 'zod';
import { zodMessage } from '../pipeline/settings.js';
import { didYouMean } from '../analysis/did-you-mean.js';

export const sweepPlanSchema = z
  .object({
    kind: z.enum(['linear', 'log', 'list']).default('linear'),
    /** Start and stop bias, V (linear and log). */
    start: z.number().finite().optional(),
    stop: z.number().finite().optional(),
    /** Points per direction (linear and log). */
    points: z.number().int().min(2).max(100000).optional(),
    /** Bias values for a list sweep, V. */
    values: z.array(z.number().finite()).min(1).max(100000).optional(),
    /** Out and back: the sweep returns to its start. */
    dual: z.boolean().default(false),
    /** Number of sweeps. */
    repeat: z.number().int().min(1).max(1000000).default(1),
    /** Wait between sweeps, s (the source rests at 0 V). */
    dwell: z.number().min(0).max(86400).default(0),
    /** Settling delay after each step before the reading, s. */
    delay: z.number().min(0).max(3600).default(0),
    /** Integration time in power-line cycles. */
    nplc: z.number().min(0.001).max(100).optional(),
    /** Current compliance, A. */
    compliance: z.number().positive().finite(),
    /**
     * Who paces the points: 'station' (default) sets each level and reads it, one exchange per point;
     * 'instrument' loads a block of levels into the instrument, which steps through them itself,
     * and the station fetches the block's readings (needs a dialect with instrument-paced templates).
     */
    pacing: z.enum(['station', 'instrument']).default('station'),
    /** Points per block in instrument-paced mode (default: the whole sweep, up to the instrument's list size). */
    blockPoints: z.number().int().min(1).max(100000).optional(),
    /** Run a plan whose journal would not fit on the data folder's disk (refused otherwise). */
    overrideDiskCheck: z.boolean().default(false),
  })
  .strict()
  .superRefine((p, ctx) => {
    if (p.kind === 'list') {
      if (!p.values) ctx.addIssue({ code: 'custom', path: ['values'], message: 'a list sweep needs values' });
      return;
    }
    for (const k of ['start', 'stop', 'points'] as const) {
      if (p[k] === undefined) ctx.addIssue({ code: 'custom', path: [k], message: `a ${p.kind} sweep needs ${k}` });
    }
    if (p.kind === 'log' && p.start !== undefined && p.stop !== undefined && !(p.start * p.stop > 0)) {
      ctx.addIssue({ code: 'custom', path: ['start'], message: 'a log sweep needs start and stop of the same sign, neither zero' });
    }
  });

export type SweepPlan = z.infer<typeof sweepPlanSchema>;

export class PlanError extends Error {
  readonly code = 'BAD_PLAN';
}

/** A check at the use condition before and after a breakdown test (JEDEC JESD35-A's pre- and post-test). */
const useCheck = {
  /** Bias of the use condition, V (the device's operating voltage); no check when absent. */
  useVoltage: z.number().finite().optional(),
  /** At the use voltage, a current above this means a device already broken (before) or broken by the test (after), A. */
  useCurrentLimit: z.number().positive().finite().default(1e-6),
};

const rampCriteria = z
  .object({
    /** |I| rising by this factor or more from one step to the next is a current jump (hard breakdown). */
    currentJump: z.number().min(1.5).default(10),
    /** The local slope of ln|I| against V rising to this multiple of its recent median (a soft breakdown); 0 turns it off. */
    slopeFactor: z.number().min(0).default(3),
    /** Steps in that recent median. */
    slopeWindow: z.number().int().min(2).max(100).default(5),
    /**
     * Bias span over which each local slope is taken, V: from the reading at least this far below.
     * Steps much finer than it would otherwise make the slope of two neighbouring readings mostly
     * their noise (0.5 % noise over 1 mV is 7 /V, the size of a tunnelling current's own slope).
     */
    slopeSpan: z.number().positive().finite().default(0.1),
    /** |I| at or above this is breakdown, A (default: the compliance). */
    currentLimit: z.number().positive().finite().optional(),
    /** Below this current the ratio and slope tests are not applied (the noise floor), A. */
    floor: z.number().positive().finite().default(1e-10),
  })
  .strict();

/**
 * A ramp or an adaptive sweep climbs away from zero: a stop nearer zero than the start, or across
 * it, would sweep a device down from a high field (or through both polarities) in a test built for
 * rising stress. Refused, naming the field.
 */
function outward(p: { start: number; stop: number }, ctx: z.RefinementCtx): void {
  if (p.start === p.stop) ctx.addIssue({ code: 'custom', path: ['stop'], message: 'must differ from start' });
  else if (p.start * p.stop < 0 || Math.abs(p.stop) < Math.abs(p.start)) {
    ctx.addIssue({
      code: 'custom',
      path: ['stop'],
      message: `${p.stop} V is nearer zero than start ${p.start} V or of the other sign: this plan climbs from start away from zero (sweep each polarity as its own plan)`,
    });
  }
}

/** A current limit of a plan must sit below the instrument's compliance, or the compliance fires first. */
function belowCompliance(limit: number | undefined, compliance: number, path: (string | number)[], ctx: z.RefinementCtx): void {
  if (limit !== undefined && limit > compliance)
    ctx.addIssue({
      code: 'custom',
      path,
      message: `${limit} A is above the compliance ${compliance} A: the instrument would clamp the current first; set it at or below the compliance`,
    });
}

export const adaptivePlanSchema = z
  .object({
    kind: z.literal('adaptive'),
    /** First and last bias of the range the sweep may cover, V. */
    start: z.number().finite().default(0),
    stop: z.number().finite(),
    /** The most readings a sweep may take. */
    maxPoints: z.number().int().min(8).max(100000),
    compliance: z.number().positive().finite(),
    /** The sweep stops when the current reaches this, A (default: half the compliance). */
    currentLimit: z.number().positive().finite().optional(),
    /** Stop each sweep when this fitted parameter's total standard error (statistical and window) reaches stdErr (in the parameter's unit). */
    target: z.object({ parameter: z.string().min(1), stdErr: z.number().positive().finite() }).strict(),
    repeat: z.number().int().min(1).max(1000000).default(1),
    dwell: z.number().min(0).max(86400).default(0),
    delay: z.number().min(0).max(3600).default(0),
    nplc: z.number().min(0.001).max(100).optional(),
    overrideDiskCheck: z.boolean().default(false),
  })
  .strict()
  .superRefine((p, ctx) => {
    outward(p, ctx);
    belowCompliance(p.currentLimit, p.compliance, ['currentLimit'], ctx);
  });

export const voltageRampPlanSchema = z
  .object({
    kind: z.literal('voltage-ramp'),
    /** First level of the ramp, V. */
    start: z.number().finite().default(0),
    /** The most the ramp goes to, V (the test ends as "survived" there). */
    stop: z.number().finite(),
    /** Voltage step, V (its sign follows stop − start). */
    step: z.number().positive().finite(),
    /** Time at each step, s (the ramp rate is step / stepTime). */
    stepTime: z.number().min(0.001).max(3600),
    /** The instrument's current compliance, A. */
    compliance: z.number().positive().finite(),
    nplc: z.number().min(0.001).max(100).optional(),
    ...useCheck,
    criteria: rampCriteria.default(rampCriteria.parse({})),
    overrideDiskCheck: z.boolean().default(false),
  })
  .strict()
  .superRefine((p, ctx) => {
    outward(p, ctx);
    belowCompliance(p.criteria.currentLimit, p.compliance, ['criteria', 'currentLimit'], ctx);
    if (p.criteria.floor >= p.compliance)
      ctx.addIssue({
        code: 'custom',
        path: ['criteria', 'floor'],
        message: `${p.criteria.floor} A is not below the compliance ${p.compliance} A: no reading could be judged`,
      });
    if (Math.abs(p.stop - p.start) / p.step > 1e6) ctx.addIssue({ code: 'custom', path: ['step'], message: 'makes more than a million steps' });
  });

export const currentRampPlanSchema = z
  .object({
    kind: z.literal('current-ramp'),
    /** First forced current, A (its sign gives the polarity). */
    start: z
      .number()
      .finite()
      .refine((x) => x !== 0, 'must not be zero'),
    /** The most the ramp forces, A. */
    stop: z.number().finite(),
    /** Logarithmic steps per decade of current. */
    stepsPerDecade: z.number().int().min(1).max(1000).default(10),
    /** Time at each step, s. */
    stepTime: z.number().min(0.001).max(3600),
    /** The instrument's voltage compliance while forcing current, V. */
    voltageLimit: z.number().positive().finite(),
    nplc: z.number().min(0.001).max(100).optional(),
    ...useCheck,
    criteria: z
      .object({
        /** The voltage falling by this fraction of its highest value so far is a collapse (breakdown). */
        voltageDrop: z.number().min(0.01).max(0.99).default(0.1),
        /**
         * V: the voltage the device must hold before a fall counts as a collapse (our default, 0.1 V:
         * an intact film needs volts to pass even a nanoampere); a device below it at the first
         * level already conducts — an initial failure, not stressed further.
         */
        voltageFloor: z.number().positive().finite().default(0.1),
      })
      .strict()
      .default({ voltageDrop: 0.1, voltageFloor: 0.1 }),
    overrideDiskCheck: z.boolean().default(false),
  })
  .strict()
  .superRefine((p, ctx) => {
    if (!(p.start * p.stop > 0) || Math.abs(p.stop) <= Math.abs(p.start))
      ctx.addIssue({ code: 'custom', path: ['stop'], message: 'must have the sign of start and a larger magnitude' });
  });

export const constantStressPlanSchema = z
  .object({
    kind: z.literal('constant-voltage'),
    /** Stress bias, V. */
    stress: z
      .number()
      .finite()
      .refine((x) => x !== 0, 'must not be zero'),
    /** Longest stress, s (the device then "survived"). */
    duration: z
      .number()
      .positive()
      .max(30 * 86400),
    /** Time between current readings under stress, s. */
    sampleEvery: z.number().min(0.001).max(3600),
    compliance: z.number().positive().finite(),
    nplc: z.number().min(0.001).max(100).optional(),
    /** A short low-field sweep every `every` s of stress, to watch the leakage grow (stress-induced leakage). */
    sense: z
      .object({
        start: z.number().finite(),
        stop: z.number().finite(),
        points: z.number().int().min(2).max(10000),
        every: z.number().positive(),
      })
      .strict()
      .optional(),
    ...useCheck,
    criteria: z
      .object({
        currentJump: z.number().min(1.5).default(10),
        currentLimit: z.number().positive().finite().optional(),
        floor: z.number().positive().finite().default(1e-10),
      })
      .strict()
      .default({ currentJump: 10, floor: 1e-10 }),
    overrideDiskCheck: z.boolean().default(false),
  })
  .strict()
  .superRefine((p, ctx) => {
    belowCompliance(p.criteria.currentLimit, p.compliance, ['criteria', 'currentLimit'], ctx);
    if (p.criteria.floor >= p.compliance)
      ctx.addIssue({
        code: 'custom',
        path: ['criteria', 'floor'],
        message: `${p.criteria.floor} A is not below the compliance ${p.compliance} A: no reading could be judged`,
      });
    // A plan that cannot do what it says: one reading at the start and no more, or sense sweeps
    // asked for that never come (they run at each multiple of sense.every short of the duration).
    if (p.sampleEvery > p.duration)
      ctx.addIssue({
        code: 'custom',
        path: ['sampleEvery'],
        message: `${p.sampleEvery} s is longer than the duration ${p.duration} s: the stress would be read once, at its start; read at least every ${p.duration} s`,
      });
    if (p.sense && p.sense.every >= p.duration)
      ctx.addIssue({
        code: 'custom',
        path: ['sense', 'every'],
        message: `${p.sense.every} s is not shorter than the duration ${p.duration} s: no sense sweep would be taken (one runs at each multiple of sense.every before the stress ends); shorten it, or leave sense out`,
      });
    if (p.sense && p.sense.every < p.sampleEvery)
      ctx.addIssue({
        code: 'custom',
        path: ['sense', 'every'],
        message: `${p.sense.every} s is shorter than sampleEvery ${p.sampleEvery} s: sense sweeps are checked between stress readings`,
      });
  });

export type AdaptivePlan = z.infer<typeof adaptivePlanSchema>;
export type VoltageRampPlan = z.infer<typeof voltageRampPlanSchema>;
export type CurrentRampPlan = z.infer<typeof currentRampPlanSchema>;
export type ConstantStressPlan = z.infer<typeof constantStressPlanSchema>;
export type StressPlan = VoltageRampPlan | CurrentRampPlan | ConstantStressPlan;
export type Plan = SweepPlan | AdaptivePlan | StressPlan;

export const PLAN_KINDS = ['linear', 'log', 'list', 'adaptive', 'voltage-ramp', 'current-ramp', 'constant-voltage'] as const;

/** Any plan object (zod), for configs and request bodies; `parsePlan` gives the error that names the field. */
export const planSchema = z
  .unknown()
  .superRefine((raw, ctx) => {
    try {
      parsePlan(raw);
    } catch (e) {
      ctx.addIssue({ code: 'custom', message: (e as Error).message.replace(/^plan: /, '') });
    }
  })
  .transform((raw) => parsePlan(raw));

export function isStressPlan(p: Plan): p is StressPlan {
  return p.kind === 'voltage-ramp' || p.kind === 'current-ramp' || p.kind === 'constant-voltage';
}

export function isSweepPlan(p: Plan): p is SweepPlan {
  return p.kind === 'linear' || p.kind === 'log' || p.kind === 'list';
}

/** Validates an unknown value as a plan; errors name the field (`where` is the file or 'plan'). */
export function parsePlan(raw: unknown, where = 'plan'): Plan {
  const kind = typeof raw === 'object' && raw !== null && !Array.isArray(raw) ? (raw as { kind?: unknown }).kind : undefined;
  if (kind !== undefined && !(PLAN_KINDS as readonly unknown[]).includes(kind)) {
    throw new PlanError(
      `${where}: field 'kind': '${String(kind)}' is not a plan kind${typeof kind === 'string' ? didYouMean(kind, PLAN_KINDS) : ''} (${PLAN_KINDS.join(', ')})`,
    );
  }
  const schema =
    kind === 'adaptive'
      ? adaptivePlanSchema
      : kind === 'voltage-ramp'
        ? voltageRampPlanSchema
        : kind === 'current-ramp'
          ? currentRampPlanSchema
          : kind === 'constant-voltage'
            ? constantStressPlanSchema
            : sweepPlanSchema;
  const r = (schema as z.ZodType<Plan>).safeParse(raw);
  if (!r.success) throw new PlanError(zodMessage(r.error, where, raw, schema as z.ZodType));
  return r.data;
}

/** How many sweeps (or test phases) a plan runs, and the most points one of them holds (for progress and the journal estimate). */
export function planShape(p: Plan): { sweeps: number; pointsPerSweep: number } {
  switch (p.kind) {
    case 'adaptive':
      return { sweeps: p.repeat, pointsPerSweep: p.maxPoints };
    case 'voltage-ramp':
      return { sweeps: 1 + useChecks(p), pointsPerSweep: Math.floor(Math.abs(p.stop - p.start) / p.step) + 2 };
    case 'current-ramp':
      return { sweeps: 1 + useChecks(p), pointsPerSweep: Math.ceil(Math.log10(Math.abs(p.stop / p.start)) * p.stepsPerDecade) + 1 };
    case 'constant-voltage': {
      // A sense sweep at each multiple of sense.every short of the duration, and a stress segment
      // before each and after the last.
      const senses = senseSweeps(p);
      return { sweeps: 2 * senses + 1 + useChecks(p), pointsPerSweep: Math.max(Math.ceil(p.duration / p.sampleEvery) + 1, p.sense?.points ?? 0) };
    }
    default:
      return { sweeps: p.repeat, pointsPerSweep: sweepValues(p).length };
  }
}

/** The levels a voltage ramp sets, V: start, then every step towards stop, and stop itself. */
export function voltageRampLevels(p: VoltageRampPlan): number[] {
  const dir = Math.sign(p.stop - p.start);
  const steps = Math.floor(Math.abs(p.stop - p.start) / p.step + 1e-9);
  // Rounded to 12 significant digits: 9.6 V goes to the instrument as 9.6, not 9.600000000000001.
  const levels = Array.from({ length: steps + 1 }, (_, k) => Number((p.start + dir * k * p.step).toPrecision(12)));
  if (Math.abs(levels[levels.length - 1] - p.stop) > 1e-9) levels.push(p.stop);
  return levels;
}

/** The currents a current ramp forces, A: stepsPerDecade to a decade from start, and stop itself. */
export function currentRampLevels(p: CurrentRampPlan): number[] {
  const decades = Math.log10(Math.abs(p.stop / p.start));
  const n = Math.ceil(decades * p.stepsPerDecade - 1e-9);
  return Array.from({ length: n + 1 }, (_, k) => (k === n ? p.stop : p.start * 10 ** (k / p.stepsPerDecade)));
}

/** The sense sweeps of a constant-voltage stress: one at each multiple of sense.every short of the duration. */
export function senseSweeps(p: ConstantStressPlan): number {
  return p.sense ? Math.max(0, Math.ceil(p.duration / p.sense.every) - 1) : 0;
}

/** The one-reading sweeps of a test's use-condition check, before and after. */
function useChecks(p: { useVoltage?: number }): number {
  return p.useVoltage !== undefined ? 2 : 0;
}

/** The current compliance a plan runs under, A (a current ramp has a voltage limit instead: undefined). */
export function planCompliance(p: Plan): number | undefined {
  return p.kind === 'current-ramp' ? undefined : p.compliance;
}

/** The bias values of one sweep, V. */
export function sweepValues(p: SweepPlan): number[] {
  let out: number[];
  if (p.kind === 'list') out = [...(p.values ?? [])];
  else {
    const n = p.points ?? 2;
    const a = p.start ?? 0;
    const b = p.stop ?? 0;
    out = new Array<number>(n);
    if (p.kind === 'linear') for (let k = 0; k < n; k++) out[k] = a + ((b - a) * k) / (n - 1);
    else {
      const la = Math.log(Math.abs(a));
      const lb = Math.log(Math.abs(b));
      const s = Math.sign(a);
      for (let k = 0; k < n; k++) out[k] = s * Math.exp(la + ((lb - la) * k) / (n - 1));
      out[0] = a;
      out[n - 1] = b;
    }
  }
  if (p.dual) for (let k = out.length - 2; k >= 0; k--) out.push(out[k]);
  return out;
}

export function describePlan(p: Plan): string {
  switch (p.kind) {
    case 'adaptive':
      return `adaptive ${p.start} V → ${p.stop} V, at most ${p.maxPoints} points per sweep, until ${p.target.parameter} is known to ±${p.target.stdErr} (its SI unit: eV for energies, m for lengths) × ${p.repeat} sweep(s); compliance ${p.compliance} A`;
    case 'voltage-ramp':
      return `voltage ramp ${p.start} V → ${p.stop} V in ${p.step} V steps of ${p.stepTime} s (${(p.step / p.stepTime).toPrecision(3)} V/s) to breakdown; compliance ${p.compliance} A${p.useVoltage !== undefined ? `; use-condition check at ${p.useVoltage} V before and after` : ''}`;
    case 'current-ramp':
      return `current ramp ${p.start} A → ${p.stop} A, ${p.stepsPerDecade} steps per decade of ${p.stepTime} s, to breakdown; voltage limit ${p.voltageLimit} V${p.useVoltage !== undefined ? `; use-condition check at ${p.useVoltage} V before and after` : ''}`;
    case 'constant-voltage':
      return `constant-voltage stress at ${p.stress} V for up to ${p.duration} s, a reading every ${p.sampleEvery} s${p.sense ? `, a sense sweep ${p.sense.start} V → ${p.sense.stop} V every ${p.sense.every} s` : ''}; compliance ${p.compliance} A`;
    default: {
      const v = sweepValues(p);
      const shape = p.kind === 'list' ? `list of ${p.values?.length} values` : `${p.kind} ${p.start} V → ${p.stop} V, ${p.points} points`;
      return `${shape}${p.dual ? ', out and back' : ''}; ${v.length} points per sweep × ${p.repeat} sweep(s); compliance ${p.compliance} A${p.delay ? `; settle ${p.delay} s` : ''}${p.dwell ? `; dwell ${p.dwell} s` : ''}`;
    }
  }
}

/** Journal bytes per reading (one binary record) and per sweep (its events: boundaries, fits, drift). */
const BYTES_PER_READING = 56;
const BYTES_PER_SWEEP = 8192;

/** The journal a plan will write, bytes (an estimate on the high side). */
export function planJournalBytes(p: Plan): number {
  const { sweeps, pointsPerSweep } = planShape(p);
  return sweeps * (pointsPerSweep * BYTES_PER_READING + BYTES_PER_SWEEP);
}

/**
 * Refuses a plan whose journal would not fit in the free space of the data folder's disk (checked
 * on the nearest existing parent), unless the plan says `overrideDiskCheck: true`.
 */
export function checkPlanSize(p: Plan, dataDir: string): void {
  if (p.overrideDiskCheck) return;
  const need = planJournalBytes(p);
  let dir = dataDir;
  let free: number | undefined;
  for (let k = 0; k < 64 && free === undefined; k++) {
    try {
      const st = statfsSync(dir);
      free = st.bavail * st.bsize;
    } catch {
      const parent = dir.replace(/\/[^/]*\/?$/, '') || '/';
      if (parent === dir) break;
      dir = parent;
    }
  }
  if (free === undefined || need <= free) return;
  const { sweeps, pointsPerSweep } = planShape(p);
  const gib = (b: number) => (b >= 1e9 ? `${(b / 1e9).toPrecision(3)} GB` : `${(b / 1e6).toPrecision(3)} MB`);
  const field = p.kind === 'constant-voltage' ? 'duration' : p.kind === 'voltage-ramp' ? 'step' : p.kind === 'current-ramp' ? 'stepsPerDecade' : 'repeat';
  throw new PlanError(
    `plan: field '${field}': ${sweeps} sweep(s) × ${pointsPerSweep} points would write about ${gib(need)} of journal, more than the ${gib(free)} free under ${dataDir}; shorten the plan, free space, or set "overrideDiskCheck": true in the plan ('plumbline run --override-disk-check')`,
  );
}
