/**
 * The station config (config/station.json by default): which instrument, the hard limits, the
 * default plan and analysis, the drift and breakdown watches, the server and the data folder.
 * Validated with zod; an error names the file and the field.
 */
import { readFileSync } from 'node:fs';
import { isAbsolute, join, resolve } from 'node:path';
import { z } from 'zod';
import { projectRoot } from '../../protocols/project-root.js';
import { fileProblem } from '../../protocols/file-problem.js';
import { analysisSchema, breakdownSchema, driftSchema, zodMessage } from '../pipeline/settings.js';
import { limitsSchema } from './guard.js';
import { planSchema } from './plan.js';

export const DEFAULT_CONFIG_FILE = join(projectRoot(), 'config', 'station.json');
export const DEFAULT_PORT = 8470;

const faultsSchema = z
  .object({
    garbageEvery: z.number().int().positive().optional(),
    dropTerminatorEvery: z.number().int().positive().optional(),
    slowReplyMs: z.number().min(0).optional(),
    disconnectAfterReadings: z.number().int().positive().optional(),
    readDelayMs: z.number().min(0).optional(),
    hangAfterReadings: z.number().int().positive().optional(),
    strayAfterReadings: z.number().int().positive().optional(),
    readingReply: z.string().optional(),
  })
  .strict();

const terminatorName = z.enum(['lf', 'crlf', 'cr']);

/** Link settings that override the dialect's (a converter or a firmware setting can change them). */
const linkOverrides = {
  /** What ends each message written: lf, crlf or cr (default: the dialect's). */
  writeTerminator: terminatorName.optional(),
  /** What ends each reply: lf, crlf or cr (default: the dialect's). */
  readTerminator: terminatorName.optional(),
  /** Least time between two messages, ms (default: the dialect's). */
  commandDelayMs: z.number().min(0).max(10000).optional(),
};

export const instrumentSchema = z.discriminatedUnion('kind', [
  z
    .object({
      kind: z.literal('simulator'),
      scenario: z.string().default('oxide-fn'),
      /** Wait the integration time per reading as a real instrument does. */
      realTime: z.boolean().default(true),
      seed: z.number().int().default(7),
      faults: faultsSchema.optional(),
    })
    .strict(),
  z
    .object({
      kind: z.literal('tcp'),
      host: z.string().min(1),
      port: z.number().int().min(1).max(65535).default(5025),
      ...linkOverrides,
    })
    .strict(),
  z
    .object({
      kind: z.literal('serial'),
      path: z.string().min(1),
      baudRate: z.number().int().positive().max(4000000).default(9600),
      dataBits: z.union([z.literal(5), z.literal(6), z.literal(7), z.literal(8)]).default(8),
      parity: z.enum(['none', 'even', 'odd', 'mark', 'space']).default('none'),
      stopBits: z.union([z.literal(1), z.literal(1.5), z.literal(2)]).default(1),
      /** Hardware flow control (RTS/CTS). */
      rtscts: z.boolean().default(false),
      /** Software flow control (XON/XOFF, bytes 0x11/0x13 in the data: ASCII replies only). */
      xonxoff: z.boolean().default(false),
      ...linkOverrides,
    })
    .strict(),
]);

export type InstrumentConfig = z.infer<typeof instrumentSchema>;

/** The dialect the built-in simulated instrument speaks. */
export const SIMULATOR_DIALECT = 'protection-trip';

export const stationSchema = z
  .object({
    /** The JSON Schema editors check the file against (config/station.schema.json). */
    $schema: z.string().optional(),
    name: z.string().default('station'),
    instrument: instrumentSchema,
    /**
     * The instrument's dialect: a name in config/dialects/ or a .json file. Required for a serial or
     * TCP instrument (which command tree it speaks is a choice, not a default); the simulator speaks
     * protection-trip unless told otherwise.
     */
    dialect: z.string().min(1).optional(),
    /** Reply timeout for each query, ms (default: the dialect's). */
    timeoutMs: z.number().int().min(10).max(600000).optional(),
    limits: limitsSchema,
    /** Default plan (a simulator scenario supplies one when absent). */
    plan: planSchema.optional(),
    /** Default analysis (a simulator scenario supplies one when absent). */
    analysis: analysisSchema.optional(),
    drift: driftSchema.default(driftSchema.parse({})),
    breakdown: breakdownSchema.default(breakdownSchema.parse({})),
    server: z
      .object({
        host: z.string().default('127.0.0.1'),
        port: z.number().int().min(0).max(65535).default(DEFAULT_PORT),
        /** Required for every request when the server listens beyond loopback, and for control requests whenever it is set. */
        token: z.string().min(16).optional(),
        /** Host names the page may be reached by beyond loopback (besides this machine's own name and addresses). */
        allowedHosts: z.array(z.string().min(1)).max(64).default([]),
      })
      .strict()
      .default({ host: '127.0.0.1', port: DEFAULT_PORT, allowedHosts: [] }),
    /** Folder under which each run creates its session folder. */
    data: z.string().default('plumbline-data'),
    /**
     * Publish this station's sessions to an MQTT broker (mqtt://HOST:PORT[/PREFIX]), read from the
     * journal; `station` is its id in topic names (default: host name and data folder name).
     */
    publish: z
      .object({
        url: z.string().min(1),
        station: z
          .string()
          .regex(/^[A-Za-z0-9._-]{1,80}$/, 'use 1–80 letters, digits, ".", "_" or "-"')
          .optional(),
      })
      .strict()
      .optional(),
    /** `serve` starts the default plan as soon as it is up (the demo). */
    autostart: z.boolean().default(false),
  })
  .strict()
  .superRefine((c, ctx) => {
    if (c.instrument.kind !== 'simulator' && c.dialect === undefined) {
      ctx.addIssue({
        code: 'custom',
        path: ['dialect'],
        message:
          'name the dialect your instrument speaks: protection-trip or protection-status (config/dialects/, described in the README under "Connecting a real instrument"), or the path of a .json dialect of your own',
      });
    }
  });

/** The dialect a config uses. */
export function dialectOf(config: StationConfig): string {
  return config.dialect ?? SIMULATOR_DIALECT;
}

export type StationConfig = z.infer<typeof stationSchema>;

export class ConfigError extends Error {
  readonly code = 'BAD_CONFIG';
}

export function parseConfig(raw: unknown, where: string): StationConfig {
  const r = stationSchema.safeParse(raw);
  if (!r.success) throw new ConfigError(zodMessage(r.error, where, raw, stationSchema));
  return r.data;
}

export function loadConfig(file = DEFAULT_CONFIG_FILE): StationConfig {
  let text: string;
  try {
    text = readFileSync(file, 'utf8');
  } catch (e) {
    throw new ConfigError(`${file}: ${fileProblem(file, e)}`);
  }
  let raw: unknown;
  try {
    raw = JSON.parse(text);
  } catch (e) {
    throw new ConfigError(`${file}: not valid JSON: ${(e as Error).message}`);
  }
  return parseConfig(raw, file);
}

/** The data folder as an absolute path (relative ones are taken from the working directory). */
export function dataDir(config: StationConfig, override?: string): string {
  const d = override ?? config.data;
  return isAbsolute(d) ? d : resolve(process.cwd(), d);
}

/** Whether a host name or address is loopback only. */
export function isLoopback(host: string): boolean {
  return host === 'localhost' || host === '::1' || /^127\.\d+\.\d+\.\d+$/.test(host);
}
