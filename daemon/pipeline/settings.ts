/**
 * Settings of the live chain, validated with zod (from the station config, the API and the page):
 * the analysis (model, window, inputs), the drift watch and the breakdown watch.
 */
import { z } from 'zod';
import { didYouMean } from '../analysis/did-you-mean.js';
import { DEFAULT_BREAKDOWN } from '../analysis/breakdown.js';
import { DEFAULT_DRIFT } from '../analysis/drift.js';
import { windowAcrossBranches } from '../analysis/analyze.js';
import { getMechanism, MODEL_IDS, unknownModelMessage } from '../analysis/mechanisms/index.js';

/** The models a live chain fits (every one but `custom`, whose expressions only `fit` takes). */
const LIVE_MODELS = MODEL_IDS.filter((m) => m !== 'custom');

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
    model: z.string().superRefine((m, ctx) => {
      if (LIVE_MODELS.includes(m)) return;
      // The custom model needs its expressions, which only `plumbline fit` takes.
      const message =
        m === 'custom'
          ? `model 'custom' is for plumbline fit (--x-expr, --y-expr); choose one of: ${LIVE_MODELS.join(', ')}`
          : unknownModelMessage(m, LIVE_MODELS);
      ctx.addIssue({ code: 'custom', message });
    }),
    window: windowSchema.default('auto'),
    inputs: inputsSchema.default({}),
    /**
     * An illuminated solar cell: each finished sweep also gets its figures of merit with
     * uncertainties and the single-diode fit (irradiance in W/m², default 1000).
     */
    solar: z.object({ irradiance: positive.optional() }).strict().optional(),
  })
  .strict()
  .superRefine((a, ctx) => {
    // A window must lie on one branch: the same rule as the fit itself and the command line.
    if (!LIVE_MODELS.includes(a.model)) return;
    const across = windowAcrossBranches(getMechanism(a.model), a.window, a.inputs.flatBand ?? 0);
    if (across) ctx.addIssue({ code: 'custom', path: ['window'], message: across });
  });

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

/** The value at a path of a raw JSON object (undefined when absent). */
function at(raw: unknown, path: readonly PropertyKey[]): unknown {
  let v = raw;
  for (const k of path) {
    if (typeof v !== 'object' || v === null) return undefined;
    v = (v as Record<PropertyKey, unknown>)[k];
  }
  return v;
}

/** The keys an object schema knows (for "did you mean"), at a path of nested objects. */
function knownKeys(schema: z.ZodType | undefined, path: readonly PropertyKey[]): string[] {
  let s = schema as unknown as { shape?: Record<string, unknown> } | undefined;
  for (const k of path) {
    const next = s?.shape?.[String(k)] as { shape?: Record<string, unknown>; unwrap?: () => unknown } | undefined;
    s = (next?.shape ? next : (next?.unwrap?.() as typeof s)) ?? undefined;
  }
  return Object.keys(s?.shape ?? {});
}

/**
 * First zod issue as "where: field 'a.b': message", in words a person acts on: a missing field is
 * called missing, a quantity written as text ("1 mA") is told to be a JSON number in SI units, an
 * unknown key gets the known one it most likely meant. `raw` is the input that failed; `schema`
 * the object schema, for the known keys.
 */
export function zodMessage(error: z.ZodError, where: string, raw?: unknown, schema?: z.ZodType): string {
  const i = error.issues[0];
  const field = i.path.join('.') || '(root)';
  if (i.code === 'invalid_type' && raw !== undefined) {
    const v = at(raw, i.path);
    if (v === undefined) return `${where}: field '${field}': missing (${i.expected === 'number' ? 'a number, in SI units' : `expected ${i.expected}`})`;
    if (typeof v === 'string' && i.expected === 'number') {
      // An adaptive target's error is in its parameter's unit, not a current's.
      const last = String(i.path.at(-1) ?? '');
      // Counts and link settings are plain numbers, not quantities in SI.
      if (/^(baudRate|dataBits|stopBits|port|timeoutMs|commandDelayMs|points|repeat|maxPoints|seed|stepsPerDecade)$/.test(last))
        return `${where}: field '${field}': '${v}' is text; write it as a JSON number${last === 'baudRate' ? ', e.g. 9600 or 115200 (the rate set on the instrument)' : ''}`;
      const example =
        field === 'target.stdErr' ? "in the parameter's SI unit, e.g. 0.0005 for 0.5 meV (eV for energies, m for lengths)" : 'e.g. 0.001 for 1 mA';
      return `${where}: field '${field}': '${v}' is text; plans and configs are JSON with numbers in SI units (V, A, s, m, m², K, eV): write the number, ${example}`;
    }
  }
  if (i.code === 'unrecognized_keys') {
    const keys = knownKeys(schema, i.path);
    const hints = i.keys.map((k) => `'${k}'${didYouMean(k, keys)}`);
    return `${where}: field '${field}': unknown field ${hints.join(', ')}${keys.length ? ` (known: ${keys.join(', ')})` : ''}`;
  }
  if ((i.code === 'too_small' || i.code === 'too_big') && raw !== undefined && /^Too (small|big)/.test(i.message)) {
    // Numbers out of their range, said in words with the value given ("-1 is too small: it must be
    // more than 0"), not the validator's own wording (a schema's own message is kept).
    const v = at(raw, i.path);
    const bound = i.code === 'too_small' ? i.minimum : i.maximum;
    if (typeof v === 'number' && (typeof bound === 'number' || typeof bound === 'bigint')) {
      const word = i.code === 'too_small' ? (i.inclusive ? 'at least' : 'more than') : i.inclusive ? 'at most' : 'less than';
      return `${where}: field '${field}': ${v} is too ${i.code === 'too_small' ? 'small' : 'large'}: it must be ${word} ${bound}`;
    }
  }
  return `${where}: field '${field}': ${i.message}`;
}
