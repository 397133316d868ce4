/**
 * The REST API against its own OpenAPI 3.1 document (GET /api/openapi.json): every route the
 * server registers is documented and every documented route exists; then every route is called —
 * successes and the documented failures — and each response's status is one the document lists and
 * its body validates against the document's schema, with Ajv (a general-purpose JSON Schema
 * draft 2020-12 validator, the dialect OpenAPI 3.1 uses).
 */
import { join } from 'node:path';
import { Ajv2020 } from 'ajv/dist/2020.js';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { parseConfig } from '../../daemon/run/config.js';
import { Station } from '../../daemon/run/station.js';
import { startServer, type RunningServer } from '../../daemon/server/app.js';
import { tempDir } from '../helpers/daemon.js';

let srv: RunningServer;
let url: string;
let doc: { paths: Record<string, Record<string, { responses: Record<string, { content?: Record<string, { schema: object }> }> }>> };
const ajv = new Ajv2020({ strict: false, allErrors: true });
const checked = new Set<string>();

beforeAll(async () => {
  const config = parseConfig(
    {
      instrument: { kind: 'simulator', scenario: 'oxide-fn', realTime: false, seed: 1 },
      limits: { maxVoltage: 12, maxCompliance: 2e-3, maxPower: 1.5e-2, rampDelay: 0, rampStep: 2 },
      drift: { enabled: false },
    },
    'test config',
  );
  srv = await startServer(new Station(config, join(tempDir(), 'data')), { host: '127.0.0.1', port: 0 });
  url = srv.url.replace(/\/$/, '');
  doc = await (await fetch(`${url}/api/openapi.json`)).json();
});
afterAll(() => srv?.close());

/** Calls a route and checks the reply against the document; returns the JSON (or text). */
async function call(
  method: string,
  path: string,
  template: string,
  body?: unknown,
  headers: Record<string, string> = {},
): Promise<{ status: number; json: any }> {
  const r = await fetch(url + path, {
    method,
    headers: { ...(body !== undefined ? { 'content-type': 'application/json' } : {}), ...headers },
    body: body === undefined ? undefined : typeof body === 'string' ? body : JSON.stringify(body),
    signal: AbortSignal.timeout(15_000),
  });
  const op = doc.paths[template]?.[method.toLowerCase()];
  expect(op, `${method} ${template} is not in the document`).toBeDefined();
  const resp = op.responses[String(r.status)];
  const text = await r.text();
  expect(resp, `${method} ${path} answered ${r.status}, which the document does not list: ${text.slice(0, 200)}`).toBeDefined();
  const content = resp.content ?? {};
  let json: any = text;
  if (content['application/json']) {
    json = JSON.parse(text);
    const validate = ajv.compile(content['application/json'].schema);
    expect(validate(json), `${method} ${path} ${r.status}: ${JSON.stringify(validate.errors)}`).toBe(true);
  } else {
    expect(content['text/html'], `${method} ${path}: an HTML reply the document does not describe`).toBeDefined();
    expect(r.headers.get('content-type')).toMatch(/text\/html/);
  }
  checked.add(`${method.toLowerCase()} ${template}`);
  return { status: r.status, json };
}

