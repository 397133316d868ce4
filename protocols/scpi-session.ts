/**
 * SCPI message layer over a byte transport (IEEE 488.2 message exchange on serial/TCP: every
 * program message ends with the terminator; every reply is one line). One query outstanding at a
 * time, each with a timeout.
 *
 * Safety paths:
 *  - `urgent()` writes at once, ahead of anything queued and even while a query waits for its
 *    reply (raw sockets and serial lines have no device clear, so this is the fastest way to reach
 *    the instrument's parser);
 *  - `cancelQueued()` drops every command queued but not yet written, so nothing sent after an
 *    output off can follow it onto the wire;
 *  - a line that arrives with no query waiting is reported through `onStray` (the replies are out of
 *    step with the queries: every later reply would land on the wrong query).
 */
import type { Duplex } from 'node:stream';
import { LineFramer, type ReadTerminator } from './line-framer.js';

export class ScpiTimeoutError extends Error {
  readonly code = 'SCPI_TIMEOUT';
}
export class ScpiDisconnectError extends Error {
  readonly code = 'SCPI_DISCONNECTED';
}
/** A reply that cannot belong to its query (too long, wrong shape): the exchange is out of step. */
export class ScpiReplyError extends Error {
  readonly code = 'SCPI_BAD_REPLY';
}
/** A queued command dropped by `cancelQueued` before it reached the wire. */
export class ScpiCancelledError extends Error {
  readonly code = 'SCPI_CANCELLED';
}
export class ScpiInstrumentError extends Error {
  readonly code = 'SCPI_INSTRUMENT_ERROR';
  constructor(
    readonly errors: { code: number; text: string }[],
    context: string,
  ) {
    super(`${context}: ${errors.map((e) => `${e.code} ${e.text} (${explainScpiError(e.code)})`).join('; ')}`);
  }
}

/** Plain-words meaning of the standard SCPI error classes (SCPI 1999 vol. 2). */
export function explainScpiError(code: number): string {
  if (code === -350) return "the instrument's error queue overflowed: some errors were lost";
  if (code === -222) return "a value is out of the instrument's range";
  if (code === -221) return "the setting conflicts with the instrument's state (e.g. output off)";
  if (code === -113) return 'the instrument does not know this command: check the dialect';
  if (code <= -100 && code > -200) return 'command error: the dialect sent something the instrument cannot parse';
  if (code <= -200 && code > -300) return 'execution error: the instrument could not carry out a valid command';
  if (code <= -300 && code > -400) return 'device-specific error: a hardware or firmware fault';
  if (code <= -400 && code > -500) return 'query error: a reply was lost or a query was incomplete';
  if (code > 0) return 'instrument-specific error: see the instrument manual';
  return 'see the instrument manual';
}

/** What ends every message the session writes. */
export type WriteTerminator = '\n' | '\r\n' | '\r';

export interface SessionOptions {
  /** Appended to every message (default '\n'). */
  readonly terminator?: WriteTerminator;
  /** What ends a reply (default 'lf': LF, a trailing CR stripped). */
  readonly readTerminator?: ReadTerminator;
  /** Reply timeout of each query, ms (default 2000). */
  readonly timeoutMs?: number;
  /** Least time between two messages, ms (slow serial parsers; default 0). Urgent writes ignore it. */
  readonly commandDelayMs?: number;
  /** Longest reply line, characters (default 4096). */
  readonly maxLine?: number;
  /** The error-queue query (default ':SYST:ERR?'). */
  readonly errorQuery?: string;
}

const sleep = (ms: number) => new Promise<void>((r) => setTimeout(r, ms));

interface Pending {
  readonly msg: string;
  readonly resolve: (l: string) => void;
  readonly reject: (e: Error) => void;
  readonly timer: NodeJS.Timeout;
  readonly accept?: RegExp;
}

