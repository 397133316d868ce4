/**
 * The README's Python client example, run as written (Debian's python3 with pandas) against a real
 * daemon: it starts a run, waits for it and loads the export — what a lab script does.
 */
import { spawnSync } from 'node:child_process';
import { readFileSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { PROJECT_ROOT } from '../helpers/reference.js';
import { startDaemon, tempDir, type DaemonProcess } from '../helpers/daemon.js';

let d: DaemonProcess;
beforeAll(async () => {
  d = await startDaemon(['--scenario', 'oxide-fn', '--fast', '--no-autostart', '--data', join(tempDir(), 'data')]);
});
afterAll(() => d?.stop());

describe("the README's Python client", () => {
  it('starts a run, waits for it, and reads the export with pandas', () => {
    const readme = readFileSync(join(PROJECT_ROOT, 'README.md'), 'utf8');
    const m = /<!-- python-client -->\s*```python\n([\s\S]*?)```\s*<!-- \/python-client -->/.exec(readme);
    expect(m, 'the README has the marked Python example').not.toBeNull();
    const file = join(tempDir('plumbline-py-'), 'client.py');
    writeFileSync(file, m![1]);
    const r = spawnSync('/usr/bin/python3', [file], { encoding: 'utf8', timeout: 60_000, env: { ...process.env, PLUMBLINE_URL: d.url } });
    expect(r.status, r.stderr).toBe(0);
    // "<session> 92 readings; [{'sweep': 1, 'model': 'fowler-nordheim'}, …]": two sweeps of 46.
    expect(r.stdout).toMatch(/^\S+ 92 readings; \[\{'sweep': 1, 'model': '[a-z-]+'\}, \{'sweep': 2/);
  });
});
