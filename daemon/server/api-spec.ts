/**
 * The REST API described once: every route with its request body and its responses as zod schemas.
 * The server validates request bodies with these schemas, and the OpenAPI 3.1 document served at
 * GET /api/openapi.json is generated from them, so the description cannot drift from what the
 * server does (a test calls every route and checks each response against the document).
 *
 * Quantities are SI (V, A, s, m, m²; energies in eV), as in the journal and every JSON output.
 */
import { z } from 'zod';
import { MAX_REANALYSIS_SWEEPS } from '../journal/reanalysis.js';
import { analysisSchema } from '../pipeline/settings.js';
import { planJsonSchema } from '../run/config-schema.js';

// ---- request bodies -------------------------------------------------------------------------

export const annotationBody = z
  .object({
    text: z.string().min(1).max(10000).describe('The note (free text).'),
    tags: z.array(z.string().min(1).max(64)).max(32).optional(),
    sweep: z.number().int().positive().optional().describe('The sweep the note is about (default: the whole session).'),
    session: z
      .string()
      .regex(/^[A-Za-z0-9-]+$/)
      .optional()
      .describe('A session id (default: the running session, else the newest).'),
    device: z.unknown().optional().describe('Corrections to the device identity (wafer, site, x, y, area m², thickness m, temperature K, tags).'),
  })
  .strict();

export const runBody = z
  .object({
    // Checked by the station's own plan parser (its errors name the field); described below by the plan schemas.
    plan: z.unknown().optional(),
    analysis: z.unknown().optional().describe('Analysis settings for the live fit: {model, window, inputs}.'),
    label: z.string().max(40).optional().describe('Part of the session id.'),
    device: z.unknown().optional().describe('The device under test: {device, wafer, site, x, y, area, thickness, temperature, tags} (SI).'),
    acknowledgeDestructive: z
      .boolean()
      .optional()
      .describe(
        'Must be true for a breakdown test (voltage-ramp, current-ramp, constant-voltage): it destroys the device at high field. Without it such a plan is refused (400) before anything is sent to the instrument.',
      ),
  })
  .strict();

export const reasonBody = z.object({ reason: z.string().max(500).optional() }).strict();

export const reanalysisBody = z
  .object({
    analysis: z.unknown().describe("Analysis settings {model, window, inputs} to fit the sweeps with; the journal's own fits are not touched."),
    sweeps: z.array(z.number().int().positive()).max(MAX_REANALYSIS_SWEEPS).describe('The sweeps to fit again.'),
    views: z.array(z.number().int().positive()).max(5).optional().describe('Sweeps whose linearized view to return as well.'),
  })
  .strict();

// ---- responses ------------------------------------------------------------------------------

