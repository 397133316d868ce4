/**
 * SMU dialects: small JSON files (config/dialects/) that say how one family of instruments is
 * driven — command templates, reply shapes, terminators and timing. `{value}` in a template is
 * replaced by an NR3 number, `{values}` by a comma-separated list of them. A user adds a dialect
 * for their instrument without code; a wrong file names the field that is wrong.
 *
 * SCPI fixes the syntax and a few nodes (OUTPut, SOURce:VOLTage, SYSTem:ERRor?, the IEEE 488.2
 * common commands), but where an SMU keeps its compliance limit, how it reports reaching it and
 * what one reading holds differ between instrument families; each dialect file states its own.
 */
import { readdirSync, readFileSync } from 'node:fs';
import { join } from 'node:path';
import { z } from 'zod';
import { didYouMean } from '../daemon/analysis/did-you-mean.js';
import { projectRoot } from './project-root.js';
import { formatScpiNumber } from './scpi-numbers.js';

export const DIALECT_DIR = join(projectRoot(), 'config', 'dialects');

const template = z.string().min(1);
const valued = template.refine((s) => s.includes('{value}'), 'must contain {value}');

/** Templates for instrument-paced sweeps: the instrument steps through a list of levels itself. */
const pacedSchema = z
  .object({
    /** Puts the source in list mode. */
    listMode: template,
    /** Loads the levels of one block ({values}). */
    listValues: template.refine((s) => s.includes('{values}'), 'must contain {values}'),
    /** Number of source-measure points in the block ({value}). */
    pointCount: valued,
    /** Settling time before each point's measurement, s ({value}). */
    pointDelay: valued,
    /** Starts the block. */
    start: template,
    /** A query whose integer reply has `busyMask` set while the block runs (polled, so the parser stays free for an abort). */
    busyQuery: template,
    busyMask: z.number().int().positive(),
    /** Fetches the block's readings: readFields repeated once per point, comma-separated. */
    fetch: template,
    /** Back to a fixed level after the last block. */
    fixedMode: template,
    /** The most levels the instrument's list holds. */
    maxPoints: z.number().int().min(2).max(100000),
  })
  .strict();

export const dialectSchema = z
  .object({
    name: z.string().min(1),
    /** What the dialect is: the structure of the command tree, in plain words. */
    description: z.string().min(1),
    /** Appended to every message written: LF (default), CR LF, or CR. */
    terminator: z.enum(['\n', '\r\n', '\r']).default('\n'),
    /** What ends a reply: lf (a trailing CR is stripped), crlf, or cr. */
    readTerminator: z.enum(['lf', 'crlf', 'cr']).default('lf'),
    /** Reply timeout of a query, ms (the station config can override it). */
    timeoutMs: z.number().int().min(10).max(600000).default(2000),
    /** Least time between two messages, ms, for instruments whose parser needs it. */
    commandDelayMs: z.number().min(0).max(10000).default(0),
    commands: z
      .object({
        /** Sent first when a run configures the instrument (e.g. reset and clear status); optional. */
        reset: template.optional(),
        identify: template,
        /** Optional: how the reading's fields are chosen (e.g. voltage, current and a status word). */
        readingFormat: template.optional(),
        sourceVoltageMode: template,
        sourceVoltage: valued,
        compliance: valued,
        integration: valued,
        autoRange: template,
        outputOn: template,
        outputOff: template,
        /** Output state query; its reply 0/OFF or 1/ON confirms what the output did. */
        outputQuery: template,
        measure: template,
        /** Compliance query (reply 0 or 1); not needed when the reading carries a status word with `status.complianceMask`. */
        complianceTripped: template.optional(),
        /** Current sourcing (current ramps): the source function, the forced current ({value}, A) and the voltage compliance ({value}, V). Optional. */
        sourceCurrentMode: template.optional(),
        sourceCurrent: valued.optional(),
        voltageCompliance: valued.optional(),
        /** Optional: reaching the voltage compliance while forcing current (reply 0 or 1); otherwise the compliance query or status bit is used. */
        voltageComplianceTripped: template.optional(),
        /** Stops whatever the instrument is doing (trigger model, a running list); sent ahead of output off on an abort. */
        abort: template,
        errorQuery: template,
      })
      .strict(),
    /** Fields of one reading, in reply order. */
    readFields: z
      .array(z.enum(['voltage', 'current', 'time', 'status', 'ignore']))
      .min(2)
      .refine((f) => f.includes('voltage') && f.includes('current'), 'must name a voltage and a current field')
      .refine(
        (f) => f.filter((x) => x === 'voltage').length === 1 && f.filter((x) => x === 'current').length === 1,
        'must name exactly one voltage and one current field',
      ),
    /** The status word of a reading: which bits mean "at compliance". */
    status: z.object({ complianceMask: z.number().int().positive() }).strict().optional(),
    /**
     * How far the measured bias may sit from the programmed level before the reply is taken as
     * belonging to another point (out of step): |V − V_set| ≤ absolute + relative·|V_set|.
     */
    readback: z
      .object({ relative: z.number().min(0).max(1), absolute: z.number().min(0) })
      .strict()
      .default({ relative: 0.01, absolute: 0.05 }),
    /** Instrument-paced sweeps (optional). */
    paced: pacedSchema.optional(),
  })
  .strict()
  .superRefine((d, ctx) => {
    const statusField = d.readFields.includes('status');
    if (d.status && !statusField) ctx.addIssue({ code: 'custom', path: ['status'], message: 'a status mask needs a "status" entry in readFields' });
    if (d.paced && !(d.status && statusField)) {
      ctx.addIssue({
        code: 'custom',
        path: ['paced'],
        message:
          'instrument-paced sweeps need readings that carry a status word (readFields "status" and status.complianceMask): compliance cannot be queried per point',
      });
    }
    const cur = [d.commands.sourceCurrentMode, d.commands.sourceCurrent, d.commands.voltageCompliance];
    if (cur.some((x) => x !== undefined) && cur.some((x) => x === undefined)) {
      ctx.addIssue({
        code: 'custom',
        path: ['commands', 'sourceCurrentMode'],
        message: 'current sourcing needs all three of sourceCurrentMode, sourceCurrent and voltageCompliance',
      });
    }
    if (!d.commands.complianceTripped && !(d.status && statusField)) {
      ctx.addIssue({
        code: 'custom',
        path: ['commands', 'complianceTripped'],
        message: 'needed unless the reading carries a status word (readFields "status" and status.complianceMask)',
      });
    }
  });

