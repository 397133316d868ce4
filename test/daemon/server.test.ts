/**
 * The server with real HTTP and real websockets on loopback, the station in this process driving
 * the built-in simulated instrument (so the test can read every command that reached it):
 *  - security: bind rule, control token, foreign Origin on control requests and on websocket
 *    upgrades, Host check, validation errors as 400 naming the field;
 *  - property test (fast-check): random sequences of API commands never put a command beyond the
 *    station's hard limits on the wire.
 */
import fc from 'fast-check';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { parseConfig } from '../../daemon/run/config.js';
import { Station } from '../../daemon/run/station.js';
import { startServer, type RunningServer } from '../../daemon/server/app.js';
import { api, tempDir } from '../helpers/daemon.js';

const TOKEN = 'a-long-station-token-0123456789';
const LIMITS = { maxVoltage: 12, maxCompliance: 2e-3, maxPower: 1.5e-2, rampDelay: 0, rampStep: 2 };

function station(extra: Record<string, unknown> = {}) {
  const config = parseConfig(
    {
      instrument: { kind: 'simulator', scenario: 'oxide-fn', realTime: false, seed: 1 },
      limits: LIMITS,
      drift: { enabled: false },
      ...extra,
    },
    'test config',
  );
  // The property test reads every line its runs sent: keep them all.
  return new Station(config, join(tempDir(), 'data'), { simulatorRecords: 200_000 });
}

describe('security rules', () => {
  let srv: RunningServer;
  beforeAll(async () => {
    srv = await startServer(station(), { host: '127.0.0.1', port: 0, token: TOKEN });
  });
  afterAll(() => srv?.close());

  it('refuses to bind beyond loopback without a token', async () => {
    await expect(startServer(station(), { host: '0.0.0.0', port: 0 })).rejects.toThrow(/server.token/);
  });

  it('control requests need the token; reads do not', async () => {
    const url = srv.url.replace(/\/$/, '');
    expect((await api(url, 'GET', '/api/status')).status).toBe(200);
    const noToken = await api(url, 'POST', '/api/annotations', { text: 'x' });
    expect(noToken.status).toBe(401);
    const wrong = await api(url, 'POST', '/api/annotations', { text: 'x' }, { authorization: `Bearer ${TOKEN.slice(1)}x` });
    expect(wrong.status).toBe(401);
    const ok = await api(url, 'PUT', '/api/analysis', { model: 'poole-frenkel', inputs: { thickness: 2e-8 } }, { authorization: `Bearer ${TOKEN}` });
    expect(ok.status).toBe(200);
  });

  it('a control request from a foreign Origin is refused even with the token', async () => {
    const url = srv.url.replace(/\/$/, '');
    const r = await api(url, 'POST', '/api/run/abort', {}, { authorization: `Bearer ${TOKEN}`, origin: 'http://elsewhere.example' });
    expect(r.status).toBe(403);
    expect(r.json.error).toMatch(/foreign origin/);
  });

  it('bad bodies get 400 naming the field', async () => {
    const url = srv.url.replace(/\/$/, '');
    const auth = { authorization: `Bearer ${TOKEN}` };
    const r1 = await api(url, 'POST', '/api/annotations', { text: 'x', sweep: -2 }, auth);
    expect(r1.status).toBe(400);
    expect(r1.json.error).toMatch(/sweep/);
    const r2 = await api(url, 'PUT', '/api/analysis', { model: 'no-such-model' }, auth);
    expect(r2.status).toBe(400);
    expect(r2.json.error).toMatch(/model/);
    // A misspelt model: the field named and the model meant suggested.
    const r2b = await api(url, 'PUT', '/api/analysis', { model: 'pool-frenkel' }, auth);
    expect(r2b.status).toBe(400);
    expect(r2b.json.error).toMatch(/field 'model': unknown model 'pool-frenkel' \(did you mean 'poole-frenkel'\?\)/);
    const r3 = await fetch(`${url}/api/run`, { method: 'POST', headers: { 'content-type': 'application/json', ...auth }, body: '{"plan": ' });
    expect(r3.status).toBe(400);
    const r4 = await api(url, 'POST', '/api/run', { plan: { start: 0, stop: 5, compliance: 1e-3 } }, auth);
    expect(r4.status).toBe(400);
    expect(r4.json.error).toMatch(/field 'points'/);
  });

  it('websocket: foreign Origin refused, same origin with token accepted, without token refused', async () => {
    const url = srv.url.replace(/\/$/, '');
    const { WebSocket } = await import('ws');
    const foreign = new WebSocket(`${url.replace('http', 'ws')}/ws?token=${TOKEN}`, { origin: 'http://elsewhere.example' });
    await expect(
      new Promise((res, rej) => {
        foreign.once('open', res);
        foreign.once('unexpected-response', (_q, r) => rej(new Error(String(r.statusCode))));
      }),
    ).rejects.toThrow('403');
    const noToken = new WebSocket(`${url.replace('http', 'ws')}/ws`, { origin: url });
    await expect(
      new Promise((res, rej) => {
        noToken.once('open', res);
        noToken.once('unexpected-response', (_q, r) => rej(new Error(String(r.statusCode))));
      }),
    ).rejects.toThrow('401');
    const good = new WebSocket(`${url.replace('http', 'ws')}/ws?token=${TOKEN}`, { origin: url });
    const first = await new Promise<string>((res, rej) => {
      good.once('message', (d) => res(String(d)));
      good.once('unexpected-response', (_q, r) => rej(new Error(String(r.statusCode))));
    });
    expect(JSON.parse(first).kind).toBe('snapshot');
    good.terminate();
  });

  it('a request naming another Host (DNS rebinding) is refused', async () => {
    const { request } = await import('node:http');
    const status = await new Promise<number>((resolve) => {
      const req = request({ host: '127.0.0.1', port: srv.port, path: '/api/status', headers: { host: 'attacker.example' } }, (res) => {
        res.resume();
        resolve(res.statusCode ?? 0);
      });
      req.end();
    });
    expect(status).toBe(403);
  });
});

