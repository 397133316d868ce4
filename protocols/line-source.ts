/**
 * Passive line sources: readings produced by something else, with no control of the instrument.
 * A serial or TCP line stream, standard input, or a growing CSV file, each turned into lines with
 * their line numbers. The live chain maps them with CsvRowMapper or parseReading.
 */
import { EventEmitter } from 'node:events';
import type { Readable } from 'node:stream';
import { FileTail } from './file-tail.js';
import { LineFramer } from './line-framer.js';
import { openSerial, openTcp, type SerialSettings } from './transport.js';

export interface LineSource extends EventEmitter {
  on(event: 'line', fn: (line: string, lineNumber: number) => void): this;
  on(event: 'end', fn: () => void): this;
  on(event: 'notice', fn: (text: string) => void): this;
  stop(): Promise<void>;
}

/** Lines from any readable byte stream (stdin, a socket, a serial port). */
export function streamLines(stream: Readable, maxLine = 65536): LineSource {
  const em = new EventEmitter() as LineSource;
  const framer = new LineFramer({ maxLine });
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

export async function tcpLines(host: string, port: number): Promise<LineSource> {
  return streamLines(await openTcp(host, port));
}

export async function serialLines(settings: SerialSettings): Promise<LineSource> {
  return streamLines(await openSerial(settings));
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