export class ScpiSession {
  private readonly framer: LineFramer;
  private pending: Pending | undefined;
  private queue: Promise<unknown> = Promise.resolve();
  private closed = false;
  private epoch = 0;
  private cancelReason = 'cancelled';
  private lastWriteAt = -Infinity;
  private lastLineAt = -Infinity;
  private resyncing = false;
  private readonly terminator: WriteTerminator;
  private readonly commandDelayMs: number;
  private readonly errorQuery: string;
  readonly timeoutMs: number;
  /** Replies that arrived with no query waiting. */
  strayLines = 0;
  /** Replies owed by queries that timed out (a late one is discarded, not taken as the next reply). */
  private owed = 0;
  /** Lines discarded as late replies, or while resynchronising. */
  discarded = 0;
  /** Called for each line that arrives with no query waiting for it. */
  onStray: ((line: string) => void) | undefined;
  /** The messages written, most recent last (the last 10,000 to 20,000; older ones are dropped). */
  readonly sent: string[] = [];

  constructor(
    readonly stream: Duplex,
    options: SessionOptions = {},
  ) {
    this.terminator = options.terminator ?? '\n';
    if (!['\n', '\r\n', '\r'].includes(this.terminator)) throw new TypeError(`terminator must be LF, CR LF or CR, got ${JSON.stringify(this.terminator)}`);
    this.timeoutMs = options.timeoutMs ?? 2000;
    if (!(this.timeoutMs > 0)) throw new TypeError(`timeoutMs must be positive, got ${this.timeoutMs}`);
    this.commandDelayMs = options.commandDelayMs ?? 0;
    if (!(this.commandDelayMs >= 0)) throw new TypeError(`commandDelayMs must be ≥ 0, got ${this.commandDelayMs}`);
    this.errorQuery = options.errorQuery ?? ':SYST:ERR?';
    this.framer = new LineFramer({ maxLine: options.maxLine ?? 4096, terminator: options.readTerminator ?? 'lf' });
    stream.pipe(this.framer);
    this.framer.on('data', (line: string) => this.onLine(line));
    this.framer.on('overlong', (max: number) => {
      const p = this.pending;
      if (!p) return;
      this.settle(p);
      p.reject(
        new ScpiReplyError(
          `the reply to '${p.msg}' is longer than ${max} characters (a lost terminator, or the dialect's read terminator does not match the instrument's)`,
        ),
      );
    });
    const onClose = (err?: Error) => {
      this.closed = true;
      const p = this.pending;
      if (p) {
        this.settle(p);
        p.reject(
          new ScpiDisconnectError(`the instrument connection closed${err?.message ? ` (${err.message})` : ''} while waiting for the reply to '${p.msg}'`),
        );
      }
    };
    stream.on('close', () => onClose());
    stream.on('end', () => onClose());
    stream.on('error', (e: Error) => onClose(e));
  }

  private onLine(line: string): void {
    this.lastLineAt = performance.now();
    const p = this.pending;
    if (!p) {
      if (this.owed > 0 || this.resyncing) {
        if (this.owed > 0) this.owed--;
        this.discarded++;
        return;
      }
      this.strayLines++;
      this.onStray?.(line);
      return;
    }
    if (p.accept && !p.accept.test(line.trim())) {
      this.discarded++;
      return;
    }
    this.settle(p);
    p.resolve(line);
  }

  private settle(p: Pending): void {
    if (this.pending === p) this.pending = undefined;
    clearTimeout(p.timer);
  }

  get isClosed(): boolean {
    return this.closed;
  }

  /** Whether replies may still arrive that no query waits for (after a timeout or a stray line). */
  get unsettled(): boolean {
    return this.owed > 0 || this.strayLines > 0;
  }

  /** Whether a query is waiting for its reply. */
  get awaitingReply(): boolean {
    return this.pending !== undefined;
  }

  private writeRaw(msg: string): Promise<void> {
    if (this.closed) return Promise.reject(new ScpiDisconnectError('the instrument connection is closed'));
    this.sent.push(msg);
    if (this.sent.length > 20000) this.sent.splice(0, 10000);
    this.lastWriteAt = performance.now();
    return new Promise((resolve, reject) => {
      try {
        this.stream.write(msg + this.terminator, 'latin1', (err) => (err ? reject(new ScpiDisconnectError(err.message)) : resolve()));
      } catch (e) {
        reject(new ScpiDisconnectError((e as Error).message));
      }
    });
  }

