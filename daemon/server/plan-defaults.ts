/**
 * What the station fills in for each plan kind when a field is left out (SI), read from the plan
 * schemas themselves (their `.default`s, through zod's JSON Schema output), so the page's Run form
 * starts from exactly the values a plan without them would run with.
 */
import { z } from 'zod';
import { adaptivePlanSchema, constantStressPlanSchema, currentRampPlanSchema, sweepPlanSchema, voltageRampPlanSchema } from '../run/plan.js';

function defaultsOf(schema: z.ZodType): Record<string, unknown> {
  const json = z.toJSONSchema(schema, { io: 'input', unrepresentable: 'any' }) as { properties?: Record<string, { default?: unknown }> };
  const out: Record<string, unknown> = {};
  for (const [k, p] of Object.entries(json.properties ?? {})) {
    // The kind is the key; the disk check is never a default to offer.
    if (k !== 'kind' && k !== 'overrideDiskCheck' && p.default !== undefined) out[k] = p.default;
  }
  return out;
}

let cached: Record<string, Record<string, unknown>> | undefined;

/** Per plan kind (linear, log, adaptive, voltage-ramp, current-ramp, constant-voltage), the defaults. */
export function planDefaults(): Record<string, Record<string, unknown>> {
  if (!cached) {
    const sweep = defaultsOf(sweepPlanSchema);
    cached = {
      linear: sweep,
      log: sweep,
      adaptive: defaultsOf(adaptivePlanSchema),
      'voltage-ramp': defaultsOf(voltageRampPlanSchema),
      'current-ramp': defaultsOf(currentRampPlanSchema),
      'constant-voltage': defaultsOf(constantStressPlanSchema),
    };
  }
  return cached;
}
