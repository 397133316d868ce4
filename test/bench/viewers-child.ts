/** Child of the daemon benchmark: N websocket viewers that read everything, plus one that stalls. */
import { WebSocket } from 'ws';

const [url, nText] = process.argv.slice(2);
const n = Number(nText);
let bytes = 0;
let messages = 0;
const clients: WebSocket[] = [];
for (let k = 0; k < n; k++) {
  const ws = new WebSocket(url);
  ws.on('message', (d) => {
    bytes += (d as Buffer).length;
    messages++;
  });
  clients.push(ws);
}
const stalled = new WebSocket(url);
await Promise.all([...clients, stalled].map((c) => new Promise((r) => c.once('open', r))));
// The stalled viewer stops reading its socket: the kernel buffers fill, then the daemon's bufferedAmount grows.
(stalled as unknown as { _socket: { pause(): void } })._socket.pause();
process.stdout.write('ready\n');
process.stdin.on('data', () => {
  process.stdout.write(`bytes ${bytes} messages ${messages}\n`);
  process.exit(0);
});