const errorReply = z.object({ error: z.string().describe('What went wrong, naming the field or setting.'), setting: z.string().optional() });
const ok = z.object({ ok: z.literal(true) });
/** A journal event (protocols/wire.ts): every event has these; the rest depends on `type`. */
const event = z.looseObject({ type: z.string(), seq: z.number().int(), t: z.number() });
const statusReply = z.looseObject({
  running: z.boolean(),
  session: z.string().nullable(),
  analysis: z.looseObject({ model: z.string() }),
  limits: z.looseObject({ maxVoltage: z.number(), maxCompliance: z.number(), maxPower: z.number() }),
  instrument: z.string(),
  scenario: z.string().nullable(),
  control: z.boolean().describe('False while the station watches a passive source.'),
  lastRun: z.object({ session: z.string(), outcome: z.string(), reason: z.string(), outputOffConfirmed: z.boolean() }).nullable(),
  recovered: z.array(
    z.object({
      dir: z.string(),
      message: z.string(),
      outputMayBeOn: z.boolean().describe('The run had the output on when its daemon stopped, and nothing turned it off: check the instrument.'),
    }),
  ),
  models: z.array(
    z.looseObject({
      id: z.string(),
      title: z.string(),
      parameters: z
        .array(z.string())
        .describe(
          "The parameters its fit gives with the station's analysis inputs (empty when that cannot be told): what an adaptive sweep's target is checked against.",
        ),
    }),
  ),
  plan: z.looseObject({ kind: z.string() }).nullable().describe("The station's default plan (what the page's forms start from)."),
  planDefaults: z
    .record(z.string(), z.record(z.string(), z.unknown()))
    .describe(
      'Per plan kind (linear, log, adaptive, voltage-ramp, current-ramp, constant-voltage): the values the station fills in for fields a plan leaves out (SI).',
    ),
});
const sessionsReply = z.object({ sessions: z.array(z.string()).describe('Session ids, newest first.') });
const sessionReply = z.object({
  id: z.string(),
  readings: z.number().int(),
  events: z.array(event).describe('Every event but the readings, in sequence order.'),
  damagedLines: z.array(z.looseObject({ line: z.number().int(), problem: z.string() })),
});
const readingsReply = z.object({
  fields: z.array(z.string()).describe('seq, sweep, k, t (ms), v (V), i (A), flags (1 compliance, 2 current over range, 4 voltage over range).'),
  rows: z.array(z.array(z.number().nullable())),
});
const viewReply = z.looseObject({ sweep: z.number().int(), view: z.looseObject({ model: z.string() }).nullable() });
const exportReply = z.object({ files: z.array(z.string()), readings: z.number().int(), sweeps: z.number().int() });
const runReply = z.object({ session: z.string(), plan: z.looseObject({ kind: z.string() }) });
const lotReply = z.looseObject({ rows: z.array(z.unknown()) });
const sweepFit = z.looseObject({ sweep: z.number().int(), fit: z.looseObject({ model: z.string() }).nullable(), error: z.string().nullable() });
const overviewReply = z.looseObject({
  id: z.string(),
  readings: z.number().int(),
  lastSeq: z.number().int(),
  events: z.array(event),
  sweeps: z.unknown().describe("Every sweep's summary (points, completeness, label)."),
  fits: z.array(sweepFit),
  recent: z.array(z.array(z.number().nullable())).describe("The last sweeps' readings, packed as seq, sweep, k, t, v, i, flags."),
  envelope: z.unknown().describe("Every reading's range over the session, decimated for the overview chart."),
  damagedLines: z.number().int(),
});
const sweepDetailReply = z.looseObject({
  sweep: z.number().int(),
  readings: z.array(z.array(z.number().nullable())),
  complete: z.boolean().nullable(),
  fit: z.looseObject({ model: z.string() }).nullable(),
  error: z.string().nullable(),
  view: z.looseObject({ model: z.string() }).nullable(),
});
const reanalysisReply = z.looseObject({ session: z.string(), at: z.string(), analysis: z.looseObject({ model: z.string() }), fits: z.array(sweepFit) });

type Responses = Record<number, { description: string; schema?: z.ZodType; html?: boolean }>;

export interface RouteSpec {
  readonly method: 'get' | 'post' | 'put';
  /** Express form (:id). */
  readonly path: string;
  readonly summary: string;
  readonly body?: z.ZodType;
  readonly query?: Record<string, string>;
  readonly responses: Responses;
  /** A control request: needs the token when one is set, refused from a foreign Origin. */
  readonly control?: boolean;
}

const E = (description: string) => ({ description, schema: errorReply });

