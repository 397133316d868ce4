/**
 * Passive line sources: readings produced by something else, with no control of the instrument.
 * A serial or TCP line stream, standard input, or a growing CSV file, each turned into lines with
 * their line numbers. The live chain maps them with CsvRowMapper or parseReading.
 */
import { EventEmitter } from 'node:events';
import type { Readable } from 'node:stream';
import { FileTail } from './file-tail.js';
import { LineFramer, type ReadTerminator } from './line-framer.js';
import { openSerial, openTcp, type SerialSettings } from './transport.js';

export interface LineSource extends EventEmitter {
  on(event: 'line', fn: (line: string, lineNumber: number) => void): this;
  on(event: 'end', fn: () => void): this;
  on(event: 'notice', fn: (text: string) => void): this;
  stop(): Promise<void>;
}

/** Lines from any readable byte stream (stdin, a socket, a serial port). */
export function streamLines(stream: Readable, maxLine = 65536, terminator: ReadTerminator = 'lf'): LineSource {
  const em = new EventEmitter() as LineSource;
  const framer = new LineFramer({ maxLine, terminator });
  let n = 0;
  stream.pipe(framer);
  framer.on('data', (l: string) => em.emit('line', l, ++n));
  framer.on('end', () => em.emit('end'));
  em.stop = async () => {
    stream.unpipe(framer);
    framer.end();
  };
  return em;
}

export async function tcpLines(host: string, port: number, terminator: ReadTerminator = 'lf'): Promise<LineSource> {
  const socket = await openTcp(host, port);
  const src = streamLines(socket, 65536, terminator);
  const stop = src.stop;
  src.stop = async () => {
    await stop();
    socket.destroy();
  };
  return src;
}

export async function serialLines(settings: SerialSettings, terminator: ReadTerminator = 'lf'): Promise<LineSource> {
  const port = await openSerial(settings);
  const src = streamLines(port, 65536, terminator);
  const stop = src.stop;
  src.stop = async () => {
    await stop();
    port.destroy();
  };
  // A serial port does not end on its own: an unplugged adapter closes it.
  port.on('close', () => src.emit('end'));
  return src;
}

/**
 * A watch source named on the command line: `-` (standard input), `tcp://HOST:PORT`,
 * `serial:PATH`, or a file path. Returns what kind it is and, for tcp/serial, where.
 */
export function parseSourceSpec(
  spec: string,
): { kind: 'stdin' } | { kind: 'tcp'; host: string; port: number } | { kind: 'serial'; path: string } | { kind: 'file'; path: string } {
  if (spec === '-') return { kind: 'stdin' };
  const tcp = /^tcp:\/\/(\[[^\]]+\]|[^:/]+):(\d+)\/?$/.exec(spec);
  if (tcp) {
    const port = Number(tcp[2]);
    if (!(port >= 1 && port <= 65535)) throw new TypeError(`${spec}: port ${tcp[2]} is not a TCP port (1–65535)`);
    return { kind: 'tcp', host: tcp[1].replace(/^\[|\]$/g, ''), port };
  }
  if (spec.startsWith('tcp:')) throw new TypeError(`${spec}: expected tcp://HOST:PORT`);
  if (spec.startsWith('serial:')) {
    const path = spec.slice('serial:'.length);
    if (!path) throw new TypeError(`${spec}: expected serial:PATH, e.g. serial:/dev/ttyUSB0`);
    return { kind: 'serial', path };
  }
  return { kind: 'file', path: spec };
}

/** Lines of a file being appended to; truncation and rotation are reported as notices. */
export async function fileLines(path: string, pollMs = 50): Promise<LineSource> {
  const em = new EventEmitter() as LineSource;
  const tail = new FileTail(path, { pollMs });
  tail.on('line', (l, n) => em.emit('line', l, n));
  tail.on('truncated', () => em.emit('notice', `${path} was truncated: reading again from its first line`));
  tail.on('rotated', () => em.emit('notice', `${path} was replaced by a new file: reading it from its first line`));
  tail.on('error', (e) => em.emit('notice', `${path}: ${e.message}`));
  await tail.start();
  em.stop = () => tail.stop();
  return em;
}
