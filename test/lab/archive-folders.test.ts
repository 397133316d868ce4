/**
 * `export`, `report` and `refit` on archived sessions (--postgres): a session recorded by the
 * station, imported into a private PostgreSQL, then written back as a folder and read by the same
 * code as the original. The archived copy must give exactly the original's export, report and
 * refit (the same bytes of points.csv, the same columns and values of sweeps.csv, the same fits).
 */
import { readFileSync } from 'node:fs';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { runCli } from '../helpers/cli.js';
import { tempDir } from '../helpers/daemon.js';
import { startPostgres, type Database } from '../helpers/services.js';

let db: Database;
let session: string;
let dir: string;
beforeAll(async () => {
  db = await startPostgres();
  const data = join(tempDir(), 'data');
  const r = runCli(['run', '--scenario', 'nitride-pf', '--sweeps', '3', '--fast', '--data', data, '--json']);
  expect(r.code, r.stderr).toBe(0);
  ({ session, dir } = JSON.parse(r.stdout));
  const imp = runCli(['archive', '--postgres', db.url, '--import', dir, '--station', 'st-a']);
  expect(imp.code, imp.stderr).toBe(0);
}, 120_000);
afterAll(() => db?.stop());

describe('archived sessions read as folders', () => {
  it("export from the archive is byte for byte the folder's export", () => {
    const into = tempDir('plumbline-from-archive-');
    const a = runCli(['export', '--postgres', db.url, '--session', session, '--into', into, '--json']);
    expect(a.code, a.stderr).toBe(0);
    const fromArchive = JSON.parse(a.stdout);
    const b = runCli(['export', dir, '--json']);
    const fromFolder = JSON.parse(b.stdout);
    expect(fromArchive.readings).toBe(fromFolder.readings);
    expect(readFileSync(join(fromArchive.outDir, 'points.csv'), 'utf8')).toBe(readFileSync(join(fromFolder.outDir, 'points.csv'), 'utf8'));
    // sweeps.csv: the same columns and values (the archive keeps events as JSON objects, whose key
    // order — hence the order of the parameter columns — is not data).
    const byColumn = (file: string) => {
      const [head, ...rows] = readFileSync(file, 'utf8')
        .trim()
        .split('\n')
        .map((l) => l.split(','));
      return rows.map((r) => Object.fromEntries(head.map((h, k) => [h, r[k]])));
    };
    expect(byColumn(join(fromArchive.outDir, 'sweeps.csv'))).toEqual(byColumn(join(fromFolder.outDir, 'sweeps.csv')));
  });

  it('report and refit from the archive give what the folder gives', () => {
    const into = tempDir('plumbline-from-archive-');
    const rep = runCli(['report', '--postgres', db.url, '--session', session, '--into', into, '--out', join(into, 'r.html')]);
    expect(rep.code, rep.stderr).toBe(0);
    expect(rep.stdout).toMatch(/report of 3 sweep\(s\)/);
    const a = runCli(['refit', '--postgres', db.url, '--session', session, '--station', 'st-a', '--into', into, '--model', 'schottky', '--auto', '--json']);
    const b = runCli(['refit', dir, '--model', 'schottky', '--auto', '--json']);
    expect(a.code, a.stderr).toBe(0);
    expect(JSON.parse(a.stdout).sweeps.map((s: { fit: unknown }) => s.fit)).toEqual(JSON.parse(b.stdout).sweeps.map((s: { fit: unknown }) => s.fit));
  });

  it('a session the archive does not have, or a missing --session, is a clear usage error', () => {
    const none = runCli(['report', '--postgres', db.url, '--session', 'no-such-session']);
    expect(none.code).toBe(2);
    expect(none.stderr).toMatch(/the archive has no session named 'no-such-session'/);
    const unnamed = runCli(['refit', '--postgres', db.url]);
    expect(unnamed.code).toBe(2);
    expect(unnamed.stderr).toMatch(/name the session: --session NAME/);
    const noUrl = runCli(['export', '--session', session]);
    expect(noUrl.code).toBe(2);
    expect(noUrl.stderr).toMatch(/--session reads from the archive: give --postgres URL too/);
  });
});
