/**
 * The archive: subscribes to every station's journal batches with a persistent MQTT session and
 * writes them into PostgreSQL (store.ts). A batch is acknowledged to the broker only after its
 * transaction has committed, so a killed archive gets the unacknowledged batches again on its
 * next connection; the store ignores what it already has.
 *
 * What a persistent session cannot cover — a broker that restarted and forgot its queues — shows
 * up as a gap in a session's archived sequence numbers (or as fewer than the station's status says
 * the broker acknowledged). After a short grace the archive asks that station to publish the
 * missing ranges again (PREFIX/station/STATION/replay); the station reads them from its journal.
 */
import mqtt, { type MqttClient } from 'mqtt';
import { RECORD_BYTES } from '../journal/journal.js';
import { BatchError, decodeBatch } from './batch.js';
import { ArchiveStore } from './store.js';
import { parseBrokerUrl, parseTopic, redactUrl, scrub, topics, type BrokerAddress } from './topics.js';

export interface ArchiveOptions {
  readonly mqtt: string;
  readonly postgres: string;
  /** MQTT client id of the persistent session (one per archive process; default plumbline-archive). */
  readonly clientId?: string;
  readonly log?: (line: string) => void;
  /** How long a gap may stand before its station is asked to publish it again, ms (default 2000). */
  readonly replayAfterMs?: number;
}

export interface ArchiveStats {
  batches: number;
  duplicates: number;
  readings: number;
  events: number;
  replayRequests: number;
  badMessages: number;
  /** Journal-to-database lag of recent batches (ms): wall time of commit minus the last reading's time. */
  readonly lags: number[];
  /** Broker-to-database part of it (ms): commit minus the time the station sent the batch. */
  readonly transits: number[];
}

interface Progress {
  readonly station: string;
  readonly session: string;
  committed: [number, number][];
  knownLast: number;
  startedAt: number | null;
  gapSince: number | undefined;
  lastRequest: number;
}

/** Sequence ranges in 1..last not covered by `committed` (sorted, disjoint). */
export function missingRanges(committed: readonly [number, number][], last: number): [number, number][] {
  const out: [number, number][] = [];
  let next = 1;
  for (const [a, b] of committed) {
    if (a > next) out.push([next, Math.min(a - 1, last)]);
    next = Math.max(next, b + 1);
    if (next > last) break;
  }
  if (next <= last) out.push([next, last]);
  return out.filter(([a, b]) => a <= b);
}

export class Archive {
  readonly addr: BrokerAddress;
  private client: MqttClient | undefined;
  private store: ArchiveStore | undefined;
  private readonly progress = new Map<string, Progress>();
  private gapTimer: NodeJS.Timeout | undefined;
  private closed = false;
  readonly stats: ArchiveStats = { batches: 0, duplicates: 0, readings: 0, events: 0, replayRequests: 0, badMessages: 0, lags: [], transits: [] };
  private readonly secrets: (string | undefined)[];
  /** When the last batch was written, and how long it had been on its way (ms): a backlog shows here. */
  private lastBatchAt = 0;
  private lastTransit = 0;

  constructor(readonly options: ArchiveOptions) {
    this.addr = parseBrokerUrl(options.mqtt, '--mqtt');
    let pgPassword: string | undefined;
    try {
      pgPassword = decodeURIComponent(new URL(options.postgres).password) || undefined;
    } catch {
      pgPassword = undefined;
    }
    this.secrets = [this.addr.password, pgPassword];
  }

  private log(line: string): void {
    this.options.log?.(scrub(line, this.secrets));
  }

