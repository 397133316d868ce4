/**
 * What a station command calls to publish its sessions: checks the broker address at once (a bad
 * one is a usage error), then runs the publisher in a worker thread. If that thread fails, the
 * station goes on (its journal is unaffected) and the thread is started again a little later.
 */
import { Worker } from 'node:worker_threads';
import { LabConfigError, checkName, defaultStationId, parseBrokerUrl } from './topics.js';

export interface PublishingOptions {
  readonly url: string;
  /** Station id in topics (default: this machine's name and the data folder's). */
  readonly station?: string;
  readonly name: string;
  readonly dataDir: string;
  readonly page?: string | null;
  readonly tokenRequired?: boolean;
  /** Sessions created since this time (ms since the epoch) are published even if finished (default: now). */
  readonly since?: number;
  /** Where log lines go (credentials are already removed). */
  readonly log: (line: string) => void;
}

export interface PublishingHandle {
  readonly station: string;
  /** The broker address without its password. */
  readonly display: string;
  /** Sends what is still unsent (for up to flushMs), then disconnects. */
  stop(flushMs?: number): Promise<{ unsent: string[] }>;
}

export function startPublishing(o: PublishingOptions): PublishingHandle {
  const addr = parseBrokerUrl(o.url, '--publish');
  const station = checkName(o.station ?? defaultStationId(o.dataDir), 'station id');
  const data = {
    url: o.url,
    station,
    name: o.name,
    dataDir: o.dataDir,
    page: o.page ?? null,
    tokenRequired: o.tokenRequired ?? false,
    since: o.since ?? Date.now(),
  };
  let worker: Worker | undefined;
  let stopping = false;
  let result: ((r: { unsent: string[] }) => void) | undefined;
  const launch = () => {
    const w = new Worker(new URL('./publisher-worker.js', import.meta.url), { workerData: data });
    worker = w;
    w.on('message', (m: { log?: string; stopped?: { unsent: string[] } }) => {
      if (m.log) o.log(m.log);
      if (m.stopped) result?.(m.stopped);
    });
    w.on('error', (e) => {
      o.log(`publish: the publishing thread failed (${e.message}); the journal is unaffected; starting it again`);
    });
    w.on('exit', () => {
      if (worker === w) worker = undefined;
      if (!stopping) setTimeout(() => !stopping && launch(), 2000).unref();
      result?.({ unsent: [] });
    });
  };
  launch();
  return {
    station,
    display: addr.display,
    stop: (flushMs = 3000) =>
      new Promise((resolve) => {
        stopping = true;
        const w = worker;
        if (!w) return resolve({ unsent: [] });
        const t = setTimeout(() => {
          void w.terminate();
          resolve({ unsent: ['(publisher did not stop in time)'] });
        }, flushMs + 4000);
        result = (r) => {
          clearTimeout(t);
          result = undefined;
          resolve(r);
        };
        w.postMessage({ stop: true, flushMs });
      }),
  };
}

export { LabConfigError };
