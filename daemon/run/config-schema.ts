/**
 * JSON Schema (draft 2020-12) of the station config, generated from the same zod schemas that
 * validate it, so editors can check and complete config/station.json as it is written. The shipped
 * config points to it with "$schema". A plan in the config may be of any plan kind: its schema is
 * the union of the plan kinds'. Run this file with --write to regenerate config/station.schema.json
 * (a test fails when the committed file is out of date).
 */
import { writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { z } from 'zod';
import { projectRoot } from '../../protocols/project-root.js';
import { stationSchema } from './config.js';
import { adaptivePlanSchema, constantStressPlanSchema, currentRampPlanSchema, sweepPlanSchema, voltageRampPlanSchema } from './plan.js';

export const STATION_SCHEMA_FILE = join(projectRoot(), 'config', 'station.schema.json');

const json = (s: z.ZodType) => z.toJSONSchema(s, { unrepresentable: 'any', io: 'input', target: 'draft-2020-12' }) as Record<string, unknown>;

/** Any plan kind, as JSON Schema (the station config's default plan and the run request's plan). */
export function planJsonSchema(description: string): Record<string, unknown> {
  const plans = [sweepPlanSchema, adaptivePlanSchema, voltageRampPlanSchema, currentRampPlanSchema, constantStressPlanSchema].map((p) => {
    const { $schema: _drop, ...rest } = json(p);
    return rest;
  });
  return { description, anyOf: plans };
}

export function stationJsonSchema(): Record<string, unknown> {
  const doc = json(stationSchema);
  const props = doc.properties as Record<string, unknown>;
  props.plan = planJsonSchema(
    'The default plan: a sweep (linear, log, list), an adaptive sweep, or a breakdown test (voltage-ramp, current-ramp, constant-voltage).',
  );
  return { ...doc, title: 'plumbline station config', $id: 'https://plumbline.invalid/station.schema.json' };
}

if (process.argv[1] && fileURLToPath(import.meta.url) === process.argv[1] && process.argv.includes('--write')) {
  writeFileSync(STATION_SCHEMA_FILE, `${JSON.stringify(stationJsonSchema(), null, 2)}\n`);
  process.stdout.write(`wrote ${STATION_SCHEMA_FILE}\n`);
}