  /** Opens the database (migrating it), then subscribes. Resolves once subscribed. */
  async start(): Promise<void> {
    this.store = await ArchiveStore.open(this.options.postgres, (l) => this.log(l));
    for (const s of await this.store.incomplete()) {
      this.progress.set(`${s.station}/${s.session}`, {
        station: s.station,
        session: s.session,
        committed: s.committed,
        knownLast: s.knownLast,
        startedAt: s.startedAt,
        gapSince: undefined,
        lastRequest: 0,
      });
    }
    const { prefix } = this.addr;
    const clientId = this.options.clientId ?? 'plumbline-archive';
    const c = mqtt.connect(this.addr.server, {
      clientId,
      username: this.addr.username,
      password: this.addr.password,
      clean: false,
      protocolVersion: 5,
      // MQTT 5 keeps no session unless asked to (the default expiry is 0): keep it for a week.
      properties: { sessionExpiryInterval: 7 * 24 * 3600, receiveMaximum: 32 },
      reconnectPeriod: 1000,
      connectTimeout: 10_000,
      keepalive: 60,
      resubscribe: true,
      reconnectOnConnackError: true,
    });
    this.client = c;
    c.handleMessage = (packet, callback) => {
      void this.onMessage(packet.topic, packet.payload as Buffer).then(
        () => callback(),
        (e) => callback(e as Error),
      );
    };
    c.on('error', (e) => this.log(`archive: broker ${this.addr.display}: ${e.message}`));
    let lostLogged = false;
    c.on('close', () => {
      if (!this.closed && !lostLogged)
        this.log(`archive: lost the broker ${this.addr.display}; reconnecting (unacknowledged batches stay queued for this archive)`);
      lostLogged = true;
    });
    const subscribed = new Promise<void>((resolve, reject) => {
      let first = true;
      c.on('connect', (ack) => {
        lostLogged = false;
        this.log(`archive: connected to ${this.addr.display} as '${clientId}'${ack.sessionPresent ? ' (session resumed)' : ''}`);
        if (!ack.sessionPresent) {
          c.subscribe([topics.allData(prefix), topics.allStatus(prefix)], { qos: 1 }, (err) => {
            if (err) {
              this.log(`archive: subscribe failed: ${err.message}`);
              if (first) reject(err);
            } else if (first) resolve();
            first = false;
          });
          // The broker forgot this archive: anything published meanwhile may be missing; gaps are
          // found against the stations' statuses and asked for again.
          for (const p of this.progress.values()) p.gapSince = p.gapSince ?? Date.now();
        } else if (first) {
          first = false;
          resolve();
        }
      });
    });
    this.gapTimer = setInterval(() => this.checkGaps(), 500);
    await subscribed;
  }

  private key(station: string, session: string): string {
    return `${station}/${session}`;
  }

  private async onMessage(topic: string, payload: Buffer): Promise<void> {
    const t = parseTopic(this.addr.prefix, topic);
    if (!t) return;
    if (t.kind === 'status') return this.onStatus(t.station, payload);
    if (t.kind !== 'data') return;
    let batch: ReturnType<typeof decodeBatch>;
    try {
      batch = decodeBatch(payload);
      if (batch.header.station !== t.station || batch.header.session !== t.session)
        throw new BatchError(`batch names ${batch.header.station}/${batch.header.session} but came on ${topic}`);
    } catch (e) {
      this.stats.badMessages++;
      this.log(`archive: skipped a message on ${topic}: ${(e as Error).message}`);
      return;
    }
    const { header, records } = batch;
    // Retry until the database takes it: the broker keeps the batch (and those behind it) meanwhile.
    for (let attempt = 0; ; attempt++) {
      if (this.closed) throw new Error('archive closing');
      try {
        const r = await this.store!.writeBatch(header, records);
        this.lastBatchAt = Date.now();
        this.lastTransit = this.lastBatchAt - header.sentAt;
        this.stats.batches++;
        if (r.duplicate) this.stats.duplicates++;
        this.stats.readings += r.readingsInserted;
        this.stats.events += r.eventsInserted;
        if (r.startedAt !== null && header.readings > 0 && !header.replay) {
          const tLast = records.readDoubleLE((header.readings - 1) * RECORD_BYTES + 24);
          this.stats.lags.push(Date.now() - (r.startedAt + tLast));
          this.stats.transits.push(this.lastTransit);
          if (this.stats.lags.length > 100_000) {
            this.stats.lags.splice(0, 50_000);
            this.stats.transits.splice(0, 50_000);
          }
        }
        const k = this.key(header.station, header.session);
        const p = this.progress.get(k) ?? {
          station: header.station,
          session: header.session,
          committed: [],
          knownLast: 0,
          startedAt: null,
          gapSince: undefined,
          lastRequest: 0,
        };
        p.committed = [...r.committed];
        p.knownLast = Math.max(p.knownLast, header.to);
        p.startedAt = r.startedAt;
        this.progress.set(k, p);
        return;
      } catch (e) {
        if (attempt === 0 || attempt % 20 === 0)
          this.log(`archive: cannot write ${header.station}/${header.session} seq ${header.from}–${header.to} (${redactUrl((e as Error).message)}); retrying`);
        await new Promise((r) => setTimeout(r, Math.min(200 * 2 ** attempt, 5000)));
      }
    }
  }

