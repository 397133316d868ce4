/**
 * Splits a byte stream into lines and caps the line length: a line longer than maxLine is discarded
 * (counted, and announced with an 'overlong' event) up to its terminator, so a lost terminator or
 * garbage cannot grow memory without bound. Lines split across chunks are reassembled.
 *
 * Terminators: 'lf' (default; a trailing CR is stripped, so CR LF works too), 'crlf' (the same
 * splitting: LF ends the line and the CR before it is dropped) or 'cr' (instruments that end their
 * replies with a bare carriage return; a LF right after it is ignored).
 */
import { Transform, type TransformCallback } from 'node:stream';

export type ReadTerminator = 'lf' | 'crlf' | 'cr';

export interface LineFramerOptions {
  /** Longest line kept, characters (default 4096). */
  readonly maxLine?: number;
  /** What ends a line (default 'lf'). */
  readonly terminator?: ReadTerminator;
}

export class LineFramer extends Transform {
  private buf = '';
  private discarding = false;
  private lastWasCr = false;
  readonly maxLine: number;
  readonly terminator: ReadTerminator;
  overlong = 0;

  constructor(options: LineFramerOptions = {}) {
    super({ readableObjectMode: true });
    const max = options.maxLine ?? 4096;
    if (!Number.isInteger(max) || max < 1) throw new TypeError(`maxLine must be a positive integer, got ${max}`);
    const term = options.terminator ?? 'lf';
    if (term !== 'lf' && term !== 'crlf' && term !== 'cr') throw new TypeError(`terminator must be 'lf', 'crlf' or 'cr', got ${String(term)}`);
    this.maxLine = max;
    this.terminator = term;
  }

  private tooLong(): void {
    this.overlong++;
    this.emit('overlong', this.maxLine);
  }

  override _transform(chunk: Buffer | string, _enc: BufferEncoding, done: TransformCallback): void {
    let text = typeof chunk === 'string' ? chunk : chunk.toString('latin1');
    const cr = this.terminator === 'cr';
    if (cr && this.lastWasCr && text.startsWith('\n')) text = text.slice(1);
    const sep = cr ? '\r' : '\n';
    let start = 0;
    for (;;) {
      const nl = text.indexOf(sep, start);
      if (nl < 0) break;
      const piece = text.slice(start, nl);
      if (this.discarding) {
        this.discarding = false;
      } else {
        const line = this.buf + piece;
        this.buf = '';
        if (line.length > this.maxLine) this.tooLong();
        else this.push(!cr && line.endsWith('\r') ? line.slice(0, -1) : line);
      }
      start = nl + 1;
      // CR LF on a CR-terminated link: the LF belongs to the terminator just read.
      if (cr && text[start] === '\n') start++;
    }
    if (cr) this.lastWasCr = text.endsWith('\r');
    if (!this.discarding) {
      this.buf += text.slice(start);
      if (this.buf.length > this.maxLine) {
        this.buf = '';
        this.discarding = true;
        this.tooLong();
      }
    }
    done();
  }

  override _flush(done: TransformCallback): void {
    if (this.buf.length > 0 && !this.discarding) this.push(this.buf.endsWith('\r') ? this.buf.slice(0, -1) : this.buf);
    this.buf = '';
    done();
  }
}