export const ROUTES: readonly RouteSpec[] = [
  {
    method: 'get',
    path: '/api/openapi.json',
    summary: 'This document.',
    responses: { 200: { description: 'The OpenAPI 3.1 document.', schema: z.looseObject({ openapi: z.string() }) } },
  },
  {
    method: 'get',
    path: '/api/status',
    summary: 'The station: running or not, its session, analysis, limits, instrument, how the last run ended, recoveries, models.',
    responses: { 200: { description: 'Status.', schema: statusReply } },
  },
  {
    method: 'get',
    path: '/api/sessions',
    summary: 'The session ids in the data folder.',
    responses: { 200: { description: 'Sessions.', schema: sessionsReply } },
  },
  {
    method: 'get',
    path: '/api/sessions/:id',
    summary: "One session's events (every journal event but the readings) and its reading count.",
    responses: { 200: { description: 'The session.', schema: sessionReply }, 404: E('No such session.') },
  },
  {
    method: 'get',
    path: '/api/sessions/:id/readings',
    summary: "A session's readings, packed as rows.",
    query: { sweep: 'Only this sweep (integer).' },
    responses: { 200: { description: 'Readings.', schema: readingsReply }, 400: E('A bad query.'), 404: E('No such session.') },
  },
  {
    method: 'get',
    path: '/api/sessions/:id/overview',
    summary:
      "What a page needs to open a session of any length: its events, every sweep's summary and fit, the last sweeps' readings, an envelope of all of them.",
    query: { last: 'How many of the last sweeps to include in full (1–200).' },
    responses: { 200: { description: 'The overview.', schema: overviewReply }, 400: E('A bad query.'), 404: E('No such session.') },
  },
  {
    method: 'get',
    path: '/api/sessions/:id/sweeps/:sweep',
    summary: 'One sweep: its readings, fit and linearized view.',
    responses: { 200: { description: 'The sweep.', schema: sweepDetailReply }, 400: E('A bad sweep number.'), 404: E('No such session or sweep.') },
  },
  {
    method: 'post',
    path: '/api/sessions/:id/reanalyze',
    control: true,
    body: reanalysisBody,
    summary:
      'Fit sweeps of a session again with other analysis settings; the results are kept beside the journal (reanalysis.jsonl), the recorded fits untouched.',
    responses: { 200: { description: 'The new fits (and views).', schema: reanalysisReply }, 400: E('Bad settings or body.'), 404: E('No such session.') },
  },
  {
    method: 'get',
    path: '/api/sessions/:id/sweeps/:sweep/view',
    summary: "The linearized view of one sweep (the points on the model's straight-line plot, the fit, the window, the regimes).",
    query: { model: "Another model than the session's (automatic window)." },
    responses: { 200: { description: 'The view.', schema: viewReply }, 400: E('A bad sweep number or model.'), 404: E('No such session or sweep.') },
  },
  {
    method: 'post',
    path: '/api/sessions/:id/export',
    control: true,
    summary: "Write points.csv, sweeps.csv and session.json in the session folder's export/.",
    responses: { 200: { description: 'What was written.', schema: exportReply }, 404: E('No such session.') },
  },
  {
    method: 'post',
    path: '/api/run',
    control: true,
    body: runBody,
    summary: "Start a run (one per instrument): the plan is checked against the station's limits and the free disk before anything is sent.",
    responses: {
      201: { description: 'The run started.', schema: runReply },
      400: E("A bad plan, a limit it breaks, a breakdown test without 'acknowledgeDestructive': true, or a bad body."),
      409: E('A run is already in progress.'),
      415: E('The body is not JSON.'),
      502: E('The instrument cannot be reached or does not answer.'),
      507: E('No space for the session folder.'),
    },
  },
  {
    method: 'post',
    path: '/api/run/stop',
    control: true,
    body: reasonBody,
    summary: 'Stop after the sweep in progress (ramp down, output off).',
    responses: { 200: { description: 'Stopping.', schema: ok }, 409: E('No run in progress, or a passive source.') },
  },
  {
    method: 'post',
    path: '/api/run/abort',
    control: true,
    body: reasonBody,
    summary: 'Abort now: output off at once, ahead of everything queued.',
    responses: { 200: { description: 'Aborting.', schema: ok }, 409: E('No run in progress, or a passive source.') },
  },
  {
    method: 'get',
    path: '/api/analysis',
    summary: 'The analysis settings of the live fit.',
    responses: { 200: { description: 'Settings.', schema: analysisSchema } },
  },
  {
    method: 'put',
    path: '/api/analysis',
    control: true,
    body: analysisSchema,
    summary: 'Change the analysis settings (the running sweep is fitted again).',
    responses: { 200: { description: 'The settings now in force.', schema: analysisSchema }, 400: E('Bad settings, naming the field.') },
  },
  {
    method: 'post',
    path: '/api/annotations',
    control: true,
    body: annotationBody,
    summary: 'Add a note (and device corrections) to a session or one of its sweeps.',
    responses: { 201: { description: 'The annotation event as journaled.', schema: event }, 400: E('A bad body.'), 404: E('No such session.') },
  },
  {
    method: 'get',
    path: '/api/lot',
    summary: 'Every device of the data folder: parameters, results, Weibull analysis, outliers.',
    query: { map: 'Parameter for the wafer map.', quantity: 'Quantity for the Weibull analysis.' },
    responses: { 200: { description: 'The lot.', schema: lotReply } },
  },
  {
    method: 'get',
    path: '/lot',
    summary: 'The lot report as a page.',
    query: { map: 'Parameter for the wafer map.', quantity: 'Quantity for the Weibull analysis.' },
    responses: { 200: { description: 'HTML.', html: true } },
  },
];