describe('request bodies', () => {
  let srv: RunningServer;
  let st: Station;
  beforeAll(async () => {
    st = station();
    srv = await startServer(st, { host: '127.0.0.1', port: 0 });
  });
  afterAll(() => srv?.close());

  it('a run request whose body is not JSON gets 415 and starts nothing', async () => {
    const url = srv.url.replace(/\/$/, '');
    const asText = await fetch(`${url}/api/run`, { method: 'POST', headers: { 'content-type': 'text/plain' }, body: '{"plan":{}}' });
    expect(asText.status).toBe(415);
    expect((await asText.json()).error).toMatch(/must be JSON/);
    const asForm = await fetch(`${url}/api/run`, { method: 'POST', headers: { 'content-type': 'application/x-www-form-urlencoded' }, body: 'plan=x' });
    expect(asForm.status).toBe(415);
    expect(st.running).toBe(false);
    expect(st.simulator?.log ?? []).toEqual([]);
  });

  it('a JSON body in a charset the server does not read gets 415 naming the charset, not 500', async () => {
    const url = srv.url.replace(/\/$/, '');
    const r = await fetch(`${url}/api/annotations`, { method: 'POST', headers: { 'content-type': 'application/json; charset=latin1' }, body: '{"text":"x"}' });
    expect(r.status).toBe(415);
    expect((await r.json()).error).toMatch(/unsupported charset "LATIN1".*UTF-8/);
  });
});

describe('beyond loopback', () => {
  let srv: RunningServer;
  beforeAll(async () => {
    srv = await startServer(station(), { host: '0.0.0.0', port: 0, token: TOKEN, allowedHosts: ['probe-station-7.lab.example'] });
  });
  afterAll(() => srv?.close());

  const get = async (path: string, headers: Record<string, string> = {}) => {
    const { request } = await import('node:http');
    return new Promise<{ status: number; cookie?: string[]; body: string }>((resolve, reject) => {
      const req = request({ host: '127.0.0.1', port: srv.port, path, headers: { host: `127.0.0.1:${srv.port}`, ...headers } }, (res) => {
        let body = '';
        res.on('data', (d) => (body += String(d)));
        res.on('end', () => resolve({ status: res.statusCode ?? 0, cookie: res.headers['set-cookie'], body }));
      });
      req.on('error', reject);
      req.end();
    });
  };

  it('every read needs the token: status, sessions, readings and the page itself', async () => {
    for (const path of ['/api/status', '/api/sessions', '/api/sessions/x/readings', '/']) {
      const r = await get(path);
      expect(r.status, path).toBe(401);
    }
    expect((await get('/api/status', { authorization: `Bearer ${TOKEN}` })).status).toBe(200);
  });

  it('the token in the page address sets an HttpOnly same-site cookie that carries it afterwards', async () => {
    const first = await get(`/api/status?token=${TOKEN}`);
    expect(first.status).toBe(200);
    const cookie = (first.cookie ?? [])[0] ?? '';
    expect(cookie).toMatch(/HttpOnly/);
    expect(cookie).toMatch(/SameSite=Strict/);
    const again = await get('/api/sessions', { cookie: cookie.split(';')[0] });
    expect(again.status).toBe(200);
    expect((await get('/api/sessions', { cookie: 'plumbline_token=wrong-token-0123456789' })).status).toBe(401);
  });

  it('the Host check holds there: another name is refused even with the token; allowed names pass', async () => {
    const auth = { authorization: `Bearer ${TOKEN}` };
    expect((await get('/api/status', { ...auth, host: 'attacker.example' })).status).toBe(403);
    expect((await get('/api/status', { ...auth, host: `attacker.example:${srv.port}` })).status).toBe(403);
    expect((await get('/api/status', { ...auth, host: `probe-station-7.lab.example:${srv.port}` })).status).toBe(200);
    expect((await get('/api/status', { ...auth, host: `127.0.0.1:${srv.port + 1}` })).status).toBe(403);
  });
});

