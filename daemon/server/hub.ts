/**
 * The websocket hub: every client gets a snapshot on connect, then batches of events with their
 * sequence numbers. Events are collected for BATCH_MS and serialised once per batch for all
 * clients, so acquisition pays O(1) per event however many pages watch.
 *
 * A slow or stalled client never slows acquisition: when its socket's bufferedAmount passes
 * HIGH_WATER the client stops receiving (its events are skipped, not queued); once it drains below
 * LOW_WATER it gets a `gap` message naming the skipped range and a fresh snapshot. A client that
 * stays stalled past STALL_MS is terminated. A ping/pong heartbeat drops half-open connections.
 */
import type { IncomingMessage } from 'node:http';
import type { Duplex } from 'node:stream';
import { WebSocket, WebSocketServer } from 'ws';
import { packReading, type PackedReading, type ServerMessage, type Snapshot, type WireEvent } from '../../protocols/wire.js';

const BATCH_MS = 10;
const HIGH_WATER = 4 << 20;
const LOW_WATER = 256 << 10;
const STALL_MS = 60_000;
const HEARTBEAT_MS = 15_000;
/** Readings per batch above which a batch is thinned (≈ 100,000 readings/s at one batch per 10 ms). */
export const MAX_READINGS_PER_BATCH = 1000;

interface Client {
  readonly ws: WebSocket;
  lagging: boolean;
  gapFrom: number;
  gapTo: number;
  laggingSince: number;
  alive: boolean;
}

export interface HubStats {
  clients: number;
  lagging: number;
  batches: number;
  events: number;
  gaps: number;
  dropped: number;
}

export class Hub {
  readonly wss = new WebSocketServer({ noServer: true, maxPayload: 64 * 1024, perMessageDeflate: false });
  private readonly clients = new Set<Client>();
  private pending: WireEvent[] = [];
  private pendingViews = new Map<number, string>();
  private timer: NodeJS.Timeout | undefined;
  private readonly heartbeat: NodeJS.Timeout;
  readonly stats: HubStats = { clients: 0, lagging: 0, batches: 0, events: 0, gaps: 0, dropped: 0 };

  constructor(
    private readonly snapshot: () => Snapshot,
    private readonly onMessage?: (msg: unknown, ws: WebSocket) => void,
  ) {
    this.heartbeat = setInterval(() => {
      for (const c of this.clients) {
        if (!c.alive) {
          c.ws.terminate();
          continue;
        }
        c.alive = false;
        c.ws.ping();
      }
    }, HEARTBEAT_MS);
    this.heartbeat.unref();
  }

  /** Completes an HTTP upgrade the server has already authorised. */
  upgrade(req: IncomingMessage, socket: Duplex, head: Buffer): void {
    this.wss.handleUpgrade(req, socket, head, (ws) => this.add(ws));
  }

  private add(ws: WebSocket): void {
    const c: Client = { ws, lagging: false, gapFrom: 0, gapTo: 0, laggingSince: 0, alive: true };
    this.clients.add(c);
    this.stats.clients = this.clients.size;
    ws.on('error', () => ws.terminate());
    ws.on('pong', () => (c.alive = true));
    ws.on('close', () => {
      this.clients.delete(c);
      this.stats.clients = this.clients.size;
    });
    ws.on('message', (data) => {
      if (!this.onMessage) return;
      try {
        this.onMessage(JSON.parse(String(data)), ws);
      } catch {
        /* the page only sends JSON; anything else is ignored */
      }
    });
    this.sendSnapshot(c);
  }

  private sendSnapshot(c: Client): void {
    const msg: ServerMessage = { kind: 'snapshot', snapshot: this.snapshot() };
    c.ws.send(JSON.stringify(msg));
  }

  /** Queues a sweep's linearized view; only the latest per sweep goes out with the next batch. */
  publishView(session: string | null, sweep: number, final: boolean, view: unknown): void {
    this.pendingViews.set(sweep, JSON.stringify({ kind: 'view', session, sweep, final, view }));
    this.timer ??= setTimeout(() => this.flush(), BATCH_MS);
  }

  /** Queues an event for the next batch (O(1)). */
  publish(e: WireEvent): void {
    this.pending.push(e);
    this.timer ??= setTimeout(() => this.flush(), BATCH_MS);
  }

  flush(): void {
    this.timer = undefined;
    this.flushEvents();
    if (this.pendingViews.size === 0) return;
    const views = [...this.pendingViews.values()];
    this.pendingViews.clear();
    for (const c of this.clients) {
      if (c.ws.readyState !== WebSocket.OPEN || c.lagging) continue;
      for (const v of views) c.ws.send(v);
    }
  }

  private flushEvents(): void {
    if (this.pending.length === 0) return;
    const events = this.pending;
    this.pending = [];
    this.stats.batches++;
    this.stats.events += events.length;
    if (this.clients.size === 0) return;
    const first = events[0].seq;
    let text: string | undefined;
    const now = Date.now();
    let lagging = 0;
    for (const c of this.clients) {
      if (c.ws.readyState !== WebSocket.OPEN) continue;
      if (c.lagging) {
        if (c.ws.bufferedAmount < LOW_WATER) {
          c.lagging = false;
          c.gapTo = first - 1;
          const gap: ServerMessage = { kind: 'gap', from: c.gapFrom, to: c.gapTo };
          c.ws.send(JSON.stringify(gap));
          this.stats.gaps++;
          this.sendSnapshot(c);
          continue;
        }
        if (now - c.laggingSince > STALL_MS) {
          c.ws.terminate();
          continue;
        }
        this.stats.dropped += events.length;
        lagging++;
        continue;
      }
      if (c.ws.bufferedAmount > HIGH_WATER) {
        c.lagging = true;
        c.gapFrom = first;
        c.laggingSince = now;
        this.stats.dropped += events.length;
        lagging++;
        continue;
      }
      text ??= encodeBatch(events);
      c.ws.send(text);
    }
    this.stats.lagging = lagging;
  }

  close(): void {
    clearInterval(this.heartbeat);
    if (this.timer) clearTimeout(this.timer);
    for (const c of this.clients) c.ws.terminate();
    this.wss.close();
  }
}

/** One batch as a websocket message: other events as they are, readings packed (and thinned). */
export function encodeBatch(batch: readonly WireEvent[]): string {
  const events: WireEvent[] = [];
  let count = 0;
  for (const e of batch) if (e.type === 'reading') count++;
  const stride = count > MAX_READINGS_PER_BATCH ? Math.ceil(count / MAX_READINGS_PER_BATCH) : 1;
  const readings: PackedReading[] = [];
  let n = 0;
  let prevSweep = -1;
  let last: WireEvent | undefined;
  for (const e of batch) {
    if (e.type !== 'reading') {
      events.push(e);
      continue;
    }
    // Keep every stride-th reading and the first of each sweep.
    if (stride === 1 || n % stride === 0 || e.sweep !== prevSweep) readings.push(packReading(e));
    else last = e;
    prevSweep = e.sweep;
    n++;
  }
  if (stride > 1 && last && readings[readings.length - 1][0] !== last.seq) readings.push(packReading(last as Extract<WireEvent, { type: 'reading' }>));
  const msg: ServerMessage =
    stride > 1 ? { kind: 'events', events, readings, thinned: { readings: count, sent: readings.length } } : { kind: 'events', events, readings };
  return JSON.stringify(msg);
}