describe('the OpenAPI document', () => {
  it('lists exactly the routes the server has', () => {
    const app = srv.server.listeners('request')[0] as unknown as { router: { stack: { route?: { path: string; methods: Record<string, boolean> } }[] } };
    const routes = new Set<string>();
    for (const layer of app.router.stack) {
      if (!layer.route) continue;
      for (const m of Object.keys(layer.route.methods)) routes.add(`${m} ${layer.route.path.replace(/:(\w+)/g, '{$1}')}`);
    }
    const documented = new Set(Object.entries(doc.paths).flatMap(([p, ops]) => Object.keys(ops).map((m) => `${m} ${p}`)));
    routes.delete('get /'); // the page's own files (express.static), not the API
    expect(
      [...routes].filter((r) => !documented.has(r)),
      'routes missing from daemon/server/api-spec.ts',
    ).toEqual([]);
    expect(
      [...documented].filter((r) => !routes.has(r)),
      'documented routes the server does not have',
    ).toEqual([]);
  });

  it("a run request's plan is described by the plan kinds' own schemas: a good plan of each kind validates, a plan with an unknown field does not", () => {
    const body = (doc.paths['/api/run'].post as unknown as { requestBody: { content: Record<string, { schema: object }> } }).requestBody.content[
      'application/json'
    ].schema;
    const validate = ajv.compile(body);
    const plans = [
      { start: 0, stop: 5, points: 6, compliance: 1e-3 },
      { kind: 'adaptive', stop: 10, maxPoints: 50, compliance: 1e-3, target: { parameter: 'barrierHeight', stdErr: 0.01 } },
      { kind: 'voltage-ramp', stop: 10, step: 0.1, stepTime: 0.1, compliance: 1e-3 },
      { kind: 'current-ramp', start: 1e-9, stop: 1e-3, stepTime: 0.1, voltageLimit: 10 },
      { kind: 'constant-voltage', stress: 5, duration: 60, sampleEvery: 1, compliance: 1e-3 },
    ];
    for (const plan of plans) expect(validate({ plan }), `${JSON.stringify(plan)}: ${JSON.stringify(validate.errors)}`).toBe(true);
    expect(validate({ plan: { kind: 'voltage-ramp', stop: 10, step: 0.1, stepTime: 0.1, compliance: 1e-3, volts: 3 } })).toBe(false);
  });

  it('every route answers as documented, in success and failure', async () => {
    await call('GET', '/api/openapi.json', '/api/openapi.json');
    await call('GET', '/api/status', '/api/status');
    expect((await call('GET', '/api/sessions', '/api/sessions')).json.sessions).toEqual([]);
    await call('GET', '/api/lot', '/api/lot');
    await call('GET', '/lot', '/lot');
    expect((await call('POST', '/api/run/stop', '/api/run/stop', {})).status).toBe(409);
    expect((await call('POST', '/api/run/abort', '/api/run/abort', {})).status).toBe(409);
    expect((await call('POST', '/api/run', '/api/run', { plan: { start: 0, stop: 5, points: 6, compliance: 1 } })).status).toBe(400);
    expect((await call('POST', '/api/run', '/api/run', 'plan=x', { 'content-type': 'text/plain' })).status).toBe(415);
    const run = await call('POST', '/api/run', '/api/run', { plan: { start: 0, stop: 9, points: 10, compliance: 1e-3, repeat: 2 } });
    expect(run.status).toBe(201);
    expect((await call('POST', '/api/run', '/api/run', {})).status).toBe(409);
    for (let k = 0; k < 500; k++) {
      if (!(await (await fetch(`${url}/api/status`)).json()).running) break;
      await new Promise((r) => setTimeout(r, 20));
    }
    const id = run.json.session as string;
    expect((await call('GET', `/api/sessions/${id}`, '/api/sessions/{id}')).json.readings).toBe(20);
    expect((await call('GET', '/api/sessions/nope', '/api/sessions/{id}')).status).toBe(404);
    expect((await call('GET', `/api/sessions/${id}/readings?sweep=2`, '/api/sessions/{id}/readings')).json.rows).toHaveLength(10);
    expect((await call('GET', `/api/sessions/${id}/readings?sweep=x`, '/api/sessions/{id}/readings')).status).toBe(400);
    await call('GET', `/api/sessions/${id}/sweeps/1/view`, '/api/sessions/{id}/sweeps/{sweep}/view');
    expect((await call('GET', `/api/sessions/${id}/overview`, '/api/sessions/{id}/overview')).json.readings).toBe(20);
    expect((await call('GET', `/api/sessions/${id}/overview?last=0`, '/api/sessions/{id}/overview')).status).toBe(400);
    expect((await call('GET', `/api/sessions/${id}/sweeps/2`, '/api/sessions/{id}/sweeps/{sweep}')).json.readings).toHaveLength(10);
    expect((await call('GET', `/api/sessions/${id}/sweeps/9`, '/api/sessions/{id}/sweeps/{sweep}')).status).toBe(404);
    const re = await call('POST', `/api/sessions/${id}/reanalyze`, '/api/sessions/{id}/reanalyze', {
      analysis: { model: 'ohmic', window: 'auto' },
      sweeps: [1, 2],
    });
    expect(re.json.fits.map((f: { sweep: number }) => f.sweep)).toEqual([1, 2]);
    expect((await call('POST', `/api/sessions/${id}/reanalyze`, '/api/sessions/{id}/reanalyze', { analysis: { model: 'no-such' }, sweeps: [1] })).status).toBe(
      400,
    );
    expect((await call('GET', `/api/sessions/${id}/sweeps/0/view`, '/api/sessions/{id}/sweeps/{sweep}/view')).status).toBe(400);
    expect((await call('POST', `/api/sessions/${id}/export`, '/api/sessions/{id}/export', {})).json.readings).toBe(20);
    await call('GET', '/api/analysis', '/api/analysis');
    await call('PUT', '/api/analysis', '/api/analysis', { model: 'fowler-nordheim', window: 'auto', inputs: { thickness: 7e-9, area: 1e-8 } });
    expect((await call('PUT', '/api/analysis', '/api/analysis', { model: 'no-such' })).status).toBe(400);
    expect((await call('POST', '/api/annotations', '/api/annotations', { text: 'looked fine', session: id })).status).toBe(201);
    expect((await call('POST', '/api/annotations', '/api/annotations', { text: '' })).status).toBe(400);
    expect((await call('GET', '/api/sessions', '/api/sessions')).json.sessions).toEqual([id]);
    // Every documented route was called.
    const documented = Object.entries(doc.paths).flatMap(([p, ops]) => Object.keys(ops).map((m) => `${m} ${p}`));
    expect(documented.filter((r) => !checked.has(r))).toEqual([]);
  });
});
