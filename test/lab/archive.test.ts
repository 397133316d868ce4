/**
 * The archive's writer against a real PostgreSQL, and the publisher against a real broker:
 * duplicates, overlaps and out-of-order batches leave each reading once and bit-exact; a
 * publisher started before its broker publishes everything once the broker is there, and a
 * restarted one resumes from what the broker acknowledged.
 */
import { mkdtempSync, readFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import mqtt from 'mqtt';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { JournalWriter, RECORD_BYTES } from '../../daemon/journal/journal.js';
import { decodeBatch, type BatchHeader } from '../../daemon/lab/batch.js';
import { importSession } from '../../daemon/lab/import.js';
import { LabPublisher, PUBLISHED_FILE } from '../../daemon/lab/publisher.js';
import { ArchiveStore } from '../../daemon/lab/store.js';
import { freePort, startMosquitto, startPostgres, type Broker, type Database } from '../helpers/services.js';

function records(from: number, n: number, value: (seq: number) => number): Buffer {
  const b = Buffer.alloc(n * RECORD_BYTES);
  for (let r = 0; r < n; r++) {
    const seq = from + r;
    const o = r * RECORD_BYTES;
    [seq, 1, r, seq * 0.5, seq * 0.01, value(seq), 0].forEach((v, k) => b.writeDoubleLE(v, o + 8 * k));
  }
  return b;
}

function header(session: string, from: number, to: number, readings: number, events: BatchHeader['events'] = []): BatchHeader {
  return { v: 1, station: 'bench-1', session, from, to, readings, events, sentAt: Date.now() };
}

describe('archive writer (PostgreSQL)', () => {
  let db: Database;
  let store: ArchiveStore;
  beforeAll(async () => {
    db = await startPostgres();
    store = await ArchiveStore.open(db.url);
  }, 60_000);
  afterAll(async () => {
    await store?.close();
    await db?.stop();
  });

  it('keeps each reading once whatever the order, repetition or overlap of batches', async () => {
    const v = (seq: number) => Math.sin(seq) * 1e-9;
    // seq 1–100 and 201–300 first (a gap), then 1–100 again, then 51–250 (overlapping both sides).
    await store.writeBatch(header('s-order', 1, 100, 100), records(1, 100, v));
    const gap = await store.writeBatch(header('s-order', 201, 300, 100), records(201, 100, v));
    expect(gap.committed).toEqual([
      [1, 100],
      [201, 300],
    ]);
    const dup = await store.writeBatch(header('s-order', 1, 100, 100), records(1, 100, v));
    expect(dup).toMatchObject({ duplicate: true, readingsInserted: 0 });
    const overlap = await store.writeBatch(header('s-order', 51, 250, 200), records(51, 200, v));
    expect(overlap.readingsInserted).toBe(100);
    expect(overlap.committed).toEqual([[1, 300]]);
    const rows = db.psql(
      "SELECT count(*), count(DISTINCT seq), min(seq), max(seq) FROM readings r JOIN sessions s ON s.id = r.session_id WHERE s.session = 's-order'",
    );
    expect(rows).toBe('300|300|1|300');
    expect(db.psql("SELECT readings FROM sessions WHERE session = 's-order'")).toBe('300');
  });

  it('stores every bit of the readings (signed zero, subnormals, NaN payloads)', async () => {
    // biome-ignore lint/correctness/noPrecisionLoss: all seventeen digits on purpose (bit-exact round trip)
    const special = [0, -0, 5e-324, -1.2345678901234567e-13, Number.MAX_VALUE, Number.NaN];
    const rec = records(1, special.length, (seq) => special[seq - 1]);
    rec.writeUInt32LE(0x7ff80123, 5 * RECORD_BYTES + 40 + 4); // a NaN with a payload
    await store.writeBatch(header('s-bits', 1, special.length, special.length), rec);
    const hex = db
      .psql("SELECT encode(float8send(current_a), 'hex') FROM readings r JOIN sessions s ON s.id = r.session_id WHERE s.session = 's-bits' ORDER BY seq")
      .split('\n');
    const want = special.map((_, r) =>
      Buffer.from(rec.subarray(r * RECORD_BYTES + 40, r * RECORD_BYTES + 48))
        .reverse()
        .toString('hex'),
    );
    expect(hex).toEqual(want);
  });

  it('fills sessions, sweeps and fits from the events, and imports a journal folder idempotently', async () => {
    const data = mkdtempSync(join(tmpdir(), 'plumbline-import-'));
    const { writer, id } = JournalWriter.create(data, 'import');
    writer.event({
      type: 'session',
      id,
      startedAt: '2026-12-02T03:15:00.000Z',
      source: { kind: 'simulator', detail: 'x', control: true },
      instrument: 'sim',
      plan: { repeat: 2 },
      analysis: {},
      drift: {},
      limits: {},
      device: { wafer: 'W7', site: 'C3' },
    } as never);
    for (let sweep = 1; sweep <= 2; sweep++) {
      writer.event({ type: 'sweep-start', sweep, planned: 50, label: 'up' });
      for (let k = 0; k < 50; k++) writer.reading(sweep, k, k * 0.1, k * 1e-10, 0);
      writer.event({ type: 'sweep-end', sweep, points: 50, complete: true });
      writer.event({
        type: 'fit',
        sweep,
        final: true,
        fit: {
          model: 'ohmic',
          title: 'Ohmic',
          window: { from: 0, to: 5, mode: 'auto' },
          line: { slope: 1e-9, slopeStdErr: 1e-12, intercept: 0, interceptStdErr: 1e-13, r2: 1, residualStdDev: 0, n: 50 },
          axes: {} as never,
          parameters: { resistance: { value: 1e9, stdErr: 1e6, unit: 'Ω' } },
          plausible: true,
          warnings: [],
          points: { used: 50, excluded: 0, reasons: {} },
          regimes: [],
        },
      });
    }
    writer.event({ type: 'annotation', text: 'probed site C4, not C3', tags: [], source: 'test', device: { site: 'C4' } } as never);
    writer.event({ type: 'run-end', outcome: 'completed', reason: 'done', sweeps: 2 });
    writer.close();
    const dir = join(data, id);
    const first = await importSession(store, dir, 'imp');
    expect(first).toMatchObject({ readings: 100, readingsInserted: 100, lastSeq: 109 });
    const again = await importSession(store, dir, 'imp');
    expect(again).toMatchObject({ readings: 100, readingsInserted: 0, eventsInserted: 0 });
    // The annotation's correction of the site wins over the session event's.
    expect(db.psql(`SELECT outcome, wafer, site, started_at = '2026-12-02T03:15:00Z', committed FROM sessions WHERE station = 'imp'`)).toBe(
      'completed|W7|C4|t|{[1,110)}',
    );
    expect(db.psql("SELECT count(*) FROM sweeps w JOIN sessions s ON s.id = w.session_id WHERE s.station = 'imp' AND complete AND points = 50")).toBe('2');
    expect(db.psql("SELECT parameter, value, unit FROM fit_parameters WHERE station = 'imp' ORDER BY sweep LIMIT 1")).toBe('resistance|1000000000|Ω');
  });
});

describe('publisher (broker)', () => {
  let broker: Broker;
  afterAll(async () => {
    await broker?.stop();
  });

  it('publishes a journal written while the broker was away, and resumes from the acknowledged sequence after a restart', async () => {
    const data = mkdtempSync(join(tmpdir(), 'plumbline-pub-'));
    const port = await freePort();
    // The station starts publishing before any broker exists on that port.
    const pub = new LabPublisher({ url: `mqtt://127.0.0.1:${port}/t`, station: 'st', name: 'st', dataDir: data, maxReadings: 300 });
    pub.start();
    const { writer, id } = JournalWriter.create(data, 'early');
    writer.event({ type: 'sweep-start', sweep: 1, planned: 1000, label: 'x' });
    for (let k = 0; k < 1000; k++) writer.reading(1, k, k, k * 1e-12, 0);
    writer.flush();
    await new Promise((r) => setTimeout(r, 300));
    expect(pub.stats.batches).toBe(0);

    broker = await startMosquitto({ port });
    const seen: { from: number; to: number }[] = [];
    const sub = await mqtt.connectAsync(broker.url);
    sub.on('message', (_t, m) => {
      const { header: h } = decodeBatch(m);
      seen.push({ from: h.from, to: h.to });
    });
    await sub.subscribeAsync('t/station/st/session/+/data', { qos: 1 });
    const waitAcked = async (seq: number) => {
      for (let k = 0; k < 200 && (pub.ackedOf(id) ?? 0) < seq; k++) await new Promise((r) => setTimeout(r, 50));
      expect(pub.ackedOf(id)).toBe(seq);
    };
    await waitAcked(1001);
    expect(seen[0].from).toBe(1);
    await pub.stop();
    expect(JSON.parse(readFileSync(join(data, id, PUBLISHED_FILE), 'utf8'))[`mqtt://127.0.0.1:${port}/t`]).toMatchObject({ acked: 1001, complete: false });

    // More readings while no publisher runs; a new one takes up at 1002.
    for (let k = 0; k < 500; k++) writer.reading(2, k, k, k * 1e-12, 0);
    writer.event({ type: 'run-end', outcome: 'completed', reason: 'done', sweeps: 2 });
    writer.close();
    seen.length = 0;
    const again = new LabPublisher({ url: `mqtt://127.0.0.1:${port}/t`, station: 'st', name: 'st', dataDir: data, maxReadings: 300 });
    again.start();
    for (let k = 0; k < 200 && !again.idle; k++) await new Promise((r) => setTimeout(r, 50));
    for (let k = 0; k < 200 && (again.ackedOf(id) ?? 0) < 1502; k++) await new Promise((r) => setTimeout(r, 50));
    expect(again.ackedOf(id)).toBe(1502);
    await new Promise((r) => setTimeout(r, 200));
    expect(seen[0].from).toBe(1002);
    expect(seen.at(-1)!.to).toBe(1502);
    await again.stop();
    expect(JSON.parse(readFileSync(join(data, id, PUBLISHED_FILE), 'utf8'))[`mqtt://127.0.0.1:${port}/t`]).toMatchObject({ acked: 1502, complete: true });
    await sub.endAsync();
  });
});
