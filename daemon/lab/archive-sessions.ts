/**
 * Sessions of the archive written back as session folders: journal.jsonl (every event in sequence
 * order, exactly as journaled) and readings.f64 (every reading), so `export`, `report` and `refit`
 * read an archived session with the same code as a folder — one way of reading a session, whatever
 * its source. The sessions are chosen by name or by the same selection `weibull` and `lot` use.
 */
import { closeSync, mkdirSync, openSync, writeSync } from 'node:fs';
import { join } from 'node:path';
import pg from 'pg';
import { JOURNAL_FILE, READINGS_FILE, RECORD_FIELDS } from '../journal/journal.js';
import { ArchiveSelectionError, type ArchiveSelection } from './archive-lot.js';
import { redactUrl } from './topics.js';

export interface MaterializedSession {
  readonly station: string;
  readonly session: string;
  readonly dir: string;
  readonly readings: number;
  readonly events: number;
}

const CHUNK = 50_000;

/**
 * Writes each selected archived session as a folder under `into` (named after the session, with the
 * station in front when two stations have sessions of the same name). `session` picks one session
 * by its name.
 */
export async function materializeSessions(url: string, selection: ArchiveSelection & { session?: string }, into: string): Promise<MaterializedSession[]> {
  const c = new pg.Client({ connectionString: url, connectionTimeoutMillis: 10_000 });
  try {
    await c.connect();
  } catch (e) {
    throw new ArchiveSelectionError(`cannot reach the archive ${redactUrl(url)}: ${(e as Error).message}`);
  }
  try {
    const s = selection;
    const time = (v: string | undefined, option: string) => {
      if (v === undefined) return null;
      if (!Number.isFinite(Date.parse(v))) throw new ArchiveSelectionError(`${option} '${v}': expected a date or time, e.g. 2026-12-01`);
      return new Date(Date.parse(v)).toISOString();
    };
    const rows = await c.query<{ id: string; station: string; session: string }>(
      `SELECT id, station, session FROM sessions x
        WHERE ($1::text IS NULL OR session = $1) AND ($2::text IS NULL OR wafer = $2) AND ($3::text IS NULL OR site = $3)
          AND ($4::text IS NULL OR device -> 'tags' ? $4
               OR EXISTS (SELECT 1 FROM events e WHERE e.session_id = x.id AND e.type = 'annotation' AND e.body -> 'tags' ? $4))
          AND ($5::timestamptz IS NULL OR started_at >= $5) AND ($6::timestamptz IS NULL OR started_at < $6)
          AND ($7::text IS NULL OR station = $7)
        ORDER BY started_at NULLS LAST, station, session`,
      [s.session ?? null, s.wafer ?? null, s.site ?? null, s.tag ?? null, time(s.from, '--from'), time(s.to, '--to'), s.station ?? null],
    );
    const names = new Map<string, number>();
    for (const r of rows.rows) names.set(r.session, (names.get(r.session) ?? 0) + 1);
    mkdirSync(into, { recursive: true });
    const out: MaterializedSession[] = [];
    for (const r of rows.rows) {
      const dir = join(into, (names.get(r.session) ?? 0) > 1 ? `${r.station}-${r.session}` : r.session);
      mkdirSync(dir, { recursive: true });
      const jfd = openSync(join(dir, JOURNAL_FILE), 'w');
      let events = 0;
      try {
        for (let after = -1; ; ) {
          const ev = await c.query<{ seq: string; body: unknown }>('SELECT seq, body FROM events WHERE session_id = $1 AND seq > $2 ORDER BY seq LIMIT $3', [
            r.id,
            after,
            CHUNK,
          ]);
          if (ev.rows.length === 0) break;
          writeSync(jfd, ev.rows.map((e) => `${JSON.stringify(e.body)}\n`).join(''));
          events += ev.rows.length;
          after = Number(ev.rows[ev.rows.length - 1].seq);
        }
      } finally {
        closeSync(jfd);
      }
      const rfd = openSync(join(dir, READINGS_FILE), 'w');
      let readings = 0;
      try {
        for (let after = -1; ; ) {
          const rd = await c.query<{ seq: string; sweep: number; k: number; t_ms: number; voltage_v: number; current_a: number; flags: number }>(
            'SELECT seq, sweep, k, t_ms, voltage_v, current_a, flags FROM readings WHERE session_id = $1 AND seq > $2 ORDER BY seq LIMIT $3',
            [r.id, after, CHUNK],
          );
          if (rd.rows.length === 0) break;
          const rec = new Float64Array(rd.rows.length * RECORD_FIELDS);
          rd.rows.forEach((x, k) => rec.set([Number(x.seq), x.sweep, x.k, x.t_ms, x.voltage_v, x.current_a, x.flags], k * RECORD_FIELDS));
          writeSync(rfd, new Uint8Array(rec.buffer));
          readings += rd.rows.length;
          after = Number(rd.rows[rd.rows.length - 1].seq);
        }
      } finally {
        closeSync(rfd);
      }
      out.push({ station: r.station, session: r.session, dir, readings, events });
    }
    return out;
  } finally {
    await c.end().catch(() => undefined);
  }
}
