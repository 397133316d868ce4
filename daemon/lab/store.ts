/**
 * Writes journal batches into PostgreSQL, idempotently: every batch is one transaction keyed by
 * (session, seq), so a batch delivered twice — after a restart of the archive, the broker or the
 * station — changes nothing the second time, and one that arrives in pieces is stitched together.
 *
 * Readings go in by binary COPY. The session row is locked first and holds the set of sequence
 * numbers already archived (`committed`, a multirange): a batch entirely inside it is skipped; a
 * batch that does not touch it is copied straight into `readings`; one that overlaps goes through a
 * staging table and INSERT … ON CONFLICT DO NOTHING.
 */
import { Readable } from 'node:stream';
import { pipeline } from 'node:stream/promises';
import pg from 'pg';
import { from as copyFrom } from 'pg-copy-streams';
import { RECORD_BYTES } from '../journal/journal.js';
import type { BatchHeader } from './batch.js';
import { migrate } from './migrate.js';
import { redactUrl } from './topics.js';

export interface WriteResult {
  readonly sessionId: number;
  /** The whole batch was archived before. */
  readonly duplicate: boolean;
  readonly readingsInserted: number;
  readonly eventsInserted: number;
  /** Sequence ranges archived for the session after this batch, [from, to] inclusive. */
  readonly committed: readonly [number, number][];
  /** Wall-clock ms of the session's start, when known (for lag figures). */
  readonly startedAt: number | null;
}

const PGCOPY_HEADER = Buffer.from('PGCOPY\n\xff\r\n\0\0\0\0\0\0\0\0\0', 'latin1');
const ROW_BYTES = 84;

/** Journal records (56 bytes, little-endian doubles) as binary COPY rows of `readings`. */
export function copyRows(sessionId: number, records: Buffer, n: number): Buffer {
  const out = Buffer.allocUnsafe(PGCOPY_HEADER.length + n * ROW_BYTES + 2);
  PGCOPY_HEADER.copy(out, 0);
  let o = PGCOPY_HEADER.length;
  const sidHi = Math.floor(sessionId / 2 ** 32);
  const sidLo = sessionId >>> 0;
  for (let r = 0; r < n; r++) {
    const b = r * RECORD_BYTES;
    const seq = records.readDoubleLE(b);
    out.writeInt16BE(8, o);
    out.writeInt32BE(8, o + 2);
    out.writeUInt32BE(sidHi, o + 6);
    out.writeUInt32BE(sidLo, o + 10);
    out.writeInt32BE(8, o + 14);
    out.writeUInt32BE(Math.floor(seq / 2 ** 32), o + 18);
    out.writeUInt32BE(seq >>> 0, o + 22);
    out.writeInt32BE(4, o + 26);
    out.writeInt32BE(records.readDoubleLE(b + 8), o + 30);
    out.writeInt32BE(4, o + 34);
    out.writeInt32BE(records.readDoubleLE(b + 16), o + 38);
    // t, v, i: the same eight bytes, big-endian (every bit kept, NaN payloads too).
    let p = o + 42;
    for (let f = 24; f <= 40; f += 8) {
      out.writeInt32BE(8, p);
      for (let j = 0; j < 8; j++) out[p + 4 + j] = records[b + f + 7 - j];
      p += 12;
    }
    out.writeInt32BE(2, p);
    out.writeInt16BE(records.readDoubleLE(b + 48), p + 4);
    o += ROW_BYTES;
  }
  out.writeInt16BE(-1, o);
  return out;
}

/** '{[1,501),[601,701)}' → [[1,500],[601,700]] */
export function parseMultirange(text: string): [number, number][] {
  const out: [number, number][] = [];
  for (const m of text.matchAll(/\[(\d+),(\d+)\)/g)) out.push([Number(m[1]), Number(m[2]) - 1]);
  return out;
}

type Ev = Record<string, unknown> & { seq: number; t: number; type: string };

export class ArchiveStore {
  private constructor(readonly pool: pg.Pool) {}

  /** Connects (a small pool), applies pending schema migrations. */
  static async open(url: string, log: (line: string) => void = () => undefined): Promise<ArchiveStore> {
    const pool = new pg.Pool({ connectionString: url, max: 3, connectionTimeoutMillis: 10_000, idleTimeoutMillis: 30_000 });
    // A server restart kills idle clients; without this handler that would end the process.
    pool.on('error', (e) => log(`archive: database connection lost (${e.message}); reconnecting on the next write`));
    let client: pg.PoolClient;
    try {
      client = await pool.connect();
    } catch (e) {
      await pool.end().catch(() => undefined);
      throw new Error(`cannot reach the database ${redactUrl(url)}: ${(e as Error).message}`);
    }
    try {
      const applied = await migrate(client);
      if (applied.length > 0) log(`archive: schema ${applied.join(', ')} applied`);
    } finally {
      client.release();
    }
    return new ArchiveStore(pool);
  }

