/**
 * Carries the simulated instrument's bytes: over any duplex stream (in-process pair, a TCP socket,
 * one end of a pseudo-terminal pair). One command line at a time, in order, as a real parser does.
 */
import { spawn, type ChildProcess } from 'node:child_process';
import { existsSync, mkdtempSync } from 'node:fs';
import { createServer, type Server, type Socket } from 'node:net';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import type { Duplex } from 'node:stream';
import { SerialPort } from 'serialport';
import { LineFramer, type ReadTerminator } from '../../protocols/line-framer.js';
import type { SimulatedSmu } from './instrument.js';

/** How the simulated instrument frames its lines (as a dialect's terminators would describe it). */
export interface LinkFraming {
  /** What ends each command it reads (default lf). */
  readonly readTerminator?: ReadTerminator;
  /** What it appends to each reply (default LF). */
  readonly writeTerminator?: '\n' | '\r\n' | '\r';
}

/** Serves the instrument on a duplex byte stream until it closes. */
export function attachInstrument(smu: SimulatedSmu, stream: Duplex, framing: LinkFraming = {}): void {
  const framer = new LineFramer({ maxLine: 1 << 20, terminator: framing.readTerminator ?? 'lf' });
  const eol = framing.writeTerminator ?? '\n';
  let chain = Promise.resolve();
  stream.pipe(framer);
  framer.on('data', (line: string) => {
    smu.received.push({ line, at: performance.timeOrigin + performance.now(), repliesSent: smu.repliesSent });
    if (smu.received.length > smu.recordLimit) smu.received.splice(0, smu.recordLimit >> 1);
    chain = chain
      .then(async () => {
        // Yield to the event loop once per command, as a real link does: a controller on an in-process
        // pair would otherwise run on microtasks alone and starve its own timers and sockets.
        await new Promise((r) => setImmediate(r));
        const reply = await smu.handleLine(line);
        if (reply === undefined || stream.destroyed) return;
        if (smu.slowReplyMs > 0) await new Promise((r) => setTimeout(r, smu.slowReplyMs));
        const isReading = /READ\?|MEAS|FETC/i.test(line);
        const framed = smu.frame(reply, isReading);
        const bytes = eol === '\n' ? framed.bytes : framed.bytes.replace(/\n/g, eol);
        const disconnect = framed.disconnect;
        stream.write(bytes, 'latin1');
        smu.repliesSent++;
        if (disconnect) {
          stream.destroy();
          smu.onDisconnect?.();
        }
      })
      .catch((e: unknown) => {
        process.stderr.write(`simulated instrument: ${(e as Error).message}\n`);
      });
  });
  // A controller that sends its last command and then closes its side (`printf … | socat - TCP:…`)
  // still gets every reply: the link is closed once the queued commands are answered.
  framer.on('end', () => {
    chain = chain.then(() => {
      if (!stream.destroyed) stream.end();
    });
  });
  stream.on('error', () => stream.destroy());
}

/** Listens on host:port (0 = any free port); resolves with the server once bound. */
export function serveTcp(smu: SimulatedSmu, port: number, host = '127.0.0.1', framing: LinkFraming = {}): Promise<Server> {
  return new Promise((resolve, reject) => {
    // Half-open: a client's end of sending is not the end of its replies.
    const server = createServer({ allowHalfOpen: true }, (socket: Socket) => {
      socket.setNoDelay(true);
      attachInstrument(smu, socket, framing);
    });
    server.once('error', reject);
    server.listen(port, host, () => resolve(server));
  });
}

export interface PtyPair {
  /** The path a controller opens (the other end is the instrument's). */
  readonly clientPath: string;
  readonly instrumentPath: string;
  close(): Promise<void>;
}

/**
 * Makes a linked pseudo-terminal pair with socat (from Debian's packages) and serves the
 * instrument on one end. The controller opens `clientPath` as it would a USB-serial adapter.
 */
export async function servePty(smu: SimulatedSmu, dir = mkdtempSync(join(tmpdir(), 'plumbline-pty-')), framing: LinkFraming = {}): Promise<PtyPair> {
  const instrumentPath = join(dir, 'instrument');
  const clientPath = join(dir, 'client');
  let socat: ChildProcess;
  try {
    socat = spawn('socat', ['-d', '-d', `pty,raw,echo=0,link=${instrumentPath}`, `pty,raw,echo=0,link=${clientPath}`], { stdio: ['ignore', 'ignore', 'pipe'] });
  } catch (e) {
    throw new Error(`cannot start socat (install it: apt-get install socat): ${(e as Error).message}`);
  }
  const started = await new Promise<boolean>((resolve) => {
    const t0 = Date.now();
    const poll = () => {
      if (existsSync(instrumentPath) && existsSync(clientPath)) resolve(true);
      else if (Date.now() - t0 > 5000 || socat.exitCode !== null) resolve(false);
      else setTimeout(poll, 20);
    };
    socat.once('error', () => resolve(false));
    poll();
  });
  if (!started) {
    socat.kill();
    throw new Error('socat did not create the pty pair (is socat installed? apt-get install socat)');
  }
  const port = new SerialPort({ path: instrumentPath, baudRate: 115200, autoOpen: false });
  await new Promise<void>((resolve, reject) => port.open((err) => (err ? reject(err) : resolve())));
  attachInstrument(smu, port, framing);
  return {
    clientPath,
    instrumentPath,
    close: async () => {
      await new Promise<void>((resolve) => (port.isOpen ? port.close(() => resolve()) : resolve()));
      socat.kill();
    },
  };
}
