/**
 * The HTTP side of the daemon: the built page (static files), the REST API and the websocket
 * upgrade, behind these rules:
 *  - it listens on 127.0.0.1 unless told otherwise, and binding beyond loopback needs a token;
 *  - beyond loopback every request — reads, the page, the websocket — needs the token (a header,
 *    the `token` query parameter once, after which an HttpOnly same-site cookie carries it);
 *  - on loopback, control requests (anything but GET/HEAD) need the token when one is set;
 *  - control requests and websocket upgrades from a foreign Origin (another web site in the same
 *    browser) are refused;
 *  - the Host header must name this server (loopback names on loopback; beyond it this machine's
 *    own name and addresses or `server.allowedHosts`), so a DNS-rebinding page cannot reach it;
 *  - request bodies must be JSON (415 otherwise) and are validated with zod (400 naming the field).
 */
import { timingSafeEqual } from 'node:crypto';
import { existsSync, readFileSync } from 'node:fs';
import { createServer, type IncomingMessage, type Server } from 'node:http';
import type { AddressInfo } from 'node:net';
import { hostname, networkInterfaces } from 'node:os';
import { join } from 'node:path';
import express, { type NextFunction, type Request, type Response } from 'express';
import type { z } from 'zod';
import { projectRoot } from '../../protocols/project-root.js';
import { parameterNames } from '../analysis/analyze.js';
import { MECHANISMS } from '../analysis/mechanisms/index.js';
import { exportSession } from '../journal/export.js';
import { FolderLot } from '../journal/lot.js';
import { analyzeLot, renderLot } from '../journal/lot-report.js';
import { listSessions, scanJournal } from '../journal/reader.js';
import { OVERVIEW_SWEEPS, reanalyze, sessionOverview, sweepDetail, sweepViewWith } from '../journal/reanalysis.js';
import { zodMessage } from '../pipeline/settings.js';
import { isLoopback } from '../run/config.js';
import { GuardError } from '../run/guard.js';
import { PlanError } from '../run/plan.js';
import { StationError, type Station } from '../run/station.js';
import { annotationBody, openApiDocument, reanalysisBody, reasonBody, runBody } from './api-spec.js';
import { Hub } from './hub.js';
import { planDefaults } from './plan-defaults.js';

export const WEB_DIR = join(projectRoot(), 'dist', 'web');

function packageVersion(): string {
  try {
    return (JSON.parse(readFileSync(join(projectRoot(), 'package.json'), 'utf8')) as { version: string }).version;
  } catch {
    return 'unknown';
  }
}

export interface ServerOptions {
  readonly host: string;
  readonly port: number;
  readonly token?: string;
  /** Folder with the built page (default dist/web). */
  readonly webDir?: string;
  /** Extra host names the server may be reached by beyond loopback. */
  readonly allowedHosts?: readonly string[];
}

const TOKEN_COOKIE = 'plumbline_token';

export class ServerConfigError extends Error {
  readonly code = 'BAD_CONFIG';
}

export function tokenMatches(given: string | undefined, token: string): boolean {
  if (given === undefined) return false;
  const a = Buffer.from(given);
  const b = Buffer.from(token);
  return a.length === b.length && timingSafeEqual(a, b);
}

/** Whether the Origin header (if any) is this server itself. */
export function sameOrigin(req: IncomingMessage): boolean {
  const origin = req.headers.origin;
  if (origin === undefined) return true; // not a browser page (curl, scripts, the CLI)
  try {
    return new URL(origin).host === req.headers.host;
  } catch {
    return false;
  }
}

/** The names and addresses this machine answers to (for the Host check beyond loopback). */
export function ownNames(host: string, extra: readonly string[]): Set<string> {
  const names = new Set<string>(['localhost', '127.0.0.1', '::1', hostname().toLowerCase(), `${hostname().toLowerCase()}.local`]);
  if (host !== '0.0.0.0' && host !== '::') names.add(host.toLowerCase());
  for (const list of Object.values(networkInterfaces())) for (const a of list ?? []) names.add(a.address.toLowerCase());
  for (const h of extra) names.add(h.toLowerCase());
  return names;
}