  async close(): Promise<void> {
    await this.pool.end();
  }

  /** Writes one batch in one transaction (see the file comment). */
  async writeBatch(h: BatchHeader, records: Buffer, forceStaging = false): Promise<WriteResult> {
    const c = await this.pool.connect();
    let released = false;
    try {
      await c.query('BEGIN');
      // Creates the session row or locks the existing one (ON CONFLICT DO UPDATE takes the row
      // lock), and says whether this batch is archived already — one round trip.
      const s = await c.query<{ id: string; contained: boolean; overlaps: boolean; started: number | null }>(
        `INSERT INTO sessions AS x (station, session) VALUES ($1, $2)
           ON CONFLICT (station, session) DO UPDATE SET updated_at = x.updated_at
         RETURNING id, committed @> int8range($3, $4, '[]') AS contained, committed && int8range($3, $4, '[]') AS overlaps,
                   extract(epoch FROM started_at) * 1000 AS started`,
        [h.station, h.session, h.from, h.to],
      );
      const id = Number(s.rows[0].id);
      let startedAt = s.rows[0].started === null ? null : Number(s.rows[0].started);
      if (s.rows[0].contained) {
        const r = await c.query<{ committed: string }>('SELECT committed::text FROM sessions WHERE id = $1', [id]);
        await c.query('COMMIT');
        return { sessionId: id, duplicate: true, readingsInserted: 0, eventsInserted: 0, committed: parseMultirange(r.rows[0].committed), startedAt };
      }
      let readingsInserted = 0;
      if (h.readings > 0) {
        const rows = copyRows(id, records, h.readings);
        if (!s.rows[0].overlaps && !forceStaging) {
          const stream = c.query(copyFrom('COPY readings FROM STDIN (FORMAT binary)'));
          await pipeline(Readable.from([rows]), stream);
          readingsInserted = h.readings;
        } else {
          await c.query('CREATE TEMP TABLE IF NOT EXISTS staging_readings (LIKE readings) ON COMMIT DELETE ROWS');
          await pipeline(Readable.from([rows]), c.query(copyFrom('COPY staging_readings FROM STDIN (FORMAT binary)')));
          const r = await c.query('INSERT INTO readings SELECT * FROM staging_readings ON CONFLICT (session_id, seq) DO NOTHING');
          readingsInserted = r.rowCount ?? 0;
        }
      }
      let eventsInserted = 0;
      if (h.events.length > 0) {
        const r = await c.query<{ seq: string }>(
          `INSERT INTO events (session_id, seq, t_ms, type, sweep, body)
             SELECT $1, (e ->> 'seq')::bigint, (e ->> 't')::float8, e ->> 'type', (e ->> 'sweep')::integer, e
               FROM jsonb_array_elements($2::jsonb) e
             ON CONFLICT (session_id, seq) DO NOTHING RETURNING seq`,
          [id, JSON.stringify(h.events)],
        );
        eventsInserted = r.rowCount ?? 0;
        const fresh = new Set(r.rows.map((x) => Number(x.seq)));
        for (const e of h.events as unknown as Ev[]) {
          if (!fresh.has(e.seq)) continue;
          const st = await this.derive(c, id, e);
          if (st !== undefined) startedAt = st;
        }
      }
      const u = await c.query<{ committed: string }>(
        `UPDATE sessions SET committed = committed + int8multirange(int8range($2, $3, '[]')), readings = readings + $4,
                known_last = greatest(known_last, $3), updated_at = now()
          WHERE id = $1 RETURNING committed::text`,
        [id, h.from, h.to, readingsInserted],
      );
      await c.query('COMMIT');
      return { sessionId: id, duplicate: false, readingsInserted, eventsInserted, committed: parseMultirange(u.rows[0].committed), startedAt };
    } catch (e) {
      await c.query('ROLLBACK').catch(() => undefined);
      // Readings archived by another writer between the check and the COPY (an import running
      // beside the archive cannot do this — the session row is locked — but be safe): retry staged.
      if ((e as { code?: string }).code === '23505' && !forceStaging) {
        c.release();
        released = true;
        return this.writeBatch(h, records, true);
      }
      if ((e as { code?: string }).code !== undefined) {
        c.release();
        released = true;
      } else {
        c.release(true); // a broken connection is not reused
        released = true;
      }
      throw e;
    } finally {
      if (!released) c.release();
    }
  }

