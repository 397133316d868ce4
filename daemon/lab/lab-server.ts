/**
 * The lab overview: one page listing every station that publishes to the broker, live — state,
 * device, sweep progress, latest parameters with their errors, cautions — each with a link to the
 * station's own page. It is read-only: it holds no station token and sends no command; control
 * stays on each station's page, behind that station's token.
 *
 * It follows the station server's rules: 127.0.0.1 unless told otherwise, and beyond loopback only
 * with a token; with a token every request needs it (Authorization: Bearer, or ?token= once, after
 * which an HttpOnly same-site cookie carries it); the Host header must name this server; websocket
 * upgrades from a foreign Origin are refused; anything but GET/HEAD is refused.
 */
import { createServer, type IncomingMessage, type Server } from 'node:http';
import type { AddressInfo } from 'node:net';
import { join } from 'node:path';
import express from 'express';
import mqtt, { type MqttClient } from 'mqtt';
import { type WebSocket, WebSocketServer } from 'ws';
import { formatParameter } from '../../protocols/display-units.js';
import { OKABE_ITO } from '../../protocols/palette.js';
import { projectRoot } from '../../protocols/project-root.js';
import { isLoopback } from '../run/config.js';
import { bearer, hostAllowed, ownNames, sameOrigin, tokenMatches } from '../server/app.js';
import type { StationStatus } from './status.js';
import { LabConfigError, parseBrokerUrl, parseTopic, scrub, topics } from './topics.js';

export const LAB_PAGE_DIR = join(projectRoot(), 'daemon', 'lab', 'page');

export interface LabServerOptions {
  readonly mqtt: string;
  readonly host: string;
  readonly port: number;
  readonly token?: string;
  readonly log?: (line: string) => void;
}

export interface LabServer {
  readonly url: string;
  readonly port: number;
  readonly server: Server;
  /** Latest status per station. */
  readonly stations: Map<string, StationStatus>;
  close(): Promise<void>;
}

/**
 * A status as the page gets it: each fitted parameter also as text in the trade's units (the one
 * formatter of protocols/display-units), so the page formats nothing itself.
 */
export function forPage(s: StationStatus): StationStatus & { display?: Record<string, { text: string; unit: string }> } {
  if (!s.fit) return s;
  const display: Record<string, { text: string; unit: string }> = {};
  for (const [k, p] of Object.entries(s.fit.parameters)) {
    try {
      display[k] = formatParameter(p, k);
    } catch {
      display[k] = { text: `${p.value} ± ${p.stdErr}`, unit: p.unit };
    }
  }
  return { ...s, display };
}

/** Server → page messages. */
export type LabMessage =
  | {
      readonly kind: 'stations';
      readonly broker: string;
      readonly connected: boolean;
      readonly stations: readonly StationStatus[];
      readonly palette: typeof OKABE_ITO;
    }
  | { readonly kind: 'status'; readonly status: StationStatus }
  | { readonly kind: 'broker'; readonly connected: boolean };

const MAX_BUFFERED = 1 << 20;
const COOKIE = 'plumbline_lab_token';

function cookieToken(req: IncomingMessage): string | undefined {
  for (const part of (req.headers.cookie ?? '').split(';')) {
    const [k, ...v] = part.trim().split('=');
    if (k === COOKIE) return decodeURIComponent(v.join('='));
  }
  return undefined;
}