export function hostAllowed(req: IncomingMessage, host: string, port: number, names: Set<string>): boolean {
  const h = req.headers.host;
  if (!h) return false;
  const m = /^(\[[^\]]+\]|[^:]+)(?::(\d+))?$/.exec(h);
  if (!m) return false;
  const name = m[1].replace(/^\[|\]$/g, '').toLowerCase();
  if (m[2] !== undefined && Number(m[2]) !== port) return false;
  if (isLoopback(host)) return isLoopback(name);
  return names.has(name) || isLoopback(name);
}

export function bearer(req: IncomingMessage): string | undefined {
  const a = req.headers.authorization;
  if (a?.startsWith('Bearer ')) return a.slice(7);
  const x = req.headers['x-plumbline-token'];
  return typeof x === 'string' ? x : undefined;
}

function cookieToken(req: IncomingMessage): string | undefined {
  const c = req.headers.cookie;
  if (!c) return undefined;
  for (const part of c.split(';')) {
    const [k, ...v] = part.trim().split('=');
    if (k === TOKEN_COOKIE) return decodeURIComponent(v.join('='));
  }
  return undefined;
}

export interface RunningServer {
  readonly server: Server;
  readonly hub: Hub;
  readonly url: string;
  readonly port: number;
  close(): Promise<void>;
}

