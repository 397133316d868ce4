/**
 * SMU dialects: small JSON files (config/dialects/) of command templates. `{value}` is replaced by
 * an NR3 number. A user adds a dialect for their instrument without code; a wrong file names the
 * field that is wrong.
 */
import { readFileSync } from 'node:fs';
import { join } from 'node:path';
import { z } from 'zod';
import { projectRoot } from './project-root.js';
import { formatScpiNumber } from './scpi-numbers.js';

export const DIALECT_DIR = join(projectRoot(), 'config', 'dialects');

const template = z.string().min(1);
export const dialectSchema = z.object({
  name: z.string(),
  description: z.string().optional(),
  terminator: z.enum(['\n', '\r\n']).default('\n'),
  timeoutMs: z.number().int().positive().default(2000),
  commands: z.object({
    reset: template,
    identify: template,
    sourceVoltageMode: template,
    sourceVoltage: template.refine((s) => s.includes('{value}'), 'must contain {value}'),
    compliance: template.refine((s) => s.includes('{value}'), 'must contain {value}'),
    integration: template.refine((s) => s.includes('{value}'), 'must contain {value}'),
    autoRange: template,
    outputOn: template,
    outputOff: template,
    outputQuery: template,
    measure: template,
    complianceTripped: template,
    abort: template,
    errorQuery: template,
  }).strict(),
  readFields: z.array(z.enum(['voltage', 'current', 'time', 'status', 'ignore'])).min(2)
    .refine((f) => f.includes('voltage') && f.includes('current'), 'must name a voltage and a current field'),
}).strict();

export type Dialect = z.infer<typeof dialectSchema>;

export function loadDialect(nameOrFile: string): Dialect {
  const file = nameOrFile.endsWith('.json') ? nameOrFile : join(DIALECT_DIR, `${nameOrFile}.json`);
  let raw: unknown;
  try {
    raw = JSON.parse(readFileSync(file, 'utf8'));
  } catch (e) {
    throw new Error(`dialect ${file}: ${(e as Error).message}`);
  }
  const r = dialectSchema.safeParse(raw);
  if (!r.success) {
    const i = r.error.issues[0];
    throw new Error(`dialect ${file}: field '${i.path.join('.')}': ${i.message}`);
  }
  return r.data;
}

export function fill(templateText: string, value: number): string {
  return templateText.replace('{value}', formatScpiNumber(value));
}
