/** Starting the real daemon (the built CLI) as a child process, and talking to it as a page would. */
import { spawn, spawnSync, type ChildProcess } from 'node:child_process';
import { mkdtempSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { WebSocket } from 'ws';
import { unpackReading, type ServerMessage, type WireEvent } from '../../protocols/wire.js';
import { CLI } from './cli.js';

export function tempDir(prefix = 'plumbline-daemon-'): string {
  return mkdtempSync(join(tmpdir(), prefix));
}

export function writeConfig(dir: string, config: Record<string, unknown>): string {
  const file = join(dir, 'station.json');
  writeFileSync(
    file,
    JSON.stringify({
      dialect: 'protection-trip',
      limits: { maxVoltage: 20, maxCompliance: 0.01, maxPower: 0.1, rampDelay: 0 },
      server: { host: '127.0.0.1', port: 0 },
      ...config,
    }),
  );
  return file;
}

export interface DaemonProcess {
  readonly url: string;
  readonly proc: ChildProcess;
  output(): string;
  stop(): Promise<void>;
}

/** `plumbline serve` on a free port; resolves once it prints its page address. */
export function startDaemon(args: string[]): Promise<DaemonProcess> {
  const proc = spawn(process.execPath, [CLI, 'serve', '--port', '0', ...args], { stdio: ['ignore', 'pipe', 'pipe'] });
  let out = '';
  proc.stdout?.on('data', (d) => (out += String(d)));
  proc.stderr?.on('data', (d) => (out += String(d)));
  return new Promise((resolve, reject) => {
    const t = setTimeout(() => reject(new Error(`daemon did not start: ${out}`)), 20_000);
    const check = () => {
      const m = /page\s+(http:\/\/\S+)/.exec(out);
      if (m) {
        clearTimeout(t);
        resolve({
          url: m[1].replace(/\/$/, ''),
          proc,
          output: () => out,
          stop: () =>
            new Promise<void>((r) => {
              if (proc.exitCode !== null) return r();
              proc.once('exit', () => r());
              proc.kill('SIGTERM');
            }),
        });
      }
    };
    proc.stdout?.on('data', check);
    proc.once('exit', (code) => {
      clearTimeout(t);
      reject(new Error(`daemon exited with ${code}: ${out}`));
    });
  });
}

export async function api(
  url: string,
  method: string,
  path: string,
  body?: unknown,
  headers: Record<string, string> = {},
): Promise<{ status: number; json: any }> {
  const r = await fetch(url + path, {
    // A request that hangs fails the test with its path instead of stalling it.
    signal: AbortSignal.timeout(15_000),
    method,
    headers: { ...(body !== undefined ? { 'content-type': 'application/json' } : {}), ...headers },
    body: body !== undefined ? JSON.stringify(body) : undefined,
  });
  const text = await r.text();
  let json: unknown;
  try {
    json = JSON.parse(text);
  } catch {
    json = text;
  }
  return { status: r.status, json };
}

/** A websocket viewer that keeps every event it receives, deduplicated by sequence number. */
export class Viewer {
  readonly ws: WebSocket;
  readonly events: WireEvent[] = [];
  readonly messages: ServerMessage[] = [];
  private lastSeq = 0;
  private waiters: { pred: (e: WireEvent) => boolean; resolve: (e: WireEvent) => void }[] = [];

  constructor(url: string, origin?: string) {
    this.ws = new WebSocket(`${url.replace(/^http/, 'ws')}/ws`, origin ? { origin } : {});
    this.ws.on('message', (data) => {
      const m = JSON.parse(String(data)) as ServerMessage;
      this.messages.push(m);
      const evs: WireEvent[] =
        m.kind === 'snapshot'
          ? [...m.snapshot.events, ...m.snapshot.readings.map(unpackReading)]
          : m.kind === 'events'
            ? [...m.events, ...m.readings.map(unpackReading)]
            : [];
      evs.sort((a, b) => a.seq - b.seq);
      for (const e of evs) {
        if (e.type === 'session') this.lastSeq = 0;
        if (e.seq <= this.lastSeq) continue;
        this.lastSeq = e.seq;
        this.events.push(e);
        this.waiters = this.waiters.filter((w) => {
          if (!w.pred(e)) return true;
          w.resolve(e);
          return false;
        });
      }
    });
  }

  open(): Promise<void> {
    return new Promise((resolve, reject) => {
      this.ws.once('open', () => resolve());
      this.ws.once('error', reject);
      this.ws.once('unexpected-response', (_req, res) => reject(new Error(`upgrade refused: ${res.statusCode}`)));
    });
  }

  waitFor(pred: (e: WireEvent) => boolean, timeoutMs = 60_000): Promise<WireEvent> {
    const found = this.events.find(pred);
    if (found) return Promise.resolve(found);
    return new Promise((resolve, reject) => {
      const t = setTimeout(() => reject(new Error(`timed out waiting; last events: ${JSON.stringify(this.events.slice(-3))}`)), timeoutMs);
      this.waiters.push({
        pred,
        resolve: (e) => {
          clearTimeout(t);
          resolve(e);
        },
      });
    });
  }

  close(): void {
    this.ws.terminate();
  }
}

/** Runs the built CLI to the end without blocking this process (a simulator here must keep answering). */
export function runCliAsync(args: string[], timeoutMs = 120_000): Promise<{ code: number; stdout: string; stderr: string }> {
  return new Promise((resolve) => {
    const p = spawn(process.execPath, [CLI, ...args]);
    let stdout = '';
    let stderr = '';
    const t = setTimeout(() => p.kill('SIGKILL'), timeoutMs);
    p.stdout.on('data', (d) => (stdout += String(d)));
    p.stderr.on('data', (d) => (stderr += String(d)));
    p.on('exit', (code) => {
      clearTimeout(t);
      resolve({ code: code ?? -1, stdout, stderr });
    });
  });
}

/** Polls until pred() holds; rejects with `what` after timeoutMs. */
export async function waitUntil(pred: () => boolean, what: string, timeoutMs = 20_000): Promise<void> {
  const t0 = Date.now();
  while (!pred()) {
    if (Date.now() - t0 > timeoutMs) throw new Error(`timed out waiting for ${what}`);
    await new Promise((r) => setTimeout(r, 10));
  }
}

/**
 * A small tmpfs (a real file system that fills up) at a new folder; needs root or passwordless
 * sudo, as the test command's own setup does. Returns the folder and a function that unmounts it.
 */
export function smallDisk(kilobytes: number): { dir: string; release(): void } {
  const dir = tempDir('plumbline-disk-');
  const root = typeof process.getuid === 'function' && process.getuid() === 0;
  const pre = root ? [] : ['sudo', '-n'];
  const run = (args: string[]) => {
    const cmd = pre.length ? pre[0] : args[0];
    const rest = pre.length ? [...pre.slice(1), ...args] : args.slice(1);
    const r = spawnSync(cmd, rest, { encoding: 'utf8' });
    if (r.status !== 0) throw new Error(`${args.join(' ')} failed (the disk-full test needs root or passwordless sudo): ${r.stderr || r.error?.message}`);
  };
  run(['mount', '-t', 'tmpfs', '-o', `size=${kilobytes}k`, 'tmpfs', dir]);
  return { dir, release: () => run(['umount', '-l', dir]) };
}
