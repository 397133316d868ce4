/**
 * Real services for the lab tests, private to each test file: a Mosquitto broker on a free loopback
 * port and a throwaway PostgreSQL cluster reached over a Unix socket in its own temporary folder.
 * Both come from Debian; when a binary is missing, the project's setup script installs it
 * (daemon/bootstrap/ensure.mjs --system) — a test never skips because a service is absent.
 *
 * Everything started here is stopped in the caller's afterAll, and killed by pid on the way out if
 * the test process ends without it.
 */
import { spawn, spawnSync, type ChildProcess } from 'node:child_process';
import { chmodSync, chownSync, existsSync, mkdtempSync, readdirSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { createServer } from 'node:net';
import { tmpdir, userInfo } from 'node:os';
import { join } from 'node:path';
import { projectRoot } from '../../protocols/project-root.js';

const children = new Set<number>();
process.on('exit', () => {
  for (const pid of children) {
    try {
      process.kill(pid, 'SIGKILL');
    } catch {
      /* already gone */
    }
  }
});

function ensureInstalled(check: () => string | undefined, what: string): string {
  let found = check();
  if (found) return found;
  const r = spawnSync(process.execPath, [join(projectRoot(), 'daemon', 'bootstrap', 'ensure.mjs'), '--system'], { stdio: 'inherit' });
  found = check();
  if (!found) throw new Error(`${what} is not installed and the setup script could not install it (exit ${r.status})`);
  return found;
}

function which(paths: string[]): string | undefined {
  return paths.find((p) => existsSync(p));
}

function pgBin(): string | undefined {
  const root = '/usr/lib/postgresql';
  if (!existsSync(root)) return undefined;
  const majors = readdirSync(root)
    .filter((v) => existsSync(join(root, v, 'bin', 'initdb')))
    .sort((a, b) => Number(b) - Number(a));
  return majors.length ? join(root, majors[0], 'bin') : undefined;
}

/** A free TCP port on 127.0.0.1 (bound, then released). */
export function freePort(): Promise<number> {
  return new Promise((resolve, reject) => {
    const s = createServer();
    s.once('error', reject);
    s.listen(0, '127.0.0.1', () => {
      const port = (s.address() as { port: number }).port;
      s.close(() => resolve(port));
    });
  });
}

function waitFor(pred: () => boolean | Promise<boolean>, timeoutMs: number, what: string): Promise<void> {
  const until = Date.now() + timeoutMs;
  return new Promise((resolve, reject) => {
    const tick = async () => {
      if (await pred()) return resolve();
      if (Date.now() > until) return reject(new Error(`timed out waiting for ${what}`));
      setTimeout(tick, 50);
    };
    void tick();
  });
}

function portOpen(port: number): Promise<boolean> {
  return new Promise((resolve) => {
    import('node:net').then(({ connect }) => {
      const c = connect(port, '127.0.0.1');
      c.once('connect', () => {
        c.destroy();
        resolve(true);
      });
      c.once('error', () => resolve(false));
    });
  });
}

const isRoot = userInfo().uid === 0;

export interface Broker {
  readonly port: number;
  /** mqtt://127.0.0.1:PORT (with user:password when the broker requires them). */
  readonly url: string;
  pid(): number | undefined;
  /** Ends the broker with SIGKILL (no goodbye to clients, nothing saved). */
  kill9(): Promise<void>;
  /** Starts it again on the same port. */
  restart(): Promise<void>;
  stop(): Promise<void>;
  log(): string;
}

/**
 * A private Mosquitto broker on a free loopback port: no persistence, queues large enough for a
 * test's offline subscribers. `user` makes it require that name and password; `port` picks the port.
 */
export async function startMosquitto(options: { user?: { name: string; password: string }; port?: number } = {}): Promise<Broker> {
  const bin = ensureInstalled(() => which(['/usr/sbin/mosquitto', '/usr/bin/mosquitto']), 'mosquitto');
  const dir = mkdtempSync(join(tmpdir(), 'plumbline-mosquitto-'));
  chmodSync(dir, 0o755);
  const port = options.port ?? (await freePort());
  const lines = [
    `listener ${port} 127.0.0.1`,
    'persistence false',
    'log_dest stderr',
    'log_type error',
    'log_type warning',
    'max_queued_messages 0',
    'max_inflight_messages 20',
  ];
  if (options.user) {
    const pw = join(dir, 'passwd');
    writeFileSync(pw, '');
    const r = spawnSync('mosquitto_passwd', ['-b', pw, options.user.name, options.user.password], { encoding: 'utf8' });
    if (r.status !== 0) throw new Error(`mosquitto_passwd failed: ${r.stderr}`);
    chmodSync(pw, 0o640);
    if (isRoot) {
      const gid = Number(spawnSync('id', ['-g', 'mosquitto'], { encoding: 'utf8' }).stdout.trim());
      if (gid > 0) chownSync(pw, 0, gid);
    }
    lines.push('allow_anonymous false', `password_file ${pw}`);
  } else lines.push('allow_anonymous true');
  const conf = join(dir, 'mosquitto.conf');
  writeFileSync(conf, `${lines.join('\n')}\n`);
  chmodSync(conf, 0o644);
  let child: ChildProcess | undefined;
  let out = '';
  const launch = async () => {
    out = '';
    child = spawn(bin, ['-c', conf], { stdio: ['ignore', 'pipe', 'pipe'] });
    const c = child;
    children.add(c.pid!);
    c.stdout?.on('data', (d) => (out += String(d)));
    c.stderr?.on('data', (d) => (out += String(d)));
    c.once('exit', () => children.delete(c.pid!));
    await waitFor(
      async () => {
        if (c.exitCode !== null) throw new Error(`mosquitto exited (${c.exitCode}): ${out}`);
        return portOpen(port);
      },
      10_000,
      `mosquitto on port ${port}`,
    );
  };
  const end = (signal: NodeJS.Signals) =>
    new Promise<void>((resolve) => {
      const c = child;
      if (!c || c.exitCode !== null || c.signalCode !== null) return resolve();
      c.once('exit', () => resolve());
      c.kill(signal);
    });
  await launch();
  const auth = options.user ? `${encodeURIComponent(options.user.name)}:${encodeURIComponent(options.user.password)}@` : '';
  return {
    port,
    url: `mqtt://${auth}127.0.0.1:${port}`,
    pid: () => child?.pid,
    kill9: () => end('SIGKILL'),
    restart: launch,
    stop: async () => {
      await end('SIGTERM');
      rmSync(dir, { recursive: true, force: true });
    },
    log: () => out,
  };
}

export interface Database {
  /** postgres://postgres@/plumbline?host=SOCKET_DIR&port=PORT (Unix socket; no TCP listener). */
  readonly url: string;
  readonly socketDir: string;
  readonly port: number;
  /** Runs SQL with psql and returns its unaligned, tuples-only output. */
  psql(sql: string): string;
  stop(): Promise<void>;
}

/**
 * A throwaway PostgreSQL cluster: initdb in a temporary folder (as the `postgres` user when the
 * tests run as root — initdb refuses root), listening on a Unix socket in that folder only, with
 * a database `plumbline`. Small settings: the machine is shared.
 */
export async function startPostgres(): Promise<Database> {
  const bin = ensureInstalled(pgBin, 'PostgreSQL (initdb)');
  const dir = mkdtempSync(join(tmpdir(), 'plumbline-pg-'));
  const data = join(dir, 'data');
  const port = 20000 + Math.floor(Math.random() * 20000);
  const asUser = (cmd: string, args: string[]) =>
    isRoot ? spawnSync('runuser', ['-u', 'postgres', '--', cmd, ...args], { encoding: 'utf8' }) : spawnSync(cmd, args, { encoding: 'utf8' });
  if (isRoot) {
    const uid = Number(spawnSync('id', ['-u', 'postgres'], { encoding: 'utf8' }).stdout.trim());
    const gid = Number(spawnSync('id', ['-g', 'postgres'], { encoding: 'utf8' }).stdout.trim());
    chownSync(dir, uid, gid);
  }
  const init = asUser(join(bin, 'initdb'), ['-D', data, '-U', 'postgres', '--auth=trust', '--no-sync', '-E', 'UTF8', '--locale=C']);
  if (init.status !== 0) throw new Error(`initdb failed: ${init.stderr}`);
  const opts = `-c listen_addresses='' -k ${dir} -p ${port} -c shared_buffers=32MB -c max_connections=20 -c fsync=on -c max_wal_size=256MB`;
  const start = asUser(join(bin, 'pg_ctl'), ['-D', data, '-l', join(dir, 'server.log'), '-w', '-t', '30', '-o', opts, 'start']);
  if (start.status !== 0)
    throw new Error(`pg_ctl start failed: ${start.stderr}${existsSync(join(dir, 'server.log')) ? readFileSync(join(dir, 'server.log'), 'utf8') : ''}`);
  const pid = Number.parseInt(readFileSync(join(data, 'postmaster.pid'), 'utf8'), 10);
  children.add(pid);
  const psqlBin = join(bin, 'psql');
  const psql = (sql: string, db = 'plumbline') => {
    const r = spawnSync(psqlBin, ['-h', dir, '-p', String(port), '-U', 'postgres', '-d', db, '-X', '-A', '-t', '-v', 'ON_ERROR_STOP=1', '-c', sql], {
      encoding: 'utf8',
      maxBuffer: 1 << 28,
    });
    if (r.status !== 0) throw new Error(`psql: ${r.stderr}`);
    return r.stdout.trim();
  };
  psql('CREATE DATABASE plumbline', 'postgres');
  return {
    url: `postgres://postgres@/plumbline?host=${encodeURIComponent(dir)}&port=${port}`,
    socketDir: dir,
    port,
    psql: (sql) => psql(sql),
    stop: async () => {
      asUser(join(bin, 'pg_ctl'), ['-D', data, '-m', 'immediate', '-w', 'stop']);
      try {
        process.kill(pid, 'SIGKILL');
      } catch {
        /* stopped */
      }
      children.delete(pid);
      rmSync(dir, { recursive: true, force: true });
    },
  };
}
