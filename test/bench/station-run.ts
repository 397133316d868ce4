/**
 * `plumbline run --fast` as a process, on short simulated sweeps (10 points, 0 to 9 V, the default
 * station's limits: 1 V ramp steps with 10 ms between them): the time per sweep (the ramp back to
 * 0 V included) and the memory after 500 and after 20,000 sweeps — it should stay flat.
 */
import { spawnSync } from 'node:child_process';
import { mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { report } from './timing.js';

const CLI = fileURLToPath(new URL('../../daemon/cli.js', import.meta.url));
const CONFIG = fileURLToPath(new URL('../../../config/station.json', import.meta.url));

export function benchStationRun(): void {
  const dir = mkdtempSync(join(tmpdir(), 'plumbline-bench-run-'));
  try {
    // The shipped station, with a drift chart that only warns (a healthy device's run of 20,000
    // sweeps would otherwise meet a chance alarm) and no page server.
    const config = JSON.parse(readFileSync(CONFIG, 'utf8')) as Record<string, unknown> & { drift: Record<string, unknown> };
    delete config.$schema;
    config.drift = { ...config.drift, action: 'warn' };
    config.instrument = { kind: 'simulator', scenario: 'oxide-fn', realTime: false, seed: 7 };
    config.autostart = false;
    const cfg = join(dir, 'station.json');
    writeFileSync(cfg, JSON.stringify(config));
    const preload = join(dir, 'memory.cjs');
    writeFileSync(
      preload,
      "process.on('exit', () => { global.gc?.(); const m = process.memoryUsage(); process.stderr.write('memory ' + JSON.stringify({ rss: m.rss, heap: m.heapUsed, peak: process.resourceUsage().maxRSS * 1024 }) + '\\n'); });\n",
    );
    for (const sweeps of [500, 20_000]) {
      const plan = join(dir, `plan-${sweeps}.json`);
      writeFileSync(plan, JSON.stringify({ start: 0, stop: 9, points: 10, compliance: 1e-3, repeat: sweeps }));
      const t0 = performance.now();
      const r = spawnSync(
        process.execPath,
        ['--expose-gc', '--require', preload, CLI, 'run', '--config', cfg, '--plan', plan, '--fast', '--json', '--data', join(dir, 'data')],
        { encoding: 'utf8', timeout: 1_800_000, maxBuffer: 1 << 24 },
      );
      const s = (performance.now() - t0) / 1000;
      const m = /memory (\{.*\})/.exec(r.stderr);
      const out = r.stdout.trim() ? (JSON.parse(r.stdout.trim().split('\n').at(-1) as string) as { outcome: string; sweeps: number }) : undefined;
      if (!m || out?.outcome !== 'completed') {
        process.stdout.write(`  run of ${sweeps} sweeps did not complete: ${out?.outcome ?? r.status} ${r.stderr.slice(-300)}\n`);
        continue;
      }
      const mem = JSON.parse(m[1]) as { rss: number; heap: number; peak: number };
      const mb = (x: number) => (x / 2 ** 20).toFixed(0);
      report(`run --fast, ${sweeps} sweeps of 10 points: time per sweep`, (1000 * s) / sweeps, `ms (whole process ${s.toFixed(1)} s)`);
      report(
        `  memory at the end (after GC)`,
        mem.rss / 2 ** 20,
        `MB RSS, heap ${mb(mem.heap)} MB, peak RSS ${mb(mem.peak)} MB`,
        sweeps === 20_000 ? 'flat: as after 500' : undefined,
      );
      rmSync(join(dir, 'data'), { recursive: true, force: true });
    }
  } finally {
    rmSync(dir, { recursive: true, force: true });
  }
}