/** A request body's schema; a run request's plan is described by every plan kind's own schema. */
function bodySchema(body: z.ZodType): Record<string, unknown> {
  const doc = jsonSchema(body) as { properties?: Record<string, unknown> };
  if (body === runBody && doc.properties) {
    doc.properties.plan = planJsonSchema(
      "A plan: a sweep (linear, log, list), an adaptive sweep, or a breakdown test (voltage-ramp, current-ramp, constant-voltage); default: the station's plan.",
    );
  }
  return doc as Record<string, unknown>;
}

const jsonSchema = (s: z.ZodType) => {
  const { $schema: _drop, ...rest } = z.toJSONSchema(s, { unrepresentable: 'any', io: 'output', target: 'draft-2020-12' }) as Record<string, unknown>;
  return rest;
};

/** The OpenAPI 3.1 document of the API. */
export function openApiDocument(version: string): Record<string, unknown> {
  const paths: Record<string, Record<string, unknown>> = {};
  for (const r of ROUTES) {
    const p = r.path.replace(/:(\w+)/g, '{$1}');
    const params = [
      ...[...r.path.matchAll(/:(\w+)/g)].map((m) => ({ name: m[1], in: 'path', required: true, schema: { type: 'string' } })),
      ...Object.entries(r.query ?? {}).map(([name, description]) => ({ name, in: 'query', required: false, description, schema: { type: 'string' } })),
    ];
    const responses: Record<string, unknown> = {};
    for (const [status, resp] of Object.entries(r.responses)) {
      responses[status] = {
        description: resp.description,
        content: resp.html
          ? { 'text/html': { schema: { type: 'string' } } }
          : resp.schema
            ? { 'application/json': { schema: jsonSchema(resp.schema) } }
            : undefined,
      };
    }
    (paths[p] ??= {})[r.method] = {
      summary: r.summary,
      ...(params.length ? { parameters: params } : {}),
      ...(r.body ? { requestBody: { required: false, content: { 'application/json': { schema: bodySchema(r.body) } } } } : {}),
      ...(r.control ? { security: [{}, { token: [] }] } : {}),
      responses,
    };
  }
  return {
    openapi: '3.1.0',
    info: {
      title: 'plumbline station API',
      version,
      description:
        'The REST API of a plumbline station daemon. On loopback, control requests (POST, PUT) need the station token when one is set; beyond loopback every request needs it. Requests from a foreign Origin and for another Host are refused. Bodies are JSON. Quantities are SI (energies in eV). Live events stream over the websocket at /ws (protocols/wire.ts).',
    },
    paths,
    components: { securitySchemes: { token: { type: 'http', scheme: 'bearer', description: 'The station token (server.token in the station config).' } } },
  };
}
