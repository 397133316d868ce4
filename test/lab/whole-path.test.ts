/**
 * The whole lab path with real parts: three simulated instruments over loopback TCP, three
 * `plumbline serve --publish` stations running at full rate into one private Mosquitto broker, and
 * `plumbline archive` writing a throwaway PostgreSQL. Mid-run the archive is killed with SIGKILL and
 * restarted, then the broker is killed with SIGKILL and restarted (it keeps nothing: no
 * persistence). Afterwards every journaled reading is in the database exactly once, with every bit
 * of its values, and so is every journaled event.
 */
import { spawn, type ChildProcess } from 'node:child_process';
import { readdirSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { scanJournal } from '../../daemon/journal/reader.js';
import { CLI } from '../helpers/cli.js';
import { tempDir } from '../helpers/daemon.js';
import { freePort, startMosquitto, startPostgres, type Broker, type Database } from '../helpers/services.js';

const procs = new Set<ChildProcess>();

function start(args: string[], ready?: RegExp): Promise<{ proc: ChildProcess; out: () => string; exited: Promise<number | null> }> {
  const proc = spawn(process.execPath, [CLI, ...args], { stdio: ['ignore', 'pipe', 'pipe'] });
  procs.add(proc);
  let out = '';
  proc.stdout!.on('data', (d) => (out += String(d)));
  proc.stderr!.on('data', (d) => (out += String(d)));
  const exited = new Promise<number | null>((r) =>
    proc.once('exit', (code) => {
      procs.delete(proc);
      r(code);
    }),
  );
  if (!ready) return Promise.resolve({ proc, out: () => out, exited });
  return new Promise((resolve, reject) => {
    const t = setTimeout(() => reject(new Error(`not ready: ${args.join(' ')}: ${out}`)), 30_000);
    const check = () => {
      if (ready.test(out)) {
        clearTimeout(t);
        resolve({ proc, out: () => out, exited });
      }
    };
    proc.stdout!.on('data', check);
    proc.stderr!.on('data', check);
    void exited.then((code) => {
      clearTimeout(t);
      reject(new Error(`exited (${code}) before ready: ${out}`));
    });
  });
}

async function until(pred: () => boolean, timeoutMs: number, what: string | (() => string)): Promise<void> {
  const end = Date.now() + timeoutMs;
  while (!pred()) {
    if (Date.now() > end) throw new Error(`timed out: ${typeof what === 'string' ? what : what()}`);
    await new Promise((r) => setTimeout(r, 250));
  }
}

describe('three stations → broker → archive → PostgreSQL', () => {
  let broker: Broker;
  let db: Database;
  beforeAll(async () => {
    [broker, db] = await Promise.all([startMosquitto(), startPostgres()]);
  }, 60_000);
  afterAll(async () => {
    for (const p of procs) p.kill('SIGKILL');
    await broker?.stop();
    await db?.stop();
  });

  it('every journaled reading and event is archived exactly once through kill -9 of the archive and of the broker', async () => {
    const root = tempDir('plumbline-lab-');
    const lab = `${broker.url}/lab`;
    const count = () => Number(db.psql('SELECT count(*) FROM readings') || 0);
    // The database schema comes from the archive; wait for it before counting.
    let archive = await start(['archive', '--mqtt', lab, '--postgres', db.url, '--client-id', 'test-archive'], /archiving/);
    const stations: { data: string; run: Awaited<ReturnType<typeof start>> }[] = [];
    // Each instrument's device with the sweep its scenario suggests (config/scenarios).
    const devices = [
      {
        scenario: 'oxide-fn',
        sweep: { start: 0, stop: 9, points: 91, compliance: 1e-3 },
        analysis: { model: 'fowler-nordheim', window: { from: 5, to: 9 }, inputs: { thickness: 7e-9, massRatio: 0.42 } },
      },
      {
        scenario: 'nitride-pf',
        sweep: { start: 0, stop: 12, points: 61, compliance: 1e-3 },
        analysis: { model: 'poole-frenkel', window: { from: 3, to: 12 }, inputs: { thickness: 2e-8 } },
      },
      {
        scenario: 'organic-sclc',
        sweep: { start: 0, stop: 10, points: 101, compliance: 1e-2 },
        analysis: { model: 'sclc', window: { from: 3, to: 10 }, inputs: { thickness: 1e-7 } },
      },
    ];
    for (let s = 0; s < 3; s++) {
      const port = await freePort();
      await start(['sim', '--tcp', String(port), '--scenario', devices[s].scenario, '--seed', String(s + 1)], /simulated SMU/);
      const data = join(root, `station-${s}`);
      const config = join(root, `station-${s}.json`);
      writeFileSync(
        config,
        JSON.stringify({
          name: `test station ${s}`,
          instrument: { kind: 'tcp', host: '127.0.0.1', port },
          dialect: 'protection-trip',
          limits: { maxVoltage: 20, maxCompliance: 0.01, maxPower: 0.1, rampDelay: 0 },
          // No integration wait: the instrument answers as fast as the link allows (full rate).
          plan: { ...devices[s].sweep, nplc: 0.01, repeat: 600 },
          analysis: devices[s].analysis,
          drift: { action: 'warn' },
          server: { host: '127.0.0.1', port: 0 },
          autostart: true,
        }),
      );
      const run = await start(['serve', '--config', config, '--data', data, '--publish', lab, '--station', `st-${s}`], /demo run started/);
      stations.push({ data, run });
    }
    // The run-end notice ("run ended: <outcome>"), not the output-off line before it ("output off
    // sent — run ended"): on a loaded machine the check could fall between the two.
    const running = () => stations.filter((s) => !/run ended: /.test(s.run.out())).length;

    // kill -9 the archive once it has written some readings, while the stations run.
    await until(() => count() > 2000, 60_000, 'first readings archived');
    expect(running()).toBe(3);
    archive.proc.kill('SIGKILL');
    await archive.exited;
    await new Promise((r) => setTimeout(r, 1000));
    archive = await start(['archive', '--mqtt', lab, '--postgres', db.url, '--client-id', 'test-archive'], /session resumed/);

    // kill -9 the broker later in the run: it forgets every queued message and the archive's session.
    const before = count();
    await until(() => count() > before + 4000, 60_000, 'archiving after the restart');
    expect(running()).toBe(3);
    await broker.kill9();
    await new Promise((r) => setTimeout(r, 1000));
    await broker.restart();

    await until(
      () => running() === 0,
      120_000,
      () => stations.map((s) => s.run.out().slice(-300)).join('\n'),
    );
    for (const s of stations) expect(s.run.out()).toMatch(/run ended: completed/);

    // What the journals hold, read independently of the publisher.
    const journals = stations.map((s, i) => {
      const id = readdirSync(s.data).find((d) => /^\d{8}-/.test(d))!;
      const readings: { seq: number; sweep: number; k: number; t: number; v: number; i: number; flags: number }[] = [];
      let events = 0;
      scanJournal(join(s.data, id), (e) => {
        if (e.type === 'reading') readings.push(e);
        else events++;
      });
      return { station: `st-${i}`, id, readings, events };
    });
    const total = journals.reduce((a, j) => a + j.readings.length, 0);
    await until(
      () => count() >= total,
      90_000,
      () =>
        `all ${total} readings archived (have ${count()}); sessions: ${db.psql('SELECT station, committed, known_last FROM sessions')}\narchive: ${archive.out().slice(-800)}\nstations: ${stations
          .map((s) =>
            s.run
              .out()
              .split('\n')
              .filter((l) => /publish|broker/.test(l))
              .join('\n'),
          )
          .join('\n')}`,
    );
    await new Promise((r) => setTimeout(r, 1500)); // anything late would show up as extra rows

    for (const j of journals) {
      const sid = db.psql(`SELECT id FROM sessions WHERE station = '${j.station}' AND session = '${j.id}'`);
      expect(sid, `${j.station} session row`).not.toBe('');
      // Exactly once: as many rows as journaled readings, each seq once, values bit for bit.
      const rows = db
        .psql(`SELECT seq, sweep, k, t_ms, voltage_v, current_a, flags FROM readings WHERE session_id = ${sid} ORDER BY seq`)
        .split('\n')
        .map((l) => l.split('|').map(Number));
      expect(rows.length).toBe(j.readings.length);
      for (let n = 0; n < rows.length; n++) {
        const r = j.readings[n];
        expect(rows[n]).toEqual([r.seq, r.sweep, r.k, r.t, r.v, r.i, r.flags]);
      }
      expect(Number(db.psql(`SELECT count(*) FROM events WHERE session_id = ${sid}`))).toBe(j.events);
      const last = Math.max(j.readings.at(-1)!.seq, Number(db.psql(`SELECT max(seq) FROM events WHERE session_id = ${sid}`)));
      expect(db.psql(`SELECT committed::text FROM sessions WHERE id = ${sid}`)).toBe(`{[1,${last + 1})}`);
      expect(db.psql(`SELECT outcome FROM sessions WHERE id = ${sid}`)).toBe('completed');
      expect(Number(db.psql(`SELECT count(*) FROM sweeps WHERE session_id = ${sid} AND complete`))).toBe(600);
    }
    expect(Number(db.psql('SELECT count(*) FROM readings'))).toBe(total);
    expect(Number(db.psql('SELECT count(*) FROM stations'))).toBe(3);
  }, 300_000);
});