  /** Rows of the plain tables that follow from one event. Returns the session start (ms) when it is the session event. */
  private async derive(c: pg.PoolClient, id: number, e: Ev): Promise<number | undefined> {
    const j = (v: unknown) => (v === undefined ? null : JSON.stringify(v));
    switch (e.type) {
      case 'session': {
        await c.query(
          // Corrections already archived (annotations that arrived first) keep precedence.
          `UPDATE sessions SET started_at = $2, source = $3, instrument = $4, plan = $5, analysis = $6, drift = $7, limits = $8,
                  device = CASE WHEN $9::jsonb IS NULL AND device IS NULL THEN NULL ELSE coalesce($9::jsonb, '{}') || coalesce(device, '{}') END WHERE id = $1`,
          [id, e.startedAt ?? null, j(e.source), (e.instrument as string) ?? null, j(e.plan), j(e.analysis), j(e.drift), j(e.limits), j(e.device)],
        );
        const t = Date.parse(String(e.startedAt));
        return Number.isFinite(t) ? t : undefined;
      }
      case 'sweep-start':
        await c.query(
          `INSERT INTO sweeps (session_id, sweep, label, planned, start_seq) VALUES ($1, $2, $3, $4, $5)
             ON CONFLICT (session_id, sweep) DO UPDATE SET label = EXCLUDED.label, planned = EXCLUDED.planned, start_seq = EXCLUDED.start_seq`,
          [id, e.sweep, e.label ?? null, e.planned ?? null, e.seq],
        );
        return undefined;
      case 'sweep-end':
        await c.query(
          `INSERT INTO sweeps (session_id, sweep, points, complete, note, end_seq) VALUES ($1, $2, $3, $4, $5, $6)
             ON CONFLICT (session_id, sweep) DO UPDATE SET points = EXCLUDED.points, complete = EXCLUDED.complete, note = EXCLUDED.note, end_seq = EXCLUDED.end_seq`,
          [id, e.sweep, e.points ?? null, e.complete ?? null, e.note ?? null, e.seq],
        );
        return undefined;
      case 'fit': {
        if (!e.final) return undefined;
        const f = e.fit as {
          model: string;
          plausible: boolean;
          line: Record<string, number>;
          window: { from: number; to: number };
          parameters: unknown;
          warnings: unknown;
        } | null;
        await c.query(
          `INSERT INTO fits (session_id, seq, sweep, model, plausible, slope, slope_se, intercept, intercept_se, r2, n, window_from, window_to, parameters, warnings, error)
             VALUES ($1, $2, $3, $4, $5, $6, $7, $8, $9, $10, $11, $12, $13, $14, $15, $16) ON CONFLICT (session_id, seq) DO NOTHING`,
          [
            id,
            e.seq,
            e.sweep,
            f?.model ?? null,
            f?.plausible ?? null,
            f?.line.slope ?? null,
            f?.line.slopeStdErr ?? null,
            f?.line.intercept ?? null,
            f?.line.interceptStdErr ?? null,
            f?.line.r2 ?? null,
            f?.line.n ?? null,
            f?.window.from ?? null,
            f?.window.to ?? null,
            j(f?.parameters ?? null),
            j(f?.warnings ?? null),
            (e.error as string) ?? null,
          ],
        );
        return undefined;
      }
      case 'annotation':
        // A note may correct the device's identity (later values win, field by field).
        if (e.device !== undefined && e.device !== null && typeof e.device === 'object') {
          await c.query("UPDATE sessions SET device = coalesce(device, '{}'::jsonb) || $2::jsonb WHERE id = $1", [id, JSON.stringify(e.device)]);
        }
        return undefined;
      case 'run-end':
        await c.query('UPDATE sessions SET outcome = $2, reason = $3, sweeps = $4 WHERE id = $1', [id, e.outcome, e.reason, e.sweeps ?? null]);
        return undefined;
      default:
        return undefined;
    }
  }

  /** Records a station's status message and the sequence numbers it says the broker has. */
  async noteStatus(status: { station: string; name?: string; sessions?: readonly { id: string; acked: number }[] }, raw: string): Promise<void> {
    await this.pool.query(
      `INSERT INTO stations (station, name, last_status) VALUES ($1, $2, $3)
         ON CONFLICT (station) DO UPDATE SET name = EXCLUDED.name, last_status = EXCLUDED.last_status, last_seen = now()`,
      [status.station, status.name ?? null, raw],
    );
    for (const s of status.sessions ?? []) {
      if (typeof s.id !== 'string' || !(s.acked > 0)) continue;
      await this.pool.query('UPDATE sessions SET known_last = greatest(known_last, $3) WHERE station = $1 AND session = $2', [status.station, s.id, s.acked]);
    }
  }

  /** Sessions whose archived sequence numbers have gaps, or end short of what the station published. */
  async incomplete(): Promise<{ station: string; session: string; committed: [number, number][]; knownLast: number; startedAt: number | null }[]> {
    const r = await this.pool.query<{ station: string; session: string; committed: string; known_last: string; started: number | null }>(
      `SELECT station, session, committed::text, known_last, extract(epoch FROM started_at) * 1000 AS started FROM sessions
        WHERE NOT (committed @> int8range(1, greatest(known_last, coalesce(upper(committed) - 1, 0)) + 1))`,
    );
    return r.rows.map((x) => ({
      station: x.station,
      session: x.session,
      committed: parseMultirange(x.committed),
      knownLast: Number(x.known_last),
      startedAt: x.started === null ? null : Number(x.started),
    }));
  }
}
