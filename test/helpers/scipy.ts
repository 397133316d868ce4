/**
 * Runs a python snippet with scipy as an outside reference. Debian's own python3 (/usr/bin/python3)
 * is used: the test command's setup step installs Debian's python3-scipy when it is missing, so
 * these checks never skip. The snippet reads JSON on stdin and prints one JSON object.
 */
import { spawnSync } from 'node:child_process';

const CANDIDATES = ['/usr/bin/python3', 'python3'];

let found: string | undefined;

export function scipyPython(): string {
  if (found) return found;
  for (const py of CANDIDATES) {
    const r = spawnSync(py, ['-c', 'import scipy'], { stdio: 'ignore' });
    if (r.status === 0) return (found = py);
  }
  throw new Error("no python3 with scipy: run `npm test` (its setup installs Debian's python3-scipy) or `apt-get install python3-scipy`");
}

export function runScipy<T>(code: string, input: unknown): T {
  const r = spawnSync(scipyPython(), ['-c', code], { input: JSON.stringify(input), encoding: 'utf8', timeout: 120_000 });
  if (r.status !== 0) throw new Error(`python reference failed (exit ${r.status}): ${r.stderr}`);
  return JSON.parse(r.stdout) as T;
}