describe('hard limits on the wire (property test)', () => {
  it('random API commands never put a voltage, compliance or power beyond the limits on the wire', async () => {
    const st = station();
    const srv = await startServer(st, { host: '127.0.0.1', port: 0 });
    const url = srv.url.replace(/\/$/, '');
    const plan = fc.record({
      kind: fc.constantFrom('linear', 'log', 'list'),
      start: fc.double({ min: -40, max: 40, noNaN: true }),
      stop: fc.double({ min: -40, max: 40, noNaN: true }),
      points: fc.integer({ min: 2, max: 6 }),
      values: fc.array(fc.double({ min: -40, max: 40, noNaN: true }), { minLength: 1, maxLength: 5 }),
      dual: fc.boolean(),
      repeat: fc.integer({ min: 1, max: 2 }),
      compliance: fc.double({ min: 1e-6, max: 1e-1, noNaN: true }),
    });
    const command = fc.oneof(
      plan.map((p) => ({ method: 'POST', path: '/api/run', body: { plan: p } as unknown })),
      fc.constant({ method: 'POST', path: '/api/run', body: {} as unknown }),
      fc.constant({ method: 'POST', path: '/api/run/stop', body: {} as unknown }),
      fc.constant({ method: 'POST', path: '/api/run/abort', body: {} as unknown }),
      fc.jsonValue().map((j) => ({ method: 'POST', path: '/api/run', body: { plan: j } as unknown })),
      fc
        .constantFrom('ohmic', 'fowler-nordheim', 'schottky')
        .map((m) => ({ method: 'PUT', path: '/api/analysis', body: { model: m, inputs: { thickness: 1e-8 } } as unknown })),
    );
    try {
      await fc.assert(
        fc.asyncProperty(fc.array(command, { minLength: 1, maxLength: 6 }), async (cmds) => {
          for (const c of cmds) {
            const t0 = Date.now();
            const r = await api(url, c.method, c.path, c.body).catch((e: Error) => {
              throw new Error(
                `${c.method} ${c.path} ${JSON.stringify(c.body).slice(0, 200)} failed after ${Date.now() - t0} ms: ${e.message}; running=${st.running}`,
              );
            });
            if (Date.now() - t0 > 3000) console.error(`slow: ${c.method} ${c.path} ${JSON.stringify(c.body).slice(0, 200)} took ${Date.now() - t0} ms`);
            expect(r.status, JSON.stringify(r.json)).toBeLessThan(500);
            await new Promise((res) => setTimeout(res, 5));
          }
          // Let a run in progress finish or abort it, then read the wire.
          if (st.running) st.abort('property test: end of sequence');
          for (let k = 0; k < 1000 && st.running; k++) await new Promise((res) => setTimeout(res, 10));
          expect(st.running, 'the run did not end within 10 s of the abort').toBe(false);
          const smu = st.simulator;
          if (!smu) return;
          // The simulator executes what reached it asynchronously: let it finish the queued commands.
          for (let k = 0; k < 500 && smu.output; k++) await new Promise((res) => setTimeout(res, 10));
          let compliance = 1e-3; // the simulator's reset value; a run always sets its own before output on
          let on = false;
          for (const line of smu.log) {
            const m = /^:SOUR:VOLT (\S+)$/.exec(line);
            const c = /^:SENS:CURR:PROT (\S+)$/.exec(line);
            if (c) {
              compliance = Number(c[1]);
              expect(compliance).toBeLessThanOrEqual(LIMITS.maxCompliance);
            }
            if (line === ':OUTP ON') on = true;
            if (line === ':OUTP OFF') on = false;
            if (m) {
              const v = Number(m[1]);
              expect(Math.abs(v)).toBeLessThanOrEqual(LIMITS.maxVoltage);
              if (on) expect(Math.abs(v) * compliance).toBeLessThanOrEqual(LIMITS.maxPower * (1 + 1e-9));
            }
          }
          expect(smu.output, 'the output was still on 5 s after the run ended').toBe(false);
        }),
        { numRuns: 25, seed: 20261202, endOnFailure: true },
      );
      // The sequences did reach the instrument (the property is not vacuous).
      const sourced = (st.simulator?.log ?? []).filter((l) => /^:SOUR:VOLT /.test(l) && Number(l.split(' ')[1]) !== 0);
      expect(sourced.length).toBeGreaterThan(20);
    } finally {
      if (st.running) st.abort('test end');
      await srv.close();
    }
  }, 120_000);
});
