/**
 * The lab path's figures: ten fast simulated stations (`plumbline run --fast --publish`, separate
 * processes) into one private Mosquitto broker, archived into a throwaway PostgreSQL.
 *  - live: readings per second from the first station's start until every reading is in the
 *    database, and the archive lag (a reading's time on its station to its transaction's commit);
 *  - catch-up: the same journals published again (as new stations) as fast as the path takes them —
 *    the pipeline's own capacity, with acquisition out of the way;
 *  - bare COPY: the same rows by binary COPY straight into a table of the same shape;
 *  - and the station's run time with publishing to a broker that is down, against none at all.
 */
import { spawn } from 'node:child_process';
import { cpSync, mkdirSync, mkdtempSync, readdirSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { Readable } from 'node:stream';
import { pipeline } from 'node:stream/promises';
import pg from 'pg';
import { from as copyFrom } from 'pg-copy-streams';
import { Archive } from '../../daemon/lab/archive.js';
import { JournalFollower } from '../../daemon/lab/follower.js';
import { scanJournal } from '../../daemon/journal/reader.js';
import { startPublishing } from '../../daemon/lab/publishing.js';
import { copyRows } from '../../daemon/lab/store.js';
import { projectRoot } from '../../protocols/project-root.js';
import { freePort, startMosquitto, startPostgres } from '../helpers/services.js';
import { report } from './timing.js';

const CLI = join(projectRoot(), 'dist', 'daemon', 'cli.js');
const STATIONS = 10;

/**
 * Runs the CLI; `nice` lowers its CPU priority — the simulated stations stand in for other machines
 * of a lab, so they should not take the archive's CPU on this one.
 */
function run(args: string[], nice = false): Promise<number> {
  return new Promise((resolve, reject) => {
    const p = nice
      ? spawn('nice', ['-n', '10', process.execPath, CLI, ...args], { stdio: ['ignore', 'ignore', 'pipe'] })
      : spawn(process.execPath, [CLI, ...args], { stdio: ['ignore', 'ignore', 'pipe'] });
    let err = '';
    p.stderr.on('data', (d) => (err += String(d)));
    p.on('exit', (code) => (code === 0 ? resolve(code) : reject(new Error(`plumbline ${args[0]} exited ${code}: ${err.slice(-400)}`))));
  });
}

function percentile(xs: number[], p: number): number {
  const s = [...xs].sort((a, b) => a - b);
  return s[Math.min(s.length - 1, Math.floor(p * s.length))];
}

/** Waits until the archive has written `target` readings; returns when the first and the last of them were committed (ms). */
async function archived(archive: Archive, target: number, timeoutMs: number, what: string): Promise<{ first: number; last: number }> {
  const start = archive.stats.readings;
  const end = Date.now() + timeoutMs;
  let first = Number.NaN;
  while (archive.stats.readings < target) {
    if (Number.isNaN(first) && archive.stats.readings > start) first = performance.now();
    if (Date.now() > end) throw new Error(`timed out: ${what} (${archive.stats.readings} of ${target})`);
    await new Promise((r) => setTimeout(r, 5));
  }
  return { first, last: performance.now() };
}

export async function benchLab(): Promise<void> {
  const [broker, db] = await Promise.all([startMosquitto(), startPostgres()]);
  const root = mkdtempSync(join(tmpdir(), 'plumbline-bench-lab-'));
  const url = `${broker.url}/bench`;
  const archive = new Archive({ mqtt: url, postgres: db.url, clientId: 'bench-archive' });
  const client = new pg.Client({ connectionString: db.url });
  try {
    await archive.start();
    await client.connect();
    const count = async () => Number((await client.query('SELECT count(*) AS n FROM readings')).rows[0].n);
    const plan = join(root, 'plan.json');
    writeFileSync(plan, JSON.stringify({ start: 0, stop: 9, points: 1000, compliance: 1e-3, repeat: 20 }));

    // Live: ten stations at once.
    const t0 = performance.now();
    await Promise.all(
      Array.from({ length: STATIONS }, (_, k) =>
        run(['run', '--scenario', 'oxide-fn', '--fast', '--plan', plan, '--data', join(root, `st-${k}`), '--publish', url, '--station', `st-${k}`], true),
      ),
    );
    const journals = Array.from({ length: STATIONS }, (_, k) => join(root, `st-${k}`, readdirSync(join(root, `st-${k}`)).find((d) => /^\d{8}-/.test(d))!));
    let total = 0;
    for (const dir of journals) {
      const f = new JournalFollower(dir, 0, 16384);
      for (let c = f.poll(true); c; c = f.poll(true)) total += c.readings;
    }
    await archived(archive, total, 120_000, 'live readings archived');
    const live = total / ((performance.now() - t0) / 1000);
    if ((await count()) !== total) throw new Error('live pass: the table does not hold every reading once');
    const lags = archive.stats.lags.slice();
    report(`lab: live, ${STATIONS} stations → broker → PostgreSQL`, live, 'readings/s');
    report('lab: archive lag p50 (station journal → committed row)', percentile(lags, 0.5), 'ms');
    report('lab: archive lag p99', percentile(lags, 0.99), 'ms');
    report('lab: of which broker → committed, p50', percentile(archive.stats.transits, 0.5), 'ms');
    report('lab: of which broker → committed, p99', percentile(archive.stats.transits, 0.99), 'ms');

    // Catch-up: the same journals published again as new stations, as fast as the path goes.
    // Ten publishers started and connected first (their start-up is not the path's speed), then
    // copies of the session folders (without their publishing records, so they count as new)
    // appear in their data folders.
    const pubs = Array.from({ length: STATIONS }, (_, k) => {
      mkdirSync(join(root, `again-${k}`));
      return startPublishing({ url, station: `again-${k}`, name: `again-${k}`, dataDir: join(root, `again-${k}`), log: () => undefined });
    });
    await new Promise((r) => setTimeout(r, 3000));
    for (let k = 0; k < STATIONS; k++)
      cpSync(join(root, `st-${k}`), join(root, `again-${k}`), { recursive: true, filter: (f) => !f.endsWith('published.json') });
    // Timed from the first batch committed to the last (the publishers' start-up is not the path's speed).
    const span = await archived(archive, 2 * total, 180_000, 'catch-up archived');
    const catchUp = total / ((span.last - span.first) / 1000);
    if ((await count()) !== 2 * total) throw new Error('catch-up pass: the table does not hold every reading once');
    await Promise.all(pubs.map((p) => p.stop(1000)));
    report(`lab: catch-up, ${STATIONS} journals → broker → PostgreSQL`, catchUp, 'readings/s');

    // Bare COPY of the same rows into a table of the same shape (primary key included).
    await client.query('CREATE TABLE readings_bare (LIKE readings INCLUDING ALL)');
    const t2 = performance.now();
    let sid = 1;
    for (const dir of journals) {
      const f = new JournalFollower(dir, 0, 16384);
      for (let c = f.poll(true); c; c = f.poll(true)) {
        if (c.readings === 0) continue;
        await client.query('BEGIN');
        await pipeline(Readable.from([copyRows(sid, c.records, c.readings)]), client.query(copyFrom('COPY readings_bare FROM STDIN (FORMAT binary)')));
        await client.query('COMMIT');
      }
      sid++;
    }
    const bare = total / ((performance.now() - t2) / 1000);
    report('lab: bare binary COPY of the same rows', bare, 'readings/s');
    report('lab: catch-up as a share of bare COPY', (100 * catchUp) / bare, '%', '≥ 50 %');
    report('lab: live as a share of bare COPY (acquisition on the same 2 cores)', (100 * live) / bare, '%');
    process.stdout.write(`   (${total} readings per pass; ${archive.stats.duplicates} duplicate batches, ${archive.stats.replayRequests} replay requests)\n`);

    // A broker that is down costs a station nothing while it measures.
    const quiet = join(root, 'quiet');
    mkdirSync(quiet);
    const deadPort = await freePort();
    // Acquisition time from the journal itself (session start to run end), so the publisher's
    // final wait for the broker at exit is not counted.
    const acquisition = async (extra: string[]) => {
      const before = new Set(readdirSync(quiet));
      await run(['run', '--scenario', 'oxide-fn', '--fast', '--plan', plan, '--data', quiet, ...extra]);
      const dir = join(quiet, readdirSync(quiet).find((d) => !before.has(d) && /^\d{8}-/.test(d))!);
      let t = Number.NaN;
      scanJournal(dir, (e) => {
        if (e.type === 'run-end') t = e.t;
      });
      return t;
    };
    const twice = async (extra: string[]) => ((await acquisition(extra)) + (await acquisition(extra))) / 2;
    const plain = await twice([]);
    const up = await twice(['--publish', url, '--station', 'quiet']);
    const dead = await twice(['--publish', `mqtt://127.0.0.1:${deadPort}/x`]);
    report('lab: acquisition of 20,000 readings (fast simulator), no publishing', plain, 'ms');
    report('lab: the same, publishing to the broker', up, 'ms');
    report('lab: the same, publishing to a broker that is down', dead, 'ms', 'as with the broker up');
  } finally {
    await client.end().catch(() => undefined);
    await archive.close();
    await broker.stop();
    await db.stop();
    rmSync(root, { recursive: true, force: true });
  }
}
