/**
 * Follows a text file another program is still appending to (a CSV an acquisition script writes).
 * Polls the file (fs.watch misses events on some file systems), reads what was appended, frames it
 * into lines, and survives truncation (size shrinks: start again from the top) and rotation (the
 * path now names a new file: open it and start from its top). A partial last line waits for its
 * terminator.
 */
import { EventEmitter } from 'node:events';
import { open, stat, type FileHandle } from 'node:fs/promises';

export interface TailOptions {
  readonly pollMs?: number;
  /** Start at the beginning (default) or at the current end of the file. */
  readonly fromStart?: boolean;
  readonly maxLine?: number;
}

export interface TailEvents {
  line: [line: string, lineNumber: number];
  truncated: [];
  rotated: [];
  error: [err: Error];
}

export class FileTail extends EventEmitter<TailEvents> {
  private fh: FileHandle | undefined;
  private ino = -1;
  private pos = 0;
  private partial = '';
  private lineNo = 0;
  private timer: NodeJS.Timeout | undefined;
  private busy = false;
  private stopped = false;
  readonly pollMs: number;
  readonly maxLine: number;
  overlong = 0;

  constructor(
    readonly path: string,
    private readonly options: TailOptions = {},
  ) {
    super();
    this.pollMs = options.pollMs ?? 50;
    this.maxLine = options.maxLine ?? 65536;
  }

  async start(): Promise<void> {
    await this.reopen(this.options.fromStart === false);
    this.timer = setInterval(() => void this.poll(), this.pollMs);
  }

  private async reopen(atEnd: boolean): Promise<void> {
    await this.fh?.close().catch(() => undefined);
    this.fh = undefined;
    try {
      this.fh = await open(this.path, 'r');
      const st = await this.fh.stat();
      this.ino = st.ino;
      this.pos = atEnd ? st.size : 0;
    } catch {
      this.ino = -1; // not there yet: keep polling
      this.pos = 0;
    }
    this.partial = '';
    this.lineNo = 0;
  }

  /** One poll: detect rotation/truncation, then read and emit whatever was appended. */
  async poll(): Promise<void> {
    if (this.busy || this.stopped) return;
    this.busy = true;
    try {
      let st: Awaited<ReturnType<typeof stat>>;
      try {
        st = await stat(this.path);
      } catch {
        return; // rotated away and not yet re-created
      }
      if (st.ino !== this.ino) {
        await this.reopen(false);
        if (this.ino !== -1) this.emit('rotated');
      } else if (st.size < this.pos) {
        this.pos = 0;
        this.partial = '';
        this.lineNo = 0;
        this.emit('truncated');
      }
      if (!this.fh) return;
      const size = (await this.fh.stat()).size;
      while (this.pos < size) {
        const len = Math.min(size - this.pos, 1 << 20);
        const buf = Buffer.alloc(len);
        const { bytesRead } = await this.fh.read(buf, 0, len, this.pos);
        if (bytesRead === 0) break;
        this.pos += bytesRead;
        this.consume(buf.toString('utf8', 0, bytesRead));
      }
    } catch (e) {
      this.emit('error', e as Error);
    } finally {
      this.busy = false;
    }
  }

  private consume(text: string): void {
    let start = 0;
    for (;;) {
      const nl = text.indexOf('\n', start);
      if (nl < 0) break;
      let line = this.partial + text.slice(start, nl);
      this.partial = '';
      if (line.endsWith('\r')) line = line.slice(0, -1);
      this.lineNo++;
      if (line.length > this.maxLine) this.overlong++;
      else this.emit('line', line, this.lineNo);
      start = nl + 1;
    }
    this.partial += text.slice(start);
    if (this.partial.length > this.maxLine) {
      this.overlong++;
      this.partial = '';
    }
  }

  async stop(): Promise<void> {
    this.stopped = true;
    if (this.timer) clearInterval(this.timer);
    await this.fh?.close().catch(() => undefined);
  }
}
