/** Runs the built `plumbline` command (dist/, compiled by the test command's setup step). */
import { spawnSync } from 'node:child_process';
import { mkdtempSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { PROJECT_ROOT } from './reference.js';

export const CLI = join(PROJECT_ROOT, 'dist', 'daemon', 'cli.js');

export function runCli(args: string[], input?: string): { code: number; stdout: string; stderr: string } {
  const r = spawnSync(process.execPath, [CLI, ...args], { encoding: 'utf8', input, timeout: 60_000 });
  return { code: r.status ?? -1, stdout: r.stdout, stderr: r.stderr };
}

export function tempFile(name: string, content: string): string {
  const dir = mkdtempSync(join(tmpdir(), 'plumbline-test-'));
  const p = join(dir, name);
  writeFileSync(p, content);
  return p;
}
