/**
 * Sweep plans: linear and logarithmic staircases, list sweeps, single or dual (out and back),
 * repeated with a dwell between sweeps, with per-point settling delay, integration time and the
 * compliance for the run. Validated with zod so a bad plan names its field.
 */
import { statfsSync } from 'node:fs';
import { z } from 'zod';

export const planSchema = z.object({
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
}).strict().superRefine((p, ctx) => {
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

export type Plan = z.infer<typeof planSchema>;

export class PlanError extends Error {
  readonly code = 'BAD_PLAN';
}

/** Validates an unknown value as a plan; errors name the field (`where` is the file or 'plan'). */
export function parsePlan(raw: unknown, where = 'plan'): Plan {
  const r = planSchema.safeParse(raw);
  if (!r.success) {
    const i = r.error.issues[0];
    throw new PlanError(`${where}: field '${i.path.join('.') || '(root)'}': ${i.message}`);
  }
  return r.data;
}

/** The bias values of one sweep, V. */
export function sweepValues(p: Plan): number[] {
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
  const v = sweepValues(p);
  const shape = p.kind === 'list' ? `list of ${p.values?.length} values` : `${p.kind} ${p.start} V → ${p.stop} V, ${p.points} points`;
  return `${shape}${p.dual ? ', out and back' : ''}; ${v.length} points per sweep × ${p.repeat} sweep(s); compliance ${p.compliance} A${p.delay ? `; settle ${p.delay} s` : ''}${p.dwell ? `; dwell ${p.dwell} s` : ''}`;
}

/** Journal bytes per reading (one binary record) and per sweep (its events: boundaries, fits, drift). */
const BYTES_PER_READING = 56;
const BYTES_PER_SWEEP = 8192;

/** The journal a plan will write, bytes (an estimate on the high side). */
export function planJournalBytes(p: Plan): number {
  return p.repeat * (sweepValues(p).length * BYTES_PER_READING + BYTES_PER_SWEEP);
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
  const perSweep = sweepValues(p).length;
  const gib = (b: number) => (b >= 1e9 ? `${(b / 1e9).toPrecision(3)} GB` : `${(b / 1e6).toPrecision(3)} MB`);
  throw new PlanError(`plan: field 'repeat': ${p.repeat} sweep(s) × ${perSweep} points would write about ${gib(need)} of journal, more than the ${gib(free)} free under ${dataDir}; shorten the plan, free space, or set "overrideDiskCheck": true`);
}
