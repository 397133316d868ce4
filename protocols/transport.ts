/**
 * Byte transports under the SCPI session: TCP raw socket (port 5025 by convention), serial port
 * (serialport), or an in-process pair wired straight to the simulated instrument. A transport is
 * just an open duplex stream; the session frames it.
 */
import { connect } from 'node:net';
import { Duplex, PassThrough } from 'node:stream';
import { SerialPort } from 'serialport';

export const SCPI_RAW_PORT = 5025;

export interface SerialSettings {
  readonly path: string;
  readonly baudRate?: number;
  readonly parity?: 'none' | 'even' | 'odd';
  readonly dataBits?: 7 | 8;
  readonly stopBits?: 1 | 2;
  readonly rtscts?: boolean;
  readonly xon?: boolean;
}

export function openTcp(host: string, port = SCPI_RAW_PORT, timeoutMs = 5000): Promise<Duplex> {
  return new Promise((resolve, reject) => {
    const s = connect({ host, port });
    const t = setTimeout(() => {
      s.destroy();
      reject(new Error(`TCP ${host}:${port}: no connection within ${timeoutMs} ms`));
    }, timeoutMs);
    s.once('connect', () => {
      clearTimeout(t);
      s.setNoDelay(true);
      s.setKeepAlive(true, 5000);
      resolve(s);
    });
    s.once('error', (e) => {
      clearTimeout(t);
      reject(new Error(`TCP ${host}:${port}: ${e.message}`));
    });
  });
}

export function openSerial(settings: SerialSettings): Promise<Duplex> {
  const port = new SerialPort({
    path: settings.path,
    baudRate: settings.baudRate ?? 9600,
    parity: settings.parity ?? 'none',
    dataBits: settings.dataBits ?? 8,
    stopBits: settings.stopBits ?? 1,
    rtscts: settings.rtscts ?? false,
    xon: settings.xon ?? false,
    xoff: settings.xon ?? false,
    autoOpen: false,
  });
  return new Promise((resolve, reject) =>
    port.open((err) => (err ? reject(new Error(`serial ${settings.path}: ${err.message}`)) : resolve(port))),
  );
}

/** Lists serial ports; where udev is missing (containers) it reports and returns an empty list. */
export async function listSerialPorts(): Promise<{ ports: { path: string; manufacturer?: string }[]; warning?: string }> {
  try {
    const ports = await SerialPort.list();
    return { ports: ports.map((p) => ({ path: p.path, manufacturer: p.manufacturer })) };
  } catch (e) {
    return { ports: [], warning: `port listing unavailable (${(e as Error).message}); give the port path directly` };
  }
}

/** Two cross-connected duplex streams: what one writes, the other reads (in-process transport). */
export function duplexPair(): [Duplex, Duplex] {
  const aToB = new PassThrough();
  const bToA = new PassThrough();
  const make = (readable: PassThrough, writable: PassThrough) =>
    new Duplex({
      read() {
        /* data is pushed from the readable side below */
      },
      write(chunk, enc, cb) {
        writable.write(chunk, enc, cb);
      },
      final(cb) {
        writable.end();
        cb();
      },
      destroy(err, cb) {
        // Like a socket: when one side goes away, the other sees the end of the stream.
        writable.end();
        cb(err);
      },
    });
  const a = make(bToA, aToB);
  const b = make(aToB, bToA);
  bToA.on('data', (c) => a.push(c));
  aToB.on('data', (c) => b.push(c));
  aToB.on('end', () => b.push(null));
  bToA.on('end', () => a.push(null));
  return [a, b];
}
