/**
 * Schema migrations for the archive: daemon/lab/schema/NNN-name.sql, applied in order, each in its
 * own transaction, recorded in plumbline_schema. An advisory lock keeps two archive processes
 * starting at once from applying the same file twice.
 */
import { readdirSync, readFileSync } from 'node:fs';
import { join } from 'node:path';
import type pg from 'pg';
import { projectRoot } from '../../protocols/project-root.js';

export const SCHEMA_DIR = join(projectRoot(), 'daemon', 'lab', 'schema');
const LOCK_KEY = 0x706c6d62; // 'plmb'

export interface Migration {
  readonly version: number;
  readonly name: string;
  readonly file: string;
}

export function migrations(dir = SCHEMA_DIR): Migration[] {
  return readdirSync(dir)
    .map((f) => /^(\d{3})-([a-z0-9-]+)\.sql$/.exec(f))
    .filter((m): m is RegExpExecArray => m !== null)
    .map((m) => ({ version: Number(m[1]), name: m[2], file: join(dir, m[0]) }))
    .sort((a, b) => a.version - b.version);
}

/** Brings the database up to the newest schema; returns the versions applied now. */
export async function migrate(client: pg.ClientBase, dir = SCHEMA_DIR): Promise<number[]> {
  await client.query('SELECT pg_advisory_lock($1)', [LOCK_KEY]);
  try {
    await client.query(
      'CREATE TABLE IF NOT EXISTS plumbline_schema (version integer PRIMARY KEY, name text NOT NULL, applied_at timestamptz NOT NULL DEFAULT now())',
    );
    const done = new Set((await client.query<{ version: number }>('SELECT version FROM plumbline_schema')).rows.map((r) => r.version));
    const applied: number[] = [];
    for (const m of migrations(dir)) {
      if (done.has(m.version)) continue;
      await client.query('BEGIN');
      try {
        await client.query(readFileSync(m.file, 'utf8'));
        await client.query('INSERT INTO plumbline_schema (version, name) VALUES ($1, $2)', [m.version, m.name]);
        await client.query('COMMIT');
      } catch (e) {
        await client.query('ROLLBACK');
        throw new Error(`schema ${m.version}-${m.name}: ${(e as Error).message}`);
      }
      applied.push(m.version);
    }
    return applied;
  } finally {
    await client.query('SELECT pg_advisory_unlock($1)', [LOCK_KEY]);
  }
}
