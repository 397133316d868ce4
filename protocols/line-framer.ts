/**
 * Splits a byte stream into lines on LF, strips a trailing CR, and caps the line length: a line
 * longer than maxLine is discarded (counted) up to its terminator, so a lost terminator or garbage
 * cannot grow memory without bound. Lines split across chunks are reassembled.
 */
import { Transform, type TransformCallback } from 'node:stream';

export interface LineFramerOptions {
  readonly maxLine?: number;
}

export class LineFramer extends Transform {
  private buf = '';
  private discarding = false;
  readonly maxLine: number;
  overlong = 0;

  constructor(options: LineFramerOptions = {}) {
    super({ readableObjectMode: true });
    const max = options.maxLine ?? 4096;
    if (!Number.isInteger(max) || max < 1) throw new TypeError(`maxLine must be a positive integer, got ${max}`);
    this.maxLine = max;
  }

  override _transform(chunk: Buffer | string, _enc: BufferEncoding, done: TransformCallback): void {
    const text = typeof chunk === 'string' ? chunk : chunk.toString('latin1');
    let start = 0;
    for (;;) {
      const nl = text.indexOf('\n', start);
      if (nl < 0) break;
      const piece = text.slice(start, nl);
      if (this.discarding) {
        this.discarding = false;
      } else {
        const line = this.buf + piece;
        this.buf = '';
        if (line.length > this.maxLine) this.overlong++;
        else this.push(line.endsWith('\r') ? line.slice(0, -1) : line);
      }
      start = nl + 1;
    }
    if (!this.discarding) {
      this.buf += text.slice(start);
      if (this.buf.length > this.maxLine) {
        this.buf = '';
        this.discarding = true;
        this.overlong++;
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
