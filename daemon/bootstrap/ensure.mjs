#!/usr/bin/env node
// Makes a fresh clone runnable with nothing done before: installs the npm dependencies when they
// are missing or older than the lockfile, compiles the TypeScript, and (with --system) installs the
// Debian packages the integration, browser and reference tests need (socat, chromium, scipy for
// Debian's own python3, and for the lab tests the Mosquitto broker and the PostgreSQL server) when
// they are absent.
// Uses only Node built-ins, because it runs before any dependency exists.
import { spawnSync } from 'node:child_process';
import { existsSync, readdirSync, statSync, writeFileSync } from 'node:fs';
import { dirname, join } from 'node:path';
import { fileURLToPath } from 'node:url';

const root = join(dirname(fileURLToPath(import.meta.url)), '..', '..');
const wantSystem = process.argv.includes('--system');

function run(cmd, args, opts = {}) {
  const r = spawnSync(cmd, args, { cwd: root, stdio: 'inherit', ...opts });
  if (r.error) throw r.error;
  if (r.status !== 0) {
    console.error(`plumbline setup: '${cmd} ${args.join(' ')}' failed (exit ${r.status})`);
    process.exit(r.status ?? 1);
  }
}

function mtime(p) {
  try {
    return statSync(p).mtimeMs;
  } catch {
    return -1;
  }
}

function onPath(name) {
  const r = spawnSync('sh', ['-c', `command -v ${name}`], { stdio: 'ignore' });
  return r.status === 0;
}

/** Debian's own python3 (not a user's virtualenv or pyenv) can import the module. */
function debianPython(module) {
  const r = spawnSync('/usr/bin/python3', ['-c', `import ${module}`], { stdio: 'ignore' });
  return r.status === 0;
}

// Servers that Debian keeps off a user's PATH: mosquitto in /usr/sbin, PostgreSQL's initdb in
// /usr/lib/postgresql/<major>/bin.
function installed(name) {
  if (onPath(name) || existsSync(join('/usr/sbin', name))) return true;
  const pg = '/usr/lib/postgresql';
  return existsSync(pg) && readdirSync(pg).some((v) => existsSync(join(pg, v, 'bin', name)));
}

// 1. npm dependencies: a fresh clone gets exactly the locked versions (npm ci); an existing
// node_modules that is older than the lockfile is brought up to date in place (npm install), never
// wiped.
const stamp = join(root, 'node_modules', '.package-lock.json');
if (!existsSync(join(root, 'node_modules'))) {
  console.error('plumbline setup: node_modules is missing — installing the locked npm dependencies (npm ci) ...');
  run('npm', ['ci', '--no-audit', '--no-fund']);
} else if (!existsSync(stamp) || mtime(join(root, 'package-lock.json')) > mtime(stamp)) {
  console.error('plumbline setup: package-lock.json is newer than node_modules — updating the npm dependencies in place (npm install) ...');
  run('npm', ['install', '--no-audit', '--no-fund']);
}

// 2. Debian packages the tests need
if (wantSystem) {
  // [package, present?]: the statistics tests compare with scipy run by /usr/bin/python3.
  const needed = [
    ['socat', () => onPath('socat')],
    ['chromium', () => onPath('chromium')],
    ['python3-scipy', () => debianPython('scipy')],
    // The README's Python client example is run by a test.
    ['python3-pandas', () => debianPython('pandas')],
    ['mosquitto', () => installed('mosquitto')],
    ['postgresql', () => installed('initdb')],
  ]
    .filter(([, present]) => !present())
    .map(([pkg]) => pkg);
  if (needed.length > 0) {
    const isRoot = typeof process.getuid === 'function' && process.getuid() === 0;
    const sudo = isRoot ? [] : onPath('sudo') ? ['sudo', '-n'] : null;
    if (sudo === null || !onPath('apt-get')) {
      console.error(
        `plumbline setup: the tests need ${needed.join(', ')}; install them with your ` +
          `package manager (Debian: apt-get install ${needed.join(' ')}) and run the tests again.`,
      );
      process.exit(1);
    }
    console.error(`plumbline setup: installing Debian packages: ${needed.join(' ')} ...`);
    const env = { ...process.env, DEBIAN_FRONTEND: 'noninteractive' };
    const pre = sudo.length ? sudo : [];
    const cmd = pre.length ? pre[0] : 'apt-get';
    const lead = pre.length ? [...pre.slice(1), 'apt-get'] : [];
    run(cmd, [...lead, 'update', '-qq'], { env });
    run(cmd, [...lead, 'install', '-y', '-qq', '--no-install-recommends', ...needed], { env });
  }
}

// 3. compile, and 4. build the page (web/ → dist/web) — skipped when nothing changed since the last
// build: a stamp written after it is newer than every source file and build setting.
function newest(p) {
  let st;
  try {
    st = statSync(p);
  } catch {
    return -1;
  }
  if (!st.isDirectory()) return st.mtimeMs;
  let m = st.mtimeMs;
  for (const e of readdirSync(p)) if (e !== 'node_modules' && e !== 'dist') m = Math.max(m, newest(join(p, e)));
  return m;
}
const buildStamp = join(root, 'dist', '.build-stamp');
const sources = ['daemon', 'protocols', 'test', 'web', 'tsconfig.json', 'package.json', 'package-lock.json'].map((p) => newest(join(root, p)));
if (mtime(buildStamp) > Math.max(...sources)) {
  console.error('plumbline setup: the build is up to date');
} else {
  console.error('plumbline setup: compiling the daemon and the page (a few seconds the first time) ...');
  run(process.execPath, [join(root, 'node_modules', 'typescript', 'bin', 'tsc'), '-p', 'tsconfig.json']);
  run(process.execPath, [join(root, 'web', 'build.mjs')]);
  writeFileSync(buildStamp, `${new Date().toISOString()}\n`);
}
