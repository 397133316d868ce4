/**
 * SCPI message layer over a byte transport (IEEE 488.2 framing on serial/TCP: every message ends
 * with the terminator; responses end with LF, a trailing CR is stripped). One query outstanding at a
 * time, each with a timeout; a reply that arrives after its query timed out is discarded and counted
 * as a desync. The error queue is drained with SYSTem:ERRor? and each code mapped to a message.
 */
import type { Duplex } from 'node:stream';
import { LineFramer } from './line-framer.js';

export class ScpiTimeoutError extends Error {
  readonly code = 'SCPI_TIMEOUT';
}
export class ScpiDisconnectError extends Error {
  readonly code = 'SCPI_DISCONNECTED';
}
export class ScpiInstrumentError extends Error {
  readonly code = 'SCPI_INSTRUMENT_ERROR';
  constructor(readonly errors: { code: number; text: string }[], context: string) {
    super(`${context}: ${errors.map((e) => `${e.code} ${e.text} (${explainScpiError(e.code)})`).join('; ')}`);
  }
}

/** Plain-words meaning of the standard SCPI error classes (SCPI 1999 vol. 2). */
export function explainScpiError(code: number): string {
  if (code === -350) return 'the instrument\'s error queue overflowed: some errors were lost';
  if (code === -222) return 'a value is out of the instrument\'s range';
  if (code === -221) return 'the setting conflicts with the instrument\'s state (e.g. output off)';
  if (code === -113) return 'the instrument does not know this command: check the dialect';
  if (code <= -100 && code > -200) return 'command error: the dialect sent something the instrument cannot parse';
  if (code <= -200 && code > -300) return 'execution error: the instrument could not carry out a valid command';
  if (code <= -300 && code > -400) return 'device-specific error: a hardware or firmware fault';
  if (code <= -400 && code > -500) return 'query error: a reply was lost or a query was incomplete';
  if (code > 0) return 'instrument-specific error: see the instrument manual';
  return 'see the instrument manual';
}

export interface SessionOptions {
  /** Terminator appended to every message: '\n' (default) or '\r\n'. */
  readonly terminator?: string;
  readonly timeoutMs?: number;
}

export class ScpiSession {
  private readonly framer = new LineFramer();
  private pending: { resolve: (l: string) => void; reject: (e: Error) => void; timer: NodeJS.Timeout } | undefined;
  private queue: Promise<unknown> = Promise.resolve();
  private closed = false;
  private readonly terminator: string;
  readonly timeoutMs: number;
  /** Replies that arrived with no query waiting (a desync). */
  strayLines = 0;
  /** The commands sent, most recent last (the last 10,000 to 20,000; older ones are dropped). */
  readonly sent: string[] = [];

  constructor(readonly stream: Duplex, options: SessionOptions = {}) {
    this.terminator = options.terminator ?? '\n';
    this.timeoutMs = options.timeoutMs ?? 2000;
    stream.pipe(this.framer);
    this.framer.on('data', (line: string) => {
      const p = this.pending;
      if (!p) {
        this.strayLines++;
        return;
      }
      this.pending = undefined;
      clearTimeout(p.timer);
      p.resolve(line);
    });
    const onClose = () => {
      this.closed = true;
      const p = this.pending;
      this.pending = undefined;
      if (p) {
        clearTimeout(p.timer);
        p.reject(new ScpiDisconnectError('the instrument connection closed'));
      }
    };
    stream.on('close', onClose);
    stream.on('end', onClose);
    stream.on('error', onClose);
  }

  get isClosed(): boolean {
    return this.closed;
  }

  private writeRaw(msg: string): Promise<void> {
    if (this.closed) return Promise.reject(new ScpiDisconnectError('the instrument connection is closed'));
    this.sent.push(msg);
    if (this.sent.length > 20000) this.sent.splice(0, 10000);
    return new Promise((resolve, reject) => {
      this.stream.write(msg + this.terminator, 'latin1', (err) => (err ? reject(new ScpiDisconnectError(err.message)) : resolve()));
    });
  }

  private serial<T>(fn: () => Promise<T>): Promise<T> {
    const run = this.queue.then(fn, fn);
    this.queue = run.catch(() => undefined);
    return run;
  }

  /** Sends a command that has no reply. */
  write(msg: string): Promise<void> {
    return this.serial(() => this.writeRaw(msg));
  }

  /** Sends a query and resolves with its one reply line. */
  query(msg: string, timeoutMs = this.timeoutMs): Promise<string> {
    return this.serial(
      () =>
        new Promise<string>((resolve, reject) => {
          const timer = setTimeout(() => {
            this.pending = undefined;
            reject(new ScpiTimeoutError(`no reply to '${msg}' within ${timeoutMs} ms`));
          }, timeoutMs);
          this.pending = { resolve, reject, timer };
          this.writeRaw(msg).catch((e: Error) => {
            clearTimeout(timer);
            this.pending = undefined;
            reject(e);
          });
        }),
    );
  }

  /** Reads SYSTem:ERRor? until "0,..." (at most `cap` entries). */
  async drainErrors(cap = 64): Promise<{ code: number; text: string }[]> {
    const out: { code: number; text: string }[] = [];
    for (let k = 0; k < cap; k++) {
      const line = await this.query(':SYST:ERR?');
      const m = /^\s*([+-]?\d+)\s*,\s*"(.*)"\s*$/s.exec(line);
      if (!m) {
        out.push({ code: -999, text: `unparsable error reply '${line.slice(0, 80)}'` });
        break;
      }
      const code = Number(m[1]);
      if (code === 0) break;
      out.push({ code, text: m[2] });
    }
    return out;
  }

  /** Drains the error queue and throws if anything was there. */
  async checkErrors(context: string): Promise<void> {
    const errs = await this.drainErrors();
    if (errs.length) throw new ScpiInstrumentError(errs, context);
  }

  close(): void {
    this.closed = true;
    this.stream.destroy();
  }
}
