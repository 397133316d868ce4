/**
 * `export` and `report` of a session whose journal has no run end say so — on the terminal and in
 * the report's header — and still write their output: a session a live process is writing (this
 * test process holds its lock, as a running daemon would), and one whose `plumbline run` was killed
 * with SIGKILL mid-sweep (`plumbline recover` then closes it, and the warning goes away).
 */
import { spawn } from 'node:child_process';
import { existsSync, readdirSync, readFileSync, statSync } from 'node:fs';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { JournalWriter, READINGS_FILE } from '../../daemon/journal/journal.js';
import { CLI, runCli } from '../helpers/cli.js';
import { tempDir, waitUntil } from '../helpers/daemon.js';

describe('export and report of a session without a run end', () => {
  it('a session still being written: both warn (naming the writing process) and still write their files', () => {
    const data = tempDir();
    const { writer, id } = JournalWriter.create(data, 'live');
    writer.event({
      type: 'session',
      id,
      startedAt: new Date().toISOString(),
      source: { kind: 'test', detail: 'this test', control: false },
      instrument: '-',
      plan: null,
      analysis: { model: 'ohmic' },
      drift: {},
      limits: {},
    });
    writer.event({ type: 'sweep-start', sweep: 1, planned: 20, label: '' });
    // Ohm's law through 1 MΩ.
    for (let k = 0; k < 10; k++) writer.reading(1, k, 0.1 * k, (0.1 * k) / 1e6, 0);
    writer.flush();
    const dir = join(data, id);
    try {
      const ex = runCli(['export', dir]);
      expect(ex.code, ex.stderr).toBe(0);
      expect(ex.stdout).toMatch(/10 readings in 1 sweep\(s\) exported/);
      expect(ex.stderr).toContain(`warning: ${dir}: the session has no run end yet: it is still being written (process ${process.pid} holds it)`);
      expect(JSON.parse(readFileSync(join(dir, 'export', 'session.json'), 'utf8')).unfinished).toMatch(/still being written/);
      const rep = runCli(['report', dir]);
      expect(rep.code, rep.stderr).toBe(0);
      expect(rep.stderr).toMatch(/no run end yet: it is still being written/);
      const html = readFileSync(join(dir, 'report.html'), 'utf8');
      expect(html).toContain('Ended: <b>no run end yet</b>');
      expect(html).toMatch(/<p class="caution">The session has no run end yet: it is still being written \(process \d+ holds it\)/);
      expect(html).not.toContain('not ended');
    } finally {
      writer.close();
    }
  });

  it('a run killed mid-sweep: both point to `plumbline recover`; after it, neither warns', async () => {
    const data = tempDir();
    const child = spawn(process.execPath, [CLI, 'run', '--scenario', 'nitride-pf', '--sweeps', '50', '--data', data], { stdio: 'ignore' });
    let dir = '';
    await waitUntil(() => {
      const ids = existsSync(data) ? readdirSync(data) : [];
      dir = ids.length ? join(data, ids[0]) : '';
      return dir !== '' && existsSync(join(dir, READINGS_FILE)) && statSync(join(dir, READINGS_FILE)).size > 5 * 56;
    }, 'readings on disk');
    const exited = new Promise((r) => child.once('exit', r));
    child.kill('SIGKILL');
    await exited;
    const ex = runCli(['export', dir]);
    expect(ex.code, ex.stderr).toBe(0);
    expect(ex.stderr).toContain(`warning: ${dir}: the session has no run end: its run was cut short`);
    expect(ex.stderr).toContain(`\`plumbline recover ${dir}\``);
    const rep = runCli(['report', dir]);
    expect(rep.code, rep.stderr).toBe(0);
    expect(rep.stderr).toMatch(/plumbline recover/);
    expect(readFileSync(join(dir, 'report.html'), 'utf8')).toMatch(/<p class="caution">The session has no run end: its run was cut short/);
    expect(runCli(['recover', dir]).code).toBe(0);
    const ex2 = runCli(['export', dir]);
    expect(ex2.stderr).not.toMatch(/warning/);
    const rep2 = runCli(['report', dir]);
    expect(rep2.stderr).not.toMatch(/warning/);
    expect(readFileSync(join(dir, 'report.html'), 'utf8')).toContain('Ended: <b>interrupted</b>');
  });
});