  private serial<T>(fn: () => Promise<T>): Promise<T> {
    const epoch = this.epoch;
    const step = async (): Promise<T> => {
      if (epoch !== this.epoch) throw new ScpiCancelledError(this.cancelReason);
      // Timers may fire a fraction of a millisecond early: wait until the gap is really there.
      for (
        let wait = this.lastWriteAt + this.commandDelayMs - performance.now();
        this.commandDelayMs > 0 && wait > 0;
        wait = this.lastWriteAt + this.commandDelayMs - performance.now()
      ) {
        await sleep(Math.ceil(wait));
      }
      if (epoch !== this.epoch) throw new ScpiCancelledError(this.cancelReason);
      return fn();
    };
    const run = this.queue.then(step, step);
    this.queue = run.catch(() => undefined);
    return run;
  }

  /** Sends a command that has no reply. */
  write(msg: string): Promise<void> {
    return this.serial(() => this.writeRaw(msg));
  }

  /**
   * Sends a query and resolves with its one reply line. With `accept`, lines that do not match are
   * discarded (late replies of an earlier exchange) until one does or the time runs out.
   */
  query(msg: string, timeoutMs = this.timeoutMs, accept?: RegExp): Promise<string> {
    return this.serial(
      () =>
        new Promise<string>((resolve, reject) => {
          const timer = setTimeout(() => {
            if (this.pending?.timer === timer) this.pending = undefined;
            this.owed++;
            reject(new ScpiTimeoutError(`no reply to '${msg}' within ${timeoutMs} ms`));
          }, timeoutMs);
          this.pending = { msg, resolve, reject, timer, accept };
          this.writeRaw(msg).catch((e: Error) => {
            clearTimeout(timer);
            if (this.pending?.timer === timer) this.pending = undefined;
            reject(e);
          });
        }),
    );
  }

  /**
   * Writes at once, ahead of the queue and even while a query waits for its reply; never throws.
   * Resolves true when every message was handed to the transport.
   */
  urgent(messages: readonly string[]): Promise<boolean> {
    if (this.closed) return Promise.resolve(false);
    // Every message is handed to the stream in this same tick (no await in between).
    const writes = messages.map((m) => this.writeRaw(m));
    return Promise.all(writes).then(
      () => true,
      () => false,
    );
  }

  /** Drops every command queued but not yet written; they reject with ScpiCancelledError(reason). */
  cancelQueued(reason: string): void {
    this.epoch++;
    this.cancelReason = reason;
  }

  /**
   * Waits (through the queue) until nothing has arrived for `quietMs`, discarding what arrives: the
   * recovery after a timeout or a stray line, before a query whose answer matters. Gives up after
   * `maxMs` of chatter.
   */
  resync(quietMs = 150, maxMs = this.timeoutMs): Promise<void> {
    return this.serial(async () => {
      const t0 = performance.now();
      this.owed = 0;
      this.resyncing = true;
      try {
        for (;;) {
          const since = performance.now() - Math.max(this.lastLineAt, t0);
          if (since >= quietMs || performance.now() - t0 >= maxMs) return;
          await sleep(quietMs - since);
        }
      } finally {
        this.resyncing = false;
      }
    });
  }

  /** Reads the error queue until "0,..." (at most `cap` entries). */
  async drainErrors(cap = 64): Promise<{ code: number; text: string }[]> {
    const out: { code: number; text: string }[] = [];
    for (let k = 0; k < cap; k++) {
      const line = await this.query(this.errorQuery);
      const m = /^\s*([+-]?\d+)\s*,\s*"(.*)"\s*$/s.exec(line);
      if (!m) {
        throw new ScpiReplyError(
          `the reply to '${this.errorQuery}' is '${line.slice(0, 80)}', not an error-queue entry (code,"text"): replies are out of step with the queries`,
        );
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