  private async onStatus(station: string, payload: Buffer): Promise<void> {
    let s: { station?: unknown; name?: string; sessions?: { id: string; acked: number }[] };
    try {
      s = JSON.parse(String(payload));
    } catch {
      this.stats.badMessages++;
      return;
    }
    if (s.station !== station) return;
    try {
      await this.store!.noteStatus({ station, name: s.name, sessions: s.sessions }, String(payload));
    } catch (e) {
      this.log(`archive: cannot record the status of ${station}: ${(e as Error).message}`);
    }
    for (const x of s.sessions ?? []) {
      if (typeof x?.id !== 'string' || !(x.acked > 0)) continue;
      const k = this.key(station, x.id);
      const p = this.progress.get(k) ?? { station, session: x.id, committed: [], knownLast: 0, startedAt: null, gapSince: undefined, lastRequest: 0 };
      p.knownLast = Math.max(p.knownLast, x.acked);
      this.progress.set(k, p);
    }
  }

  /** Asks stations for what has stood missing longer than the grace. */
  private checkGaps(): void {
    const c = this.client;
    if (!c?.connected) return;
    const now = Date.now();
    const grace = this.options.replayAfterMs ?? 2000;
    // A gap below the highest archived seq is a real loss (a session's batches arrive in order).
    // One at the tail may just be waiting in the broker's queue while a backlog is worked through:
    // it is asked for only once the archive has caught up.
    const backlog = now - this.lastBatchAt < grace && this.lastTransit > 500;
    for (const p of this.progress.values()) {
      const top = p.committed.length > 0 ? p.committed[p.committed.length - 1][1] : 0;
      const missing = missingRanges(p.committed, backlog ? top : p.knownLast);
      if (missing.length === 0) {
        if (missingRanges(p.committed, p.knownLast).length === 0) p.gapSince = undefined;
        continue;
      }
      p.gapSince ??= now;
      if (now - p.gapSince < grace || now - p.lastRequest < Math.max(grace, 3000)) continue;
      p.lastRequest = now;
      this.stats.replayRequests++;
      const ranges = missing.slice(0, 32);
      this.log(
        `archive: ${p.station}/${p.session} lacks seq ${ranges.map(([a, b]) => (a === b ? `${a}` : `${a}–${b}`)).join(', ')}; asking the station to publish them again`,
      );
      c.publish(topics.replay(this.addr.prefix, p.station), JSON.stringify({ session: p.session, ranges }), { qos: 1 });
    }
  }

  /** Sessions the archive has seen, with what is archived and what is known to exist. */
  get sessions(): { station: string; session: string; committed: [number, number][]; knownLast: number }[] {
    return [...this.progress.values()].map((p) => ({ station: p.station, session: p.session, committed: p.committed, knownLast: p.knownLast }));
  }

  async close(): Promise<void> {
    this.closed = true;
    if (this.gapTimer) clearInterval(this.gapTimer);
    await this.client?.endAsync(true).catch(() => undefined);
    await this.store?.close().catch(() => undefined);
  }
}
