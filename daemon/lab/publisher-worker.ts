/**
 * The publisher in its own thread: its file reads, batching and broker traffic never run on the
 * station's event loop. Started by publishing.ts; stopped with a { stop, flushMs } message.
 */
import { parentPort, workerData } from 'node:worker_threads';
import { LabPublisher, type PublisherOptions } from './publisher.js';

const port = parentPort!;
const pub = new LabPublisher({ ...(workerData as PublisherOptions), log: (line) => port.postMessage({ log: line }) });
pub.start();
port.on('message', (m: { stop?: boolean; flushMs?: number }) => {
  if (!m.stop) return;
  void pub.stop(m.flushMs).then((r) => {
    port.postMessage({ stopped: r });
    port.close();
  });
});
