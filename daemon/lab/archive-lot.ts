/**
 * The archive as a lot: the sessions a selection names (wafer, site, tag, date range, station),
 * summarised from their archived events through the same `summarizeEvents` the session folders use,
 * so `weibull` and `lot` give the same answer from either. Breakdown results come from the
 * journaled `test-result` events (the rows device-results.csv holds beside a journal).
 */
import pg from 'pg';
import type { DeviceResult } from '../../protocols/device-results.js';
import type { WireEvent } from '../../protocols/wire.js';
import { summarizeEvents, type DeviceSummary, type LotSource } from '../journal/lot.js';
import { parseMultirange } from './store.js';
import { redactUrl } from './topics.js';

export interface ArchiveSelection {
  readonly wafer?: string;
  readonly site?: string;
  /** A tag of the device, or of any note on the session. */
  readonly tag?: string;
  /** Sessions started at or after this time (ISO 8601 or a date). */
  readonly from?: string;
  /** Sessions started before this time. */
  readonly to?: string;
  readonly station?: string;
}

export class ArchiveSelectionError extends Error {
  readonly code = 'BAD_CONFIG';
}

const SUMMARY_EVENTS = ['session', 'annotation', 'settings', 'sweep-end', 'fit', 'caution', 'run-end', 'test-result'];

function checkTime(value: string | undefined, option: string): string | undefined {
  if (value === undefined) return undefined;
  if (!Number.isFinite(Date.parse(value)))
    throw new ArchiveSelectionError(`${option} '${value}': expected a date or time, e.g. 2026-12-01 or 2026-12-01T08:00:00Z`);
  return new Date(Date.parse(value)).toISOString();
}

export class ArchiveLot implements LotSource {
  readonly description: string;

  constructor(
    private readonly url: string,
    private readonly selection: ArchiveSelection,
  ) {
    const parts = Object.entries(selection)
      .filter(([, v]) => v !== undefined)
      .map(([k, v]) => `${k} ${v}`);
    this.description = `the archive${parts.length ? ` (${parts.join(', ')})` : ''}`;
    checkTime(selection.from, '--from');
    checkTime(selection.to, '--to');
  }

  async devices(): Promise<DeviceSummary[]> {
    const c = new pg.Client({ connectionString: this.url, connectionTimeoutMillis: 10_000 });
    try {
      await c.connect();
    } catch (e) {
      throw new ArchiveSelectionError(`cannot reach the archive ${redactUrl(this.url)}: ${(e as Error).message}`);
    }
    try {
      const s = this.selection;
      const sessions = await c.query<{ id: string; session: string; station: string; committed: string; known_last: string }>(
        `SELECT id, session, station, committed::text, known_last FROM sessions x
          WHERE ($1::text IS NULL OR wafer = $1) AND ($2::text IS NULL OR site = $2)
            AND ($3::text IS NULL OR device -> 'tags' ? $3
                 OR EXISTS (SELECT 1 FROM events e WHERE e.session_id = x.id AND e.type = 'annotation' AND e.body -> 'tags' ? $3))
            AND ($4::timestamptz IS NULL OR started_at >= $4) AND ($5::timestamptz IS NULL OR started_at < $5)
            AND ($6::text IS NULL OR station = $6)
          ORDER BY started_at NULLS LAST, station, session`,
        [s.wafer ?? null, s.site ?? null, s.tag ?? null, checkTime(s.from, '--from') ?? null, checkTime(s.to, '--to') ?? null, s.station ?? null],
      );
      if (sessions.rows.length === 0) return [];
      const ids = sessions.rows.map((r) => r.id);
      const ev = await c.query<{ session_id: string; body: WireEvent }>(
        `SELECT session_id, body FROM events
          WHERE session_id = ANY($1::bigint[]) AND type = ANY($2::text[]) AND (type <> 'fit' OR (body ->> 'final')::boolean)
          ORDER BY session_id, seq`,
        [ids, SUMMARY_EVENTS],
      );
      const bySession = new Map<string, WireEvent[]>();
      for (const r of ev.rows) {
        const list = bySession.get(r.session_id) ?? [];
        list.push(r.body);
        bySession.set(r.session_id, list);
      }
      return sessions.rows.map((r) => {
        const events = bySession.get(r.id) ?? [];
        const results = events
          .filter((e): e is Extract<WireEvent, { type: 'test-result' }> => e.type === 'test-result')
          .map((e) => e.result as unknown as DeviceResult);
        const problems: string[] = [];
        const committed = parseMultirange(r.committed);
        const last = Math.max(Number(r.known_last), committed.at(-1)?.[1] ?? 0);
        if (committed.length !== 1 || committed[0][0] !== 1 || committed[0][1] < last) {
          problems.push(
            `the archive holds seq ${committed.map(([a, b]) => `${a}–${b}`).join(', ') || 'nothing'} of ${last}: not all of this session is archived yet`,
          );
        }
        // Session ids are unique per station; the station is kept in the name only when it is needed.
        return summarizeEvents(r.session, null, events, results, problems);
      });
    } finally {
      await c.end().catch(() => undefined);
    }
  }
}
