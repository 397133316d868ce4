/**
 * Scenario files (config/scenarios/*.json): invented demo devices — our own wafers, sites and
 * samples — each a device spec for the simulator plus instrument settings. Validated with zod so a
 * typo names the file and the field.
 */
import { readdirSync, readFileSync } from 'node:fs';
import { basename, join } from 'node:path';
import { z } from 'zod';
import { projectRoot } from '../../protocols/project-root.js';
import { didYouMean } from '../analysis/did-you-mean.js';

export const SCENARIO_DIR = join(projectRoot(), 'config', 'scenarios');

const numberRecord = z.record(z.string(), z.number());
export const scenarioSchema = z
  .object({
    name: z.string().regex(/^[a-z0-9-]+$/),
    description: z.string().min(1),
    device: z
      .object({
        mechanism: z.string(),
        params: numberRecord,
        inputs: z
          .object({
            thickness: z.number().positive().optional(),
            area: z.number().positive().optional(),
            temperature: z.number().positive().optional(),
            massRatio: z.number().positive().optional(),
            permittivity: z.number().positive().optional(),
            refractiveIndex: z.number().positive().optional(),
            flatBand: z.number().optional(),
            richardson: z.number().positive().optional(),
          })
          .strict(),
        polarity: z.enum(['symmetric', 'raw']).optional(),
        leakageResistance: z.number().positive().optional(),
        drift: z.object({ parameter: z.string(), perReading: z.number() }).optional(),
        breakdownField: z.number().positive().optional(),
        brokenResistance: z.number().positive().optional(),
        wearout: z
          .object({
            shape: z.number().positive(),
            chargeScale: z.number().positive(),
            referenceField: z.number().positive(),
            fieldAcceleration: z.number().min(0),
            referenceArea: z.number().positive(),
          })
          .strict()
          .optional(),
      })
      .strict(),
    /** Suggested sweep for demos and `plumbline run`. */
    sweep: z.object({ start: z.number(), stop: z.number(), points: z.number().int().min(2), compliance: z.number().positive() }).strict(),
    /** Suggested analysis for the live fit. */
    analysis: z
      .object({
        model: z.string(),
        from: z.number().optional(),
        to: z.number().optional(),
        solar: z.object({ irradiance: z.number().positive().optional() }).strict().optional(),
      })
      .strict(),
  })
  .strict();

export type Scenario = z.infer<typeof scenarioSchema>;

export class ScenarioError extends Error {
  readonly code = 'BAD_SCENARIO';
}

export function loadScenarioFile(file: string): Scenario {
  let raw: unknown;
  try {
    raw = JSON.parse(readFileSync(file, 'utf8'));
  } catch (e) {
    throw new ScenarioError(`${file}: ${(e as Error).message}`);
  }
  const r = scenarioSchema.safeParse(raw);
  if (!r.success) {
    const issue = r.error.issues[0];
    throw new ScenarioError(`${file}: field '${issue.path.join('.')}': ${issue.message}`);
  }
  return r.data;
}

export function listScenarios(dir = SCENARIO_DIR): Scenario[] {
  return readdirSync(dir)
    .filter((f) => f.endsWith('.json'))
    .sort()
    .map((f) => loadScenarioFile(join(dir, f)));
}

export function findScenario(name: string, dir = SCENARIO_DIR): Scenario {
  const all = listScenarios(dir);
  const s = all.find((k) => k.name === name || basename(name, '.json') === k.name);
  if (!s) {
    const names = all.map((k) => k.name);
    throw new ScenarioError(`no scenario '${name}'${didYouMean(basename(name, '.json'), names)}; known: ${names.join(', ')}`);
  }
  return s;
}
