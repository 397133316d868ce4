/**
 * Loads existing session folders into the archive, through the same idempotent writer the live
 * archive uses: importing a session twice, or one the archive already received over the broker
 * (with the same station id), adds nothing the second time; a session still being written is
 * imported as far as it goes and can be imported again later for the rest.
 */
import { existsSync } from 'node:fs';
import { basename, dirname, join, resolve } from 'node:path';
import { JOURNAL_FILE, JournalError } from '../journal/journal.js';
import { listSessions } from '../journal/reader.js';
import { JournalFollower, sessionLive } from './follower.js';
import type { ArchiveStore } from './store.js';
import { checkName, defaultStationId } from './topics.js';

export interface ImportResult {
  readonly dir: string;
  readonly station: string;
  readonly session: string;
  readonly readings: number;
  readonly readingsInserted: number;
  readonly eventsInserted: number;
  readonly lastSeq: number;
  readonly holes: number;
  readonly live: boolean;
}

/** Session folders named directly, or every session under a data folder. */
export function expandSessionDirs(paths: readonly string[]): string[] {
  const out: string[] = [];
  for (const p of paths) {
    const abs = resolve(p);
    if (existsSync(join(abs, JOURNAL_FILE))) out.push(abs);
    else {
      const inside = listSessions(abs);
      if (inside.length === 0) throw new JournalError(`${p}: neither a session folder (no ${JOURNAL_FILE}) nor a data folder holding sessions`);
      out.push(...inside.reverse().map((id) => join(abs, id)));
    }
  }
  return out;
}

export async function importSession(store: ArchiveStore, dir: string, station?: string): Promise<ImportResult> {
  const session = checkName(basename(dir), 'session folder name');
  const st = checkName(station ?? defaultStationId(dirname(dir)), 'station id');
  const live = sessionLive(dir);
  const f = new JournalFollower(dir, 0, 16384);
  let readings = 0;
  let readingsInserted = 0;
  let eventsInserted = 0;
  let holes = 0;
  for (let c = f.poll(!live); c; c = f.poll(!live)) {
    const r = await store.writeBatch(
      {
        v: 1,
        station: st,
        session,
        from: c.from,
        to: c.to,
        readings: c.readings,
        events: c.events.map((e) => e.event) as never,
        ...(c.holes.length ? { holes: c.holes } : {}),
        sentAt: Date.now(),
      },
      c.records,
    );
    readings += c.readings;
    readingsInserted += r.readingsInserted;
    eventsInserted += r.eventsInserted;
    holes += c.holes.length;
  }
  return { dir, station: st, session, readings, readingsInserted, eventsInserted, lastSeq: f.position, holes, live };
}
