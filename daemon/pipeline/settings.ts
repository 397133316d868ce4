/**
 * Settings of the live chain, validated with zod (from the station config, the API and the page):
 * the analysis (model, window, inputs), the drift watch and the breakdown watch.
 */
import { z } from 'zod';
import { DEFAULT_BREAKDOWN } from '../analysis/breakdown.js';
import { DEFAULT_DRIFT } from '../analysis/drift.js';
import { MODEL_IDS } from '../analysis/mechanisms/index.js';

const positive = z.number().positive().finite();

export const inputsSchema = z
  .object({
    thickness: positive.optional(),
    area: positive.optional(),
    temperature: positive.optional(),
    massRatio: positive.optional(),
    permittivity: positive.optional(),
    refractiveIndex: positive.optional(),
    flatBand: z.number().finite().optional(),
    richardson: positive.optional(),
  })
  .strict();

export const windowSchema = z.union([
  z.literal('auto'),
  z.literal('all'),
  z.object({ from: z.number().finite().optional(), to: z.number().finite().optional() }).strict(),
]);

export const analysisSchema = z
  .object({
    model: z
      .string()
      .refine((m) => MODEL_IDS.includes(m) && m !== 'custom', { message: `expected one of ${MODEL_IDS.filter((m) => m !== 'custom').join(', ')}` }),
    window: windowSchema.default('auto'),
    inputs: inputsSchema.default({}),
    /**
     * An illuminated solar cell: each finished sweep also gets its figures of merit with
     * uncertainties and the single-diode fit (irradiance in W/m², default 1000).
     */
    solar: z.object({ irradiance: positive.optional() }).strict().optional(),
  })
  .strict();

export type AnalysisSettings = z.infer<typeof analysisSchema>;

export const driftSchema = z
  .object({
    enabled: z.boolean().default(true),
    /** Fitted parameter to chart; default: the model's first parameter. */
    parameter: z.string().optional(),
    method: z.enum(['ewma', 'cusum']).default(DEFAULT_DRIFT.method),
    baseline: z.number().int().min(2).max(1000).default(DEFAULT_DRIFT.baseline),
    lambda: z.number().gt(0).max(1).default(DEFAULT_DRIFT.lambda),
    L: z.number().positive().default(DEFAULT_DRIFT.L),
    warnL: z.number().positive().default(DEFAULT_DRIFT.warnL),
    k: z.number().min(0).default(DEFAULT_DRIFT.k),
    h: z.number().positive().default(DEFAULT_DRIFT.h),
    minRelativeSigma: z.number().min(0).default(DEFAULT_DRIFT.minRelativeSigma),
    /** What an out-of-control point does. */
    action: z.enum(['warn', 'stop-after-sweep', 'abort']).default('abort'),
  })
  .strict();

export type DriftConfig = z.infer<typeof driftSchema>;

export const breakdownSchema = z
  .object({
    enabled: z.boolean().default(true),
    jumpDecades: z.number().positive().default(DEFAULT_BREAKDOWN.jumpDecades),
    withinSteps: z.number().int().min(1).max(100).default(DEFAULT_BREAKDOWN.withinSteps),
    floor: z.number().positive().default(DEFAULT_BREAKDOWN.floor),
    lowFraction: z.number().gt(0).max(1).default(DEFAULT_BREAKDOWN.lowFraction),
    collapseFraction: z.number().gt(0).max(1).default(DEFAULT_BREAKDOWN.collapseFraction),
  })
  .strict();

export type BreakdownConfig = z.infer<typeof breakdownSchema>;

/** First zod issue as "where: field 'a.b': message". */
export function zodMessage(error: z.ZodError, where: string): string {
  const i = error.issues[0];
  return `${where}: field '${i.path.join('.') || '(root)'}': ${i.message}`;
}
