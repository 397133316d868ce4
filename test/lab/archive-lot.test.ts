/**
 * `weibull` and `lot` reading the archive (`--postgres` with a selection) give what they give on
 * the same sessions' folders: both go through one summary of a session's events. The lot is an
 * invented one (breakdown fields drawn from a Weibull by inverse transform); the Weibull maths
 * itself is checked against scipy elsewhere.
 */
import { mkdtempSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { JournalWriter } from '../../daemon/journal/journal.js';
import { ArchiveStore } from '../../daemon/lab/store.js';
import { importSession } from '../../daemon/lab/import.js';
import { DEVICE_RESULTS_FILE, formatDeviceResults, type DeviceResult } from '../../protocols/device-results.js';
import { runCli } from '../helpers/cli.js';
import { startPostgres, type Database } from '../helpers/services.js';

describe('weibull and lot from the archive', () => {
  let db: Database;
  const data = mkdtempSync(join(tmpdir(), 'plumbline-archlot-'));
  const dirs: Record<string, string[]> = { W1: [], W2: [], hot: [] };
  beforeAll(async () => {
    db = await startPostgres();
    let u = 12345;
    const uniform = () => ((u = (u * 1103515245 + 12345) % 2 ** 31) + 0.5) / 2 ** 31;
    for (let k = 0; k < 16; k++) {
      const wafer = k < 10 ? 'W1' : 'W2';
      const tags = k % 3 === 0 ? ['hot'] : [];
      const { writer, id } = JournalWriter.create(data, `dev-${k}`);
      const device = { device: `D${k}`, wafer, site: `S${k}`, x: k % 4, y: Math.floor(k / 4), area: 1e-8, thickness: 7e-9, tags };
      writer.event({
        type: 'session',
        id,
        startedAt: new Date(Date.UTC(2026, 11, 1 + (k % 4), 8)).toISOString(),
        source: { kind: 'simulator', detail: 'lot', control: true },
        instrument: 'sim',
        plan: { repeat: 1 },
        analysis: { model: 'fowler-nordheim', inputs: {} },
        drift: {},
        limits: {},
        device,
      } as never);
      writer.event({ type: 'sweep-start', sweep: 1, planned: 3, label: 'up' });
      for (let i = 0; i < 3; i++) writer.reading(1, i, i, 1e-12 * (i + 1), 0);
      writer.event({ type: 'sweep-end', sweep: 1, points: 3, complete: true });
      const phi = 3.1 + 0.02 * Math.sin(k);
      writer.event({
        type: 'fit',
        sweep: 1,
        final: true,
        fit: {
          model: 'fowler-nordheim',
          title: 'FN',
          window: { from: 5, to: 9, mode: 'auto' },
          line: { slope: -1, slopeStdErr: 0.01, intercept: 0, interceptStdErr: 0.1, r2: 0.999, residualStdDev: 0.01, n: 20 },
          axes: {} as never,
          parameters: { barrierHeight: { value: phi, stdErr: 0.003, unit: 'eV' } },
          plausible: true,
          warnings: [],
          points: { used: 20, excluded: 0, reasons: {} },
          regimes: [],
        },
      });
      // Breakdown field from a Weibull (β 8, η 12 MV/cm); the last device of each wafer survived.
      const field = 1.2e9 * (-Math.log(1 - uniform())) ** (1 / 8);
      const survived = k === 9 || k === 15;
      const result: DeviceResult = {
        device: `D${k}`,
        wafer,
        site: `S${k}`,
        x: k % 4,
        y: Math.floor(k / 4),
        test: 'voltage-ramp',
        outcome: survived ? 'survived' : 'breakdown',
        breakdownField: survived ? 1.3e9 : field,
        breakdownVoltage: (survived ? 1.3e9 : field) * 7e-9,
        area: 1e-8,
        thickness: 7e-9,
        tags,
      };
      writer.event({ type: 'test-result', test: 'voltage-ramp', outcome: result.outcome, reason: 'invented lot', result: result as never });
      writer.event({ type: 'run-end', outcome: 'completed', reason: 'done', sweeps: 1 });
      writer.close();
      writeFileSync(join(data, id, DEVICE_RESULTS_FILE), formatDeviceResults([result]));
      dirs[wafer].push(join(data, id));
      if (tags.length) dirs.hot.push(join(data, id));
    }
    const store = await ArchiveStore.open(db.url);
    for (const d of [...dirs.W1, ...dirs.W2]) await importSession(store, d, 'lot-station');
    await store.close();
  }, 60_000);
  afterAll(async () => {
    await db?.stop();
  });

  /** Equal to 1e-12 relative (the two paths list the devices in different orders, so sums differ in the last bits). */
  const same = (a: Record<string, number>, b: Record<string, number>) => {
    for (const k of ['value', 'low', 'high']) expect(Math.abs(a[k] / b[k] - 1), k).toBeLessThan(1e-12);
  };
  const json = (args: string[]) => {
    const r = runCli(args);
    expect(r.code, r.stderr).toBe(0);
    return JSON.parse(r.stdout);
  };

  it('weibull gives the same fit from the archive as from the folders, whole lot and by wafer', () => {
    const folders = json(['weibull', data, '--json']);
    const archived = json(['weibull', '--postgres', db.url, '--json']);
    expect(archived.n).toBe(16);
    expect(archived.censored).toBe(2);
    same(archived.shape, folders.shape);
    same(archived.scale, folders.scale);
    const w1 = json(['weibull', '--postgres', db.url, '--wafer', 'W1', '--json']);
    expect(w1.n).toBe(10);
    same(w1.shape, json(['weibull', ...dirs.W1, '--json']).shape);
    const early = json(['weibull', '--postgres', db.url, '--from', '2026-12-01', '--to', '2026-12-03', '--json']);
    expect(early.n).toBe(8); // started on 1 and 2 December: k % 4 = 0 or 1
  });

  it('lot reads a tag selection from the archive as it reads those folders', () => {
    const out = join(data, 'hot.html');
    const archived = json(['lot', '--postgres', db.url, '--tag', 'hot', '--out', out, '--json']);
    const folders = json(['lot', ...dirs.hot, '--out', join(data, 'hot-folders.html'), '--json']);
    expect(archived.rows.length).toBe(dirs.hot.length);
    expect(archived.rows.map((r: { session: string }) => r.session).sort()).toEqual(folders.rows.map((r: { session: string }) => r.session).sort());
    expect(archived.parameters).toEqual(folders.parameters);
  });

  it('says what is wrong with a selection', () => {
    const noPg = runCli(['weibull', '--wafer', 'W1']);
    expect(noPg.code).toBe(2);
    expect(noPg.stderr).toMatch(/--wafer selects sessions in the archive: give --postgres/);
    const badDate = runCli(['weibull', '--postgres', db.url, '--from', 'last tuesday']);
    expect(badDate.code).toBe(2);
    expect(badDate.stderr).toMatch(/--from 'last tuesday'/);
    const both = runCli(['lot', data, '--postgres', db.url]);
    expect(both.code).toBe(2);
    const none = runCli(['weibull', '--postgres', db.url, '--wafer', 'W9']);
    expect(none.code).toBe(2);
    expect(none.stderr).toMatch(/the archive \(wafer W9\)/);
  });
});