export type Dialect = z.infer<typeof dialectSchema>;
export type PacedTemplates = z.infer<typeof pacedSchema>;

/** Dialect names that were renamed, with the name to use now. */
const RENAMED: Record<string, string> = { 'scpi-default': 'protection-trip' };

export class DialectError extends Error {
  readonly code = 'BAD_CONFIG';
}

/** The names of the dialects shipped in config/dialects/. */
export function shippedDialects(): string[] {
  try {
    return readdirSync(DIALECT_DIR)
      .filter((f) => f.endsWith('.json'))
      .map((f) => f.slice(0, -5))
      .sort();
  } catch {
    return [];
  }
}

/** The dialects shipped in config/dialects/. */
export function dialectFile(nameOrFile: string): string {
  return nameOrFile.endsWith('.json') ? nameOrFile : join(DIALECT_DIR, `${nameOrFile}.json`);
}

export function loadDialect(nameOrFile: string): Dialect {
  if (RENAMED[nameOrFile]) throw new DialectError(`dialect '${nameOrFile}' is now called '${RENAMED[nameOrFile]}': change the station config's "dialect"`);
  const file = dialectFile(nameOrFile);
  let text: string;
  try {
    text = readFileSync(file, 'utf8');
  } catch (e) {
    const err = e as NodeJS.ErrnoException;
    throw new DialectError(
      err.code === 'ENOENT'
        ? nameOrFile.endsWith('.json')
          ? `dialect '${nameOrFile}': no file ${file} (a dialect of your own is given by its .json path; see the README, "Connecting a real instrument")`
          : `dialect '${nameOrFile}': not a shipped dialect${didYouMean(nameOrFile, shippedDialects())} (shipped: ${shippedDialects().join(', ')}, in ${DIALECT_DIR}; a dialect of your own is given by its .json path; see the README, "Connecting a real instrument")`
        : `dialect ${file}: cannot read: ${err.message}`,
    );
  }
  let raw: unknown;
  try {
    raw = JSON.parse(text);
  } catch (e) {
    throw new DialectError(`dialect ${file}: not valid JSON: ${(e as Error).message}`);
  }
  const r = dialectSchema.safeParse(raw);
  if (!r.success) {
    const i = r.error.issues[0];
    throw new DialectError(
      `dialect ${file}: field '${i.path.join('.') || '(root)'}': ${i.message} (the fields are described in the README, "Connecting a real instrument")`,
    );
  }
  return r.data;
}

export function fill(templateText: string, value: number): string {
  return templateText.replace('{value}', formatScpiNumber(value));
}

export function fillList(templateText: string, values: readonly number[]): string {
  return templateText.replace('{values}', values.map(formatScpiNumber).join(','));
}