export async function startServer(station: Station, options: ServerOptions): Promise<RunningServer> {
  const { host, token } = options;
  if (!isLoopback(host) && token === undefined) {
    throw new ServerConfigError(`server.host '${host}' is beyond loopback: set server.token (16+ characters) in the station config, or listen on 127.0.0.1`);
  }
  const app = express();
  app.disable('x-powered-by');
  let boundPort = options.port;
  const hub = new Hub(() => station.snapshot());
  const sub = station.events$.subscribe({ next: (e) => hub.publish(e), error: () => undefined });
  const viewSub = station.views$.subscribe({ next: (v) => hub.publishView(v.session, v.sweep, v.final, v.view), error: () => undefined });

  const names = ownNames(host, options.allowedHosts ?? []);
  // Beyond loopback the whole server is behind the token, reads included.
  const readsNeedToken = !isLoopback(host) && token !== undefined;
  app.use((req, res, next) => {
    if (!hostAllowed(req, host, boundPort, names)) {
      res.status(403).json({ error: `Host '${req.headers.host}' is not this server (add the name to server.allowedHosts in the station config if it is)` });
      return;
    }
    next();
  });
  app.use((req, res, next) => {
    const control = req.method !== 'GET' && req.method !== 'HEAD';
    if (control && !sameOrigin(req)) {
      res.status(403).json({ error: `control request from a foreign origin '${req.headers.origin}' refused` });
      return;
    }
    if (token === undefined || (!control && !readsNeedToken)) return next();
    const fromQuery = typeof req.query.token === 'string' ? req.query.token : undefined;
    const given = bearer(req) ?? fromQuery ?? cookieToken(req);
    if (!tokenMatches(given, token)) {
      res.status(401).json({
        error: control
          ? 'control request without the station token refused (send Authorization: Bearer <token>)'
          : 'this station needs its token for every request: open the page as http://HOST:PORT/?token=<token>, or send Authorization: Bearer <token>',
      });
      return;
    }
    // Once a browser has shown the token, a same-site cookie carries it to the page's own files.
    if (fromQuery !== undefined) res.cookie(TOKEN_COOKIE, fromQuery, { httpOnly: true, sameSite: 'strict', path: '/' });
    next();
  });
  // Bodies must be JSON: a form or text body is refused instead of being read as "no options".
  app.use((req, res, next) => {
    const hasBody = (req.headers['content-length'] !== undefined && req.headers['content-length'] !== '0') || req.headers['transfer-encoding'] !== undefined;
    if (hasBody && !req.is('application/json')) {
      res.status(415).json({ error: `request body must be JSON (Content-Type: application/json), not '${req.headers['content-type'] ?? 'none'}'` });
      return;
    }
    next();
  });
  app.use(express.json({ limit: '64kb', strict: true }));

  const body = <T>(schema: z.ZodType<T>, req: Request): T => {
    const r = schema.safeParse(req.body ?? {});
    if (!r.success) throw new StationError(zodMessage(r.error, 'request body', req.body ?? {}, schema), 400);
    return r.data;
  };
  const sessionDir = (id: string) => {
    if (!/^[A-Za-z0-9-]+$/.test(id) || !listSessions(station.dataDir).includes(id)) throw new StationError(`no session '${id}'`, 404);
    return join(station.dataDir, id);
  };

  app.get('/api/openapi.json', (_req, res) => {
    res.json(openApiDocument(packageVersion()));
  });
  const defaultPlanOrNull = (): unknown => {
    try {
      return station.defaultPlan();
    } catch {
      return null;
    }
  };
  app.get('/api/status', (_req, res) => {
    res.json({
      running: station.running,
      session: station.currentSession ?? null,
      analysis: station.analysisSettings,
      limits: station.config.limits,
      instrument: station.config.instrument.kind,
      scenario: station.scenario?.name ?? null,
      control: station.hasControl,
      lastRun: station.lastRun,
      recovered: station.recovered.map((r) => ({ dir: r.dir, message: r.message, outputMayBeOn: r.outputMayBeOn === true })),
      hub: hub.stats,
      // With the parameters each fit gives (the station's inputs): the Run form's adaptive target
      // offers these, and startRun checks a plan's target against the same list.
      models: MECHANISMS.map((m) => ({
        id: m.id,
        title: m.title,
        requires: m.requires,
        uses: m.uses,
        parameters: parameterNames(m.id, station.analysisSettings.inputs) ?? [],
      })),
      // What the page's forms start from: the station's default plan (null when it has none).
      plan: defaultPlanOrNull(),
      // And, per plan kind, the values the station fills in for fields left out.
      planDefaults: planDefaults(),
    });
  });
  // The lot view: every session in the data folder as one report (summaries cached beside each
  // journal, so this stays fast with hundreds of sessions); the page links to it.
  const lotQuery = (req: Request) => {
    const q = (k: string) => (typeof req.query[k] === 'string' ? (req.query[k] as string).slice(0, 64) : undefined);
    return { map: q('map'), quantity: q('quantity'), test: q('test') };
  };
  app.get('/api/lot', async (req, res) => {
    if (listSessions(station.dataDir).length === 0) return void res.json({ rows: [], parameters: [], weibull: null, cautions: [], problems: [] });
    const { sample: _sample, ...a } = await analyzeLot(new FolderLot([station.dataDir]), lotQuery(req));
    res.json(a);
  });
  app.get('/lot', async (req, res) => {
    if (listSessions(station.dataDir).length === 0)
      return void res.type('html').send('<!doctype html><meta charset="utf-8"><title>plumbline lot</title><p>No sessions in the data folder yet.</p>');
    const o = lotQuery(req);
    res.type('html').send(renderLot(await analyzeLot(new FolderLot([station.dataDir]), o), o));
  });
  app.get('/api/sessions', (_req, res) => {
    res.json({ sessions: listSessions(station.dataDir) });
  });
  app.get('/api/sessions/:id', (req, res) => {
    const dir = sessionDir(req.params.id);
    const events: unknown[] = [];
    let readings = 0;
    const scan = scanJournal(dir, (e) => {
      if (e.type === 'reading') readings++;
      else events.push(e);
    });
    res.json({ id: req.params.id, readings, events, damagedLines: scan.bad });
  });
  app.get('/api/sessions/:id/readings', (req, res) => {
    const dir = sessionDir(req.params.id);
    const sweep = req.query.sweep === undefined ? undefined : Number(req.query.sweep);
    if (sweep !== undefined && !Number.isInteger(sweep)) throw new StationError(`query 'sweep': expected an integer, got '${String(req.query.sweep)}'`, 400);
    const rows: number[][] = [];
    scanJournal(dir, (e) => {
      if (e.type === 'reading' && (sweep === undefined || e.sweep === sweep) && rows.length < 2_000_000)
        rows.push([e.seq, e.sweep, e.k, e.t, e.v, e.i, e.flags]);
    });
    res.json({ fields: ['seq', 'sweep', 'k', 't', 'v', 'i', 'flags'], rows });
  });
  // Viewing a session of any length: an overview of bounded size, any one sweep on demand (one
  // positioned read), and re-analysis with other settings (kept beside the journal, never in it).
  const sweepParam = (raw: string) => {
    const n = Number(raw);
    if (!Number.isInteger(n) || n < 1) throw new StationError(`sweep '${raw}': expected a sweep number`, 400);
    return n;
  };
  app.get('/api/sessions/:id/overview', (req, res) => {
    const last = req.query.last === undefined ? OVERVIEW_SWEEPS : Number(req.query.last);
    if (!Number.isInteger(last) || last < 1 || last > 200)
      throw new StationError(`query 'last': expected a whole number from 1 to 200, got '${String(req.query.last)}'`, 400);
    res.json(sessionOverview(sessionDir(req.params.id), last));
  });
  app.get('/api/sessions/:id/sweeps/:sweep', (req, res) => {
    const sweep = sweepParam(req.params.sweep);
    const d = sweepDetail(sessionDir(req.params.id), sweep);
    if (!d) throw new StationError(`session ${req.params.id} has no sweep ${sweep}`, 404);
    res.json(d);
  });
  app.get('/api/sessions/:id/sweeps/:sweep/view', (req, res) => {
    const dir = sessionDir(req.params.id);
    const sweep = sweepParam(req.params.sweep);
    if (req.query.model === undefined) {
      const d = sweepDetail(dir, sweep);
      if (!d) throw new StationError(`session ${req.params.id} has no sweep ${sweep}`, 404);
      res.json({ sweep, analysis: d.analysis, view: d.view });
      return;
    }
    const d = sweepDetail(dir, sweep);
    const a = station.parseAnalysis({ ...((d?.analysis ?? station.analysisSettings) as object), model: String(req.query.model), window: 'auto' });
    res.json({ sweep, analysis: a, view: sweepViewWith(dir, sweep, a) ?? null });
  });
  app.post('/api/sessions/:id/reanalyze', (req, res) => {
    const dir = sessionDir(req.params.id);
    const b = body(reanalysisBody, req);
    const a = station.parseAnalysis(b.analysis);
    res.json(reanalyze(dir, a, b.sweeps, b.views ?? []));
  });
  app.post('/api/sessions/:id/export', (req, res) => {
    const r = exportSession(sessionDir(req.params.id));
    res.json({ files: r.files, readings: r.readings, sweeps: r.sweeps });
  });
  app.post('/api/run', async (req, res) => {
    const b = body(runBody, req);
    const h = await station.startRun({
      plan: b.plan,
      analysis: b.analysis,
      label: b.label,
      device: b.device,
      acknowledgeDestructive: b.acknowledgeDestructive === true,
    });
    h.done.catch(() => undefined);
    res.status(201).json({ session: h.session, plan: h.plan });
  });
  app.post('/api/run/stop', (req, res) => {
    const b = body(reasonBody, req);
    station.stop(b.reason ?? 'stop requested from the API');
    res.json({ ok: true });
  });
  app.post('/api/run/abort', (req, res) => {
    const b = body(reasonBody, req);
    station.abort(b.reason ?? 'abort requested from the API');
    res.json({ ok: true });
  });
  app.get('/api/analysis', (_req, res) => {
    res.json(station.analysisSettings);
  });
  app.put('/api/analysis', (req, res) => {
    res.json(station.setAnalysis(req.body, 'api'));
  });
  app.post('/api/annotations', (req, res) => {
    const b = body(annotationBody, req);
    res.status(201).json(station.annotate(b, 'api'));
  });
  app.use('/api', (req, res) => {
    res.status(404).json({ error: `no API route ${req.method} ${req.originalUrl}` });
  });

  const webDir = options.webDir ?? WEB_DIR;
  if (existsSync(webDir)) app.use(express.static(webDir));
  else {
    app.get('/', (_req, res) => {
      res.type('text/plain').send(`plumbline daemon: the page is not built (${webDir} missing); run npm run build. The API is at /api/status.`);
    });
  }

  app.use((err: unknown, _req: Request, res: Response, _next: NextFunction) => {
    const e = err as { status?: number; type?: string; message?: string };
    if (e.type === 'entity.parse.failed') {
      res.status(400).json({ error: `request body is not valid JSON: ${e.message}` });
      return;
    }
    if (e.type === 'charset.unsupported' || e.type === 'encoding.unsupported') {
      res.status(415).json({ error: `request body: ${e.message}; send JSON in UTF-8` });
      return;
    }
    if (e.type === 'entity.too.large') {
      res.status(413).json({ error: 'request body too large (64 kB at most)' });
      return;
    }
    if (err instanceof StationError) {
      res.status(err.status).json({ error: err.message });
      return;
    }
    if (err instanceof PlanError || err instanceof GuardError) {
      res.status(400).json({ error: err.message, ...(err instanceof GuardError ? { setting: err.setting } : {}) });
      return;
    }
    res.status(500).json({ error: `internal error: ${e.message ?? String(err)}` });
  });

  const server = createServer(app);
  server.on('upgrade', (req, socket, head) => {
    const refuse = (code: number, text: string) => {
      socket.write(`HTTP/1.1 ${code} ${text}\r\nConnection: close\r\nContent-Length: 0\r\n\r\n`);
      socket.destroy();
    };
    const url = new URL(req.url ?? '/', 'http://x');
    if (url.pathname !== '/ws') return refuse(404, 'Not Found');
    if (!hostAllowed(req, host, boundPort, names)) return refuse(403, 'Forbidden');
    if (!sameOrigin(req)) return refuse(403, 'Forbidden');
    if (token !== undefined && !tokenMatches(url.searchParams.get('token') ?? bearer(req) ?? cookieToken(req), token)) return refuse(401, 'Unauthorized');
    hub.upgrade(req, socket, head);
  });
  await new Promise<void>((resolve, reject) => {
    server.once('error', (e: NodeJS.ErrnoException) => {
      sub.unsubscribe();
      viewSub.unsubscribe();
      hub.close();
      if (e.code === 'EADDRINUSE')
        reject(new ServerConfigError(`port ${options.port} on ${host} is already in use (another plumbline serve?): give --port, or 0 for any free port`));
      else if (e.code === 'EACCES') reject(new ServerConfigError(`no permission to listen on ${host}:${options.port}: use a port above 1023`));
      else if (e.code === 'EADDRNOTAVAIL') reject(new ServerConfigError(`server.host '${host}' is not an address of this machine`));
      else reject(e);
    });
    server.listen(options.port, host, () => resolve());
  });
  boundPort = (server.address() as AddressInfo).port;
  const shownHost = host.includes(':') ? `[${host}]` : host;
  return {
    server,
    hub,
    port: boundPort,
    url: `http://${shownHost}:${boundPort}/`,
    close: () =>
      new Promise<void>((resolve) => {
        sub.unsubscribe();
        viewSub.unsubscribe();
        hub.close();
        server.closeAllConnections();
        server.close(() => resolve());
      }),
  };
}
