/**
 * Publishes a station's sessions to an MQTT broker by reading its journals — never from the live
 * chain — so a broker that is down or slow cannot slow acquisition or touch safety: the journal
 * is written first and stays the source of truth; publishing catches up from it.
 *
 * - Each session's journal is followed in seq-contiguous batches (readings and events), sent with
 *   QoS 1 on PREFIX/station/STATION/session/SESSION/data. At most `window` batches are unacknowledged
 *   at once (bounded memory); nothing more is read from disk until the broker acknowledges.
 * - The acknowledged frontier (every seq up to it is on the broker) is kept in the session folder
 *   (`published.json`, per broker address). After a disconnect, a restart or a crash, publishing
 *   resumes there: nothing is lost; a batch may go out twice, which subscribers absorb (they key on
 *   session and seq).
 * - The station's state is published retained (PREFIX/station/STATION/status) a few times a second at
 *   most, and `offline` by the broker (last will) when the station vanishes.
 * - A subscriber that missed batches (a broker restarted without persistence) asks for them on
 *   PREFIX/station/STATION/replay; they are read from the journal again and re-sent.
 */
import { existsSync, readdirSync, readFileSync, renameSync, statSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import mqtt, { type MqttClient } from 'mqtt';
import { JOURNAL_FILE } from '../journal/journal.js';
import { encodeBatch } from './batch.js';
import { type Chunk, JournalFollower, sessionLive } from './follower.js';
import { StatusTracker, type StationStatus } from './status.js';
import { checkName, parseBrokerUrl, scrub, topics, type BrokerAddress } from './topics.js';

export const PUBLISHED_FILE = 'published.json';

export interface PublisherOptions {
  /** mqtt://[user:password@]HOST:PORT[/PREFIX] */
  readonly url: string;
  /** Station id in topic names. */
  readonly station: string;
  /** A readable name (the config's). */
  readonly name: string;
  readonly dataDir: string;
  readonly page?: string | null;
  readonly tokenRequired?: boolean;
  readonly log?: (line: string) => void;
  /** How often the journals are looked at, ms (default 250: fewer, larger batches for the archive). */
  readonly pollMs?: number;
  /** Readings per batch at most (default 8192, ~460 kB). */
  readonly maxReadings?: number;
  /** Unacknowledged batches at most (default 16). */
  readonly window?: number;
  /** Sessions created since this time (ms since the epoch) are published even if already finished (default: now). */
  readonly since?: number;
}

interface Sent {
  readonly from: number;
  readonly to: number;
  done: boolean;
}

interface Tracked {
  readonly id: string;
  readonly dir: string;
  readonly follower: JournalFollower;
  /** Every seq ≤ acked is on the broker. */
  acked: number;
  sent: Sent[];
  complete: boolean;
  savedAcked: number;
  savedAt: number;
}

interface ReplayJob {
  readonly id: string;
  readonly follower: JournalFollower;
  readonly to: number;
}

export interface PublisherStats {
  batches: number;
  readings: number;
  events: number;
  replays: number;
  connected: boolean;
  reconnects: number;
}

/** The publishing state kept in a session folder, per broker address. */
export function readPublished(dir: string): Record<string, { station: string; acked: number; complete: boolean; updated: string }> {
  try {
    return JSON.parse(readFileSync(join(dir, PUBLISHED_FILE), 'utf8'));
  } catch {
    return {};
  }
}

export class LabPublisher {
  readonly addr: BrokerAddress;
  private readonly target: string;
  private client: MqttClient | undefined;
  private gen = 0;
  private connected = false;
  private stopping = false;
  private stopped = false;
  private readonly sessions = new Map<string, Tracked>();
  private readonly known = new Set<string>();
  private replays: ReplayJob[] = [];
  private inflight = 0;
  private pumpTimer: NodeJS.Timeout | undefined;
  private scanTimer: NodeJS.Timeout | undefined;
  private reconnectTimer: NodeJS.Timeout | undefined;
  private backoff = 500;
  private lastStatus = 0;
  private readonly status: StatusTracker;
  private readonly since: number;
  private outageLogged = false;
  private lastConnected = 0;
  readonly stats: PublisherStats = { batches: 0, readings: 0, events: 0, replays: 0, connected: false, reconnects: 0 };
  private readonly pollMs: number;
  private readonly maxReadings: number;
  private readonly window: number;

  constructor(readonly options: PublisherOptions) {
    this.addr = parseBrokerUrl(options.url, '--publish');
    checkName(options.station, 'station id');
    this.target = `${this.addr.server}/${this.addr.prefix}`;
    this.since = options.since ?? Date.now();
    this.pollMs = options.pollMs ?? 250;
    this.maxReadings = options.maxReadings ?? 8192;
    this.window = options.window ?? 16;
    this.status = new StatusTracker(options.station, options.name, options.page ?? null, options.tokenRequired ?? false);
  }

  private log(line: string): void {
    this.options.log?.(scrub(line, [this.addr.password]));
  }

  start(): void {
    this.scan();
    this.connect();
    this.scanTimer = setInterval(() => this.scan(), 250);
    this.schedulePump();
  }

  // ---- sessions -------------------------------------------------------------------------------

  /** Finds sessions to publish: new ones, live ones, and ones left unfinished for this broker. */
  private scan(): void {
    let names: string[];
    try {
      names = readdirSync(this.options.dataDir).sort();
    } catch {
      return;
    }
    for (const id of names) {
      if (this.known.has(id)) continue;
      const dir = join(this.options.dataDir, id);
      if (!existsSync(join(dir, JOURNAL_FILE))) continue;
      this.known.add(id);
      const state = readPublished(dir)[this.target];
      if (state?.complete) continue;
      let fresh = false;
      try {
        fresh = statSync(dir).mtimeMs >= this.since - 1000;
      } catch {
        continue;
      }
      if (state || fresh || sessionLive(dir)) this.track(id, dir, state?.acked ?? 0);
    }
  }

  private track(id: string, dir: string, acked: number): void {
    try {
      checkName(id, 'session id');
    } catch {
      this.log(`publish: session folder '${id}' has a name that cannot be a topic level; not published`);
      return;
    }
    const t: Tracked = { id, dir, follower: new JournalFollower(dir, acked, this.maxReadings), acked, sent: [], complete: false, savedAcked: -1, savedAt: 0 };
    this.sessions.set(id, t);
    // The newest session is the station's current one.
    if (this.status.currentSession === null || id > this.status.currentSession) {
      this.status.begin(id);
      // Bring the status up to the acknowledged frontier (a resumed session).
      if (acked > 0) {
        const f = new JournalFollower(dir, 0, this.maxReadings);
        for (let c = f.poll(); c; c = f.poll()) {
          for (const e of c.events) if (e.seq <= acked) this.status.apply(e.event);
          this.status.readings(c.to <= acked ? c.readings : 0);
          if (c.to >= acked) break;
        }
      }
    }
    this.save(t, true);
  }

  private save(t: Tracked, force = false): void {
    if (!force && (t.acked === t.savedAcked || Date.now() - t.savedAt < 1000)) return;
    const all = readPublished(t.dir);
    all[this.target] = { station: this.options.station, acked: t.acked, complete: t.complete, updated: new Date().toISOString() };
    const tmp = join(t.dir, `${PUBLISHED_FILE}.tmp`);
    try {
      writeFileSync(tmp, `${JSON.stringify(all, null, 1)}\n`);
      renameSync(tmp, join(t.dir, PUBLISHED_FILE));
      t.savedAcked = t.acked;
      t.savedAt = Date.now();
    } catch (e) {
      this.log(`publish: cannot record progress in ${t.dir}: ${(e as Error).message}`);
    }
  }

  // ---- broker connection ----------------------------------------------------------------------

  private statusMessage(state: 'running' | 'idle' | 'offline'): Buffer {
    const sessions = [...this.sessions.values()].slice(-8).map((t) => ({ id: t.id, acked: t.acked, complete: t.complete }));
    return Buffer.from(JSON.stringify(this.status.message(state, sessions)));
  }

  private liveState(): 'running' | 'idle' {
    const cur = this.status.currentSession;
    const t = cur ? this.sessions.get(cur) : undefined;
    return t && !t.complete && sessionLive(t.dir) ? 'running' : 'idle';
  }

  private connect(): void {
    if (this.stopped) return;
    const gen = ++this.gen;
    const { station } = this.options;
    const offline = this.statusMessage('offline');
    const c = mqtt.connect(this.addr.server, {
      clientId: `plumbline-${station}-${process.pid}-${gen}`.slice(0, 64),
      username: this.addr.username,
      password: this.addr.password,
      clean: true,
      protocolVersion: 4,
      // This class reconnects itself (and resumes from the acknowledged frontier), so mqtt.js
      // keeps no store of its own to resend from.
      reconnectPeriod: 0,
      connectTimeout: 5000,
      keepalive: 15,
      queueQoSZero: false,
      will: { topic: topics.status(this.addr.prefix, station), payload: offline, qos: 1, retain: true },
    });
    this.client = c;
    c.on('connect', () => {
      if (gen !== this.gen) return;
      this.connected = true;
      this.lastConnected = Date.now();
      this.stats.connected = true;
      this.backoff = 500;
      this.inflight = 0;
      this.log(`publish: ${this.outageLogged ? 'reconnected to' : 'connected to'} ${this.addr.display}`);
      this.outageLogged = false;
      for (const t of this.sessions.values()) {
        t.sent = [];
        if (!t.complete) t.follower.seek(t.acked);
      }
      this.replays = [];
      c.subscribe(topics.replay(this.addr.prefix, station), { qos: 1 });
      this.publishStatus(true);
      this.schedulePump(0);
    });
    c.on('message', (topic, payload) => {
      if (gen === this.gen && topic === topics.replay(this.addr.prefix, station)) this.onReplay(payload);
    });
    let lastError: string | undefined;
    c.on('error', (e) => {
      lastError = e.message;
    });
    c.on('close', () => {
      if (gen !== this.gen) return;
      if (!this.outageLogged && (!this.stopping || (!this.connected && lastError))) {
        const why = lastError ? ` (${lastError})` : '';
        this.log(
          `publish: ${this.connected ? 'lost the broker' : 'cannot reach the broker'} ${this.addr.display}${why}; readings stay in the journal and are published when it is back`,
        );
        this.outageLogged = true;
      }
      this.connected = false;
      this.stats.connected = false;
      this.gen++; // late acknowledgements of this connection are ignored
      c.end(true);
      if (this.stopped) return;
      this.stats.reconnects++;
      this.reconnectTimer = setTimeout(() => this.connect(), this.backoff);
      this.backoff = Math.min(this.backoff * 2, 8000);
    });
  }

  private publishStatus(force = false): void {
    if (!this.connected || !this.client) return;
    const now = Date.now();
    if (!force && (!this.status.dirty || now - this.lastStatus < 250)) return;
    this.lastStatus = now;
    this.client.publish(topics.status(this.addr.prefix, this.options.station), this.statusMessage(this.liveState()), { qos: 1, retain: true });
  }

  private onReplay(payload: Buffer): void {
    let req: { session?: unknown; ranges?: unknown };
    try {
      req = JSON.parse(String(payload));
    } catch {
      return;
    }
    const id = req.session;
    if (typeof id !== 'string' || !/^[A-Za-z0-9._-]{1,80}$/.test(id) || !Array.isArray(req.ranges)) return;
    const dir = join(this.options.dataDir, id);
    if (!existsSync(join(dir, JOURNAL_FILE))) return;
    for (const r of req.ranges.slice(0, 32)) {
      if (!Array.isArray(r) || !Number.isInteger(r[0]) || !Number.isInteger(r[1]) || r[0] < 1 || r[1] < r[0]) continue;
      if (this.replays.length >= 64) break;
      if (this.replays.some((j) => j.id === id && j.follower.position + 1 <= r[0] && j.to >= r[1])) continue;
      this.replays.push({ id, follower: new JournalFollower(dir, r[0] - 1, this.maxReadings), to: r[1] });
      this.log(`publish: a subscriber asked for seq ${r[0]}–${r[1]} of ${id} again; sending it from the journal`);
      this.stats.replays++;
    }
    this.schedulePump(0);
  }

  // ---- the loop ---------------------------------------------------------------------------------

  private schedulePump(ms = this.pollMs): void {
    if (this.stopped) return;
    if (this.pumpTimer) clearTimeout(this.pumpTimer);
    this.pumpTimer = setTimeout(() => this.pump(), ms);
  }

  private pump(): void {
    this.pumpTimer = undefined;
    if (this.stopped) return;
    if (this.connected) {
      try {
        this.pumpSessions();
        this.pumpReplays();
        this.publishStatus();
      } catch (e) {
        this.log(`publish: ${(e as Error).message}`);
      }
    }
    this.schedulePump();
  }

  private pumpSessions(): void {
    for (const t of this.sessions.values()) {
      if (t.complete) continue;
      const live = sessionLive(t.dir);
      // A session nobody writes any more, with nothing new on disk: done, or waiting for recovery.
      if (!live && t.sent.length === 0 && !t.follower.behind()) {
        this.checkComplete(t, false);
        continue;
      }
      let drained = false;
      while (this.inflight < this.window) {
        const chunk = t.follower.poll(!live);
        if (!chunk) {
          drained = true;
          break;
        }
        this.send(t, chunk);
      }
      if (!(drained && this.checkComplete(t, live))) this.save(t);
    }
  }

  /** A session is done once its writer is gone, its run ended and the broker has all of it. */
  private checkComplete(t: Tracked, live = sessionLive(t.dir)): boolean {
    if (t.complete) return true;
    if (live || !t.follower.ended || t.sent.length > 0 || t.acked !== t.follower.position || t.follower.behind()) return false;
    t.complete = true;
    this.save(t, true);
    this.status.dirty = true;
    return true;
  }

  private pumpReplays(): void {
    while (this.replays.length > 0 && this.inflight < this.window) {
      const job = this.replays[0];
      const dir = join(this.options.dataDir, job.id);
      const chunk = job.follower.poll(!sessionLive(dir));
      if (!chunk || chunk.from > job.to) {
        this.replays.shift();
        continue;
      }
      this.sendBatch(job.id, chunk, true, () => undefined);
    }
  }

  private send(t: Tracked, chunk: Chunk): void {
    const s: Sent = { from: chunk.from, to: chunk.to, done: false };
    t.sent.push(s);
    if (t.id === this.status.currentSession) {
      for (const e of chunk.events) this.status.apply(e.event);
      this.status.readings(chunk.readings);
    }
    this.sendBatch(t.id, chunk, false, () => {
      s.done = true;
      while (t.sent.length > 0 && t.sent[0].done) t.acked = t.sent.shift()!.to;
    });
  }

  private sendBatch(session: string, chunk: Chunk, replay: boolean, onAck: () => void): void {
    const c = this.client!;
    const gen = this.gen;
    const { station } = this.options;
    const msg = encodeBatch(
      {
        station,
        session,
        from: chunk.from,
        to: chunk.to,
        readings: chunk.readings,
        ...(chunk.holes.length ? { holes: chunk.holes } : {}),
        ...(replay ? { replay: true } : {}),
        sentAt: Date.now(),
      },
      chunk.events.map((e) => e.line),
      chunk.records,
    );
    this.inflight++;
    this.stats.batches++;
    this.stats.readings += chunk.readings;
    this.stats.events += chunk.events.length;
    c.publish(topics.data(this.addr.prefix, station, session), msg, { qos: 1 }, (err) => {
      if (gen !== this.gen) return; // that connection is gone; its batches are sent again from the frontier
      this.inflight--;
      if (!err) onAck();
      this.schedulePump(0);
    });
    if (chunk.events.length > 0 && !replay) {
      // Light subscribers (fits, cautions): best effort; the data topic carries the same events reliably.
      c.publish(topics.events(this.addr.prefix, station, session), `[${chunk.events.map((e) => e.line).join(',')}]`, { qos: 0 });
    }
  }

  /** Whether everything followed so far is on the broker. */
  get idle(): boolean {
    for (const t of this.sessions.values()) {
      if (t.complete) continue;
      if (t.sent.length > 0) return false;
      if (t.follower.position < t.acked) return false;
    }
    return this.inflight === 0;
  }

  /** Seq acknowledged by the broker for a session (tests, the CLI's closing line). */
  ackedOf(session: string): number | undefined {
    return this.sessions.get(session)?.acked;
  }

  get sessionIds(): string[] {
    return [...this.sessions.keys()];
  }

  /**
   * Publishes what is still unsent for up to `flushMs`, records the frontier, says `offline` and
   * disconnects. Whatever could not be sent stays recorded as unfinished and goes out on the next start.
   */
  async stop(flushMs = 3000): Promise<{ unsent: string[] }> {
    if (this.stopped) return { unsent: [] };
    this.stopping = true;
    if (this.scanTimer) clearInterval(this.scanTimer);
    this.scan();
    // A broker that has been unreachable for a while is not waited for long (the journal keeps it all).
    const recently = this.connected || Date.now() - this.lastConnected < 5000;
    const until = Date.now() + (recently ? flushMs : Math.min(flushMs, 1000));
    const pending = () => [...this.sessions.values()].filter((t) => !t.complete && (t.sent.length > 0 || t.follower.behind()));
    // A broker that is down may come back within the wait; one that never answers costs flushMs.
    while (Date.now() < until && pending().length > 0) await new Promise((r) => setTimeout(r, 20));
    for (const t of this.sessions.values()) this.checkComplete(t);
    const unsent = pending().map((t) => t.id);
    this.stopped = true;
    if (this.pumpTimer) clearTimeout(this.pumpTimer);
    if (this.reconnectTimer) clearTimeout(this.reconnectTimer);
    for (const t of this.sessions.values()) this.save(t, true);
    const c = this.client;
    if (c && this.connected) {
      await new Promise<void>((resolve) => {
        const t = setTimeout(resolve, 1000);
        c.publish(topics.status(this.addr.prefix, this.options.station), this.statusMessage('offline'), { qos: 1, retain: true }, () => {
          clearTimeout(t);
          resolve();
        });
      });
    }
    const wasConnected = this.connected;
    this.gen++;
    await new Promise<void>((resolve) => {
      if (!c) return resolve();
      if (!wasConnected) {
        c.end(true);
        return resolve();
      }
      const t = setTimeout(resolve, 1000);
      c.end(false, {}, () => {
        clearTimeout(t);
        resolve();
      });
    });
    return { unsent };
  }
}

export type { StationStatus };
