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
  readonly parity?: 'none' | 'even' | 'odd' | 'mark' | 'space';
  readonly dataBits?: 5 | 6 | 7 | 8;
  readonly stopBits?: 1 | 1.5 | 2;
  /** Hardware flow control (RTS/CTS). */
  readonly rtscts?: boolean;
  /** Software flow control (XON/XOFF) in both directions. */
  readonly xonxoff?: boolean;
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
    xon: settings.xonxoff ?? false,
    xoff: settings.xonxoff ?? false,
    autoOpen: false,
  });
  return new Promise((resolve, reject) => port.open((err) => (err ? reject(new Error(`serial ${settings.path}: ${err.message}`)) : resolve(port))));
}

export interface SerialPortInfo {
  readonly path: string;
  readonly manufacturer?: string;
  readonly serialNumber?: string;
  readonly vendorId?: string;
  readonly productId?: string;
  /** A stable path under /dev/serial/by-id that names this adapter, when there is one. */
  readonly byId?: string;
}

/**
 * Lists serial ports. The port scan needs udev; where it is missing (containers, minimal systems)
 * the list comes back empty with a warning saying so, and the ports under /dev/serial/by-id (if
 * any) are still listed.
 */
export async function listSerialPorts(): Promise<{ ports: SerialPortInfo[]; warning?: string }> {
  const { readdirSync, realpathSync } = await import('node:fs');
  const byId = new Map<string, string>();
  try {
    for (const name of readdirSync('/dev/serial/by-id')) {
      const link = `/dev/serial/by-id/${name}`;
      try {
        byId.set(realpathSync(link), link);
      } catch {
        /* a dangling link: the adapter went away */
      }
    }
  } catch {
    /* no /dev/serial/by-id: no USB serial adapter plugged in, or not Linux */
  }
  try {
    const ports = await SerialPort.list();
    const out: SerialPortInfo[] = ports.map((p) => ({
      path: p.path,
      manufacturer: p.manufacturer,
      serialNumber: p.serialNumber,
      vendorId: p.vendorId,
      productId: p.productId,
      byId: byId.get(p.path),
    }));
    for (const [real, link] of byId) if (!out.some((p) => p.path === real)) out.push({ path: real, byId: link });
    return { ports: out };
  } catch (e) {
    const msg = (e as Error).message;
    const why = /udevadm/.test(msg) ? 'udevadm is missing (no udev here, as in most containers)' : msg;
    return {
      ports: [...byId].map(([real, link]) => ({ path: real, byId: link })),
      warning: `the serial-port scan is unavailable: ${why}. Give the port's path directly in the station config (a /dev/serial/by-id/… path stays the same across replugging; socat ptys live under /dev/pts).`,
    };
  }
}

/** Two cross-connected duplex streams: what one writes, the other reads (in-process transport). */
export function duplexPair(): [Duplex, Duplex] {
  const aToB = new PassThrough();
  const bToA = new PassThrough();
  const make = (_readable: PassThrough, writable: PassThrough) =>
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
