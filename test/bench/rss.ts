/** Child process of the daemon benchmark: 1e7 readings through the chain with the journal on, then RSS. */
import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { RecentEvents } from '../../daemon/pipeline/recent.js';
import { feed, makeChain } from './daemon.js';

const dir = mkdtempSync(join(tmpdir(), 'plumbline-bench-rss-'));
const chain = makeChain(dir, 1000);
const recent = new RecentEvents();
chain.events$.subscribe((e) => recent.add(e));
const n = 10_000_000;
const t0 = performance.now();
for (let done = 0; done < n; done += 100_000) {
  feed(chain, 100_000, 1000, done);
  await new Promise((r) => setImmediate(r));
}
const s = (performance.now() - t0) / 1000;
chain.end('completed', 'bench');
global.gc?.();
process.stdout.write(`rss ${(process.memoryUsage().rss / 2 ** 20).toFixed(0)} MB after ${n} readings in ${s.toFixed(1)} s\n`);
rmSync(dir, { recursive: true, force: true });