export async function startLabServer(o: LabServerOptions): Promise<LabServer> {
  const addr = parseBrokerUrl(o.mqtt, '--mqtt');
  if (!isLoopback(o.host) && o.token === undefined) {
    throw new LabConfigError(`--host '${o.host}' is beyond loopback: give --token (16+ characters; the page then needs ?token=…), or listen on 127.0.0.1`);
  }
  if (o.token !== undefined && o.token.length < 16) throw new LabConfigError('--token: use at least 16 characters');
  const log = (line: string) => o.log?.(scrub(line, [addr.password, o.token]));
  const stations = new Map<string, StationStatus>();
  const clients = new Set<WebSocket>();
  let connected = false;
  const send = (m: LabMessage) => {
    const text = JSON.stringify(m);
    for (const ws of clients) {
      // A page that cannot keep up is dropped (it reconnects and gets a fresh list).
      if (ws.bufferedAmount > MAX_BUFFERED) ws.terminate();
      else ws.send(text);
    }
  };

  const client: MqttClient = mqtt.connect(addr.server, {
    username: addr.username,
    password: addr.password,
    clean: true,
    reconnectPeriod: 1000,
    connectTimeout: 10_000,
    reconnectOnConnackError: true,
  });
  client.on('connect', () => {
    connected = true;
    log(`lab: connected to ${addr.display}`);
    client.subscribe(topics.allStatus(addr.prefix), { qos: 1 });
    send({ kind: 'broker', connected: true });
  });
  client.on('close', () => {
    if (connected) {
      log(`lab: lost the broker ${addr.display}; reconnecting`);
      send({ kind: 'broker', connected: false });
    }
    connected = false;
  });
  client.on('error', (e) => log(`lab: broker ${addr.display}: ${e.message}`));
  client.on('message', (topic, payload) => {
    const t = parseTopic(addr.prefix, topic);
    if (t?.kind !== 'status') return;
    let s: StationStatus;
    try {
      s = JSON.parse(String(payload));
    } catch {
      return;
    }
    if (s.station !== t.station || s.v !== 1) return;
    stations.set(s.station, s);
    send({ kind: 'status', status: forPage(s) });
  });

  const app = express();
  app.disable('x-powered-by');
  let boundPort = o.port;
  const names = ownNames(o.host, []);
  app.use((req, res, next) => {
    if (!hostAllowed(req, o.host, boundPort, names)) {
      res.status(403).json({ error: `Host '${req.headers.host}' is not this server` });
      return;
    }
    if (req.method !== 'GET' && req.method !== 'HEAD') {
      res.status(405).json({ error: 'the lab page is read-only; control a station on its own page' });
      return;
    }
    if (o.token !== undefined) {
      const fromQuery = typeof req.query.token === 'string' ? req.query.token : undefined;
      if (!tokenMatches(bearer(req) ?? fromQuery ?? cookieToken(req), o.token)) {
        res.status(401).json({ error: 'this lab page needs its token: open it as http://HOST:PORT/?token=<token>, or send Authorization: Bearer <token>' });
        return;
      }
      if (fromQuery !== undefined) res.setHeader('Set-Cookie', `${COOKIE}=${encodeURIComponent(fromQuery)}; HttpOnly; SameSite=Strict; Path=/`);
    }
    res.setHeader(
      'Content-Security-Policy',
      "default-src 'self'; connect-src 'self'; img-src 'self' data:; style-src 'self'; script-src 'self'; frame-ancestors 'none'",
    );
    res.setHeader('X-Content-Type-Options', 'nosniff');
    next();
  });
  app.get('/api/stations', (_req, res) => {
    res.json({ broker: addr.display, connected, stations: [...stations.values()] });
  });
  app.get('/favicon.ico', (_req, res) => void res.status(204).end());
  app.use(express.static(LAB_PAGE_DIR, { index: 'index.html' }));

  const server = createServer(app);
  const wss = new WebSocketServer({ noServer: true, maxPayload: 4096, perMessageDeflate: false });
  server.on('upgrade', (req, socket, head) => {
    const refuse = (code: number, text: string) => {
      socket.write(`HTTP/1.1 ${code} ${text}\r\nConnection: close\r\nContent-Length: 0\r\n\r\n`);
      socket.destroy();
    };
    const url = new URL(req.url ?? '/', 'http://x');
    if (url.pathname !== '/ws') return refuse(404, 'Not Found');
    if (!hostAllowed(req, o.host, boundPort, names) || !sameOrigin(req)) return refuse(403, 'Forbidden');
    if (o.token !== undefined && !tokenMatches(url.searchParams.get('token') ?? bearer(req) ?? cookieToken(req), o.token)) return refuse(401, 'Unauthorized');
    wss.handleUpgrade(req, socket, head, (ws) => {
      clients.add(ws);
      ws.on('error', () => ws.terminate());
      ws.on('close', () => clients.delete(ws));
      ws.send(
        JSON.stringify({
          kind: 'stations',
          broker: addr.display,
          connected,
          stations: [...stations.values()].map(forPage),
          palette: OKABE_ITO,
        } satisfies LabMessage),
      );
    });
  });
  await new Promise<void>((resolve, reject) => {
    server.once('error', (e: NodeJS.ErrnoException) => {
      client.end(true);
      if (e.code === 'EADDRINUSE') reject(new LabConfigError(`port ${o.port} on ${o.host} is already in use: give --port, or 0 for any free port`));
      else if (e.code === 'EADDRNOTAVAIL') reject(new LabConfigError(`--host '${o.host}' is not an address of this machine`));
      else reject(e);
    });
    server.listen(o.port, o.host, () => resolve());
  });
  boundPort = (server.address() as AddressInfo).port;
  const shownHost = o.host.includes(':') ? `[${o.host}]` : o.host;
  return {
    url: `http://${shownHost}:${boundPort}/`,
    port: boundPort,
    server,
    stations,
    close: async () => {
      for (const ws of clients) ws.terminate();
      wss.close();
      await client.endAsync(true).catch(() => undefined);
      server.closeAllConnections();
      await new Promise<void>((r) => server.close(() => r()));
    },
  };
}
