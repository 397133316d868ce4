/**
 * The command line as a user runs it, whole processes side by side:
 * - `plumbline fit` on a 1e6-row CSV against pandas.read_csv + numpy.polyfit on the same file
 *   (Debian's python3; python3-numpy and python3-pandas are installed from Debian when missing),
 *   wall time and peak RSS of each process;
 * - start-up of `fit` on a small file with bare numbers, with the usual units, and with a unit
 *   only mathjs knows.
 */
import { spawnSync } from 'node:child_process';
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { seededNormal } from '../../daemon/analysis/random.js';
import { report } from './timing.js';

const CLI = fileURLToPath(new URL('../../daemon/cli.js', import.meta.url));
const PYTHON = '/usr/bin/python3';

/** numpy and pandas for Debian's python3: present, installed now (apt-get as root or with sudo -n), or a reason. */
export function ensurePandas(): string | undefined {
  const have = () => spawnSync(PYTHON, ['-c', 'import numpy, pandas'], { stdio: 'ignore' }).status === 0;
  if (have()) return undefined;
  const isRoot = process.getuid?.() === 0;
  const sudo = isRoot ? [] : spawnSync('sh', ['-c', 'command -v sudo'], { stdio: 'ignore' }).status === 0 ? ['sudo', '-n'] : null;
  if (sudo === null || spawnSync('sh', ['-c', 'command -v apt-get'], { stdio: 'ignore' }).status !== 0) {
    return 'needs python3-numpy and python3-pandas (Debian) for /usr/bin/python3; not root, no sudo or no apt-get to install them';
  }
  process.stdout.write('(installing python3-numpy and python3-pandas from Debian for the comparison ...)\n');
  const env = { ...process.env, DEBIAN_FRONTEND: 'noninteractive' };
  const apt = (args: string[]) => {
    const cmd = sudo.length ? [...sudo, 'apt-get', ...args] : ['apt-get', ...args];
    return spawnSync(cmd[0], cmd.slice(1), { stdio: ['ignore', 'ignore', 'inherit'], env }).status === 0;
  };
  if (!apt(['install', '-y', '-qq', '--no-install-recommends', 'python3-numpy', 'python3-pandas'])) {
    apt(['update', '-qq']);
    apt(['install', '-y', '-qq', '--no-install-recommends', 'python3-numpy', 'python3-pandas']);
  }
  return have() ? undefined : 'apt-get could not install python3-numpy and python3-pandas';
}

interface Run {
  seconds: number;
  maxRssMB: number;
  /** User + system CPU time of the process, s (steadier than wall time on a shared machine). */
  cpuSeconds: number;
  stdout: string;
}

/** Runs a process to its end: wall time, and peak RSS as the process itself reports it at exit. */
function timed(cmd: string, args: string[]): Run {
  const t0 = performance.now();
  const r = spawnSync(cmd, args, { encoding: 'utf8', maxBuffer: 1 << 26, timeout: 600_000 });
  const seconds = (performance.now() - t0) / 1000;
  if (r.status !== 0) throw new Error(`${cmd} ${args.join(' ')} exited ${r.status}: ${r.stderr}`);
  const m = /maxrss (\d+)/.exec(r.stderr);
  const c = /cpu (\d+)/.exec(r.stderr);
  return { seconds, maxRssMB: m ? Number(m[1]) / 1024 : Number.NaN, cpuSeconds: c ? Number(c[1]) / 1e6 : Number.NaN, stdout: r.stdout };
}

function median(xs: number[]): number {
  const s = [...xs].sort((a, b) => a - b);
  return s[s.length >> 1];
}

export function benchCli(): void {
  const dir = mkdtempSync(join(tmpdir(), 'plumbline-bench-cli-'));
  try {
    // An ohmic leakage sweep of 1e6 readings at full precision (shortest round-trip decimals, up
    // to 17 digits: the hard case for a number reader; an SMU's NR3 output has 7).
    const normal = seededNormal(7);
    const n = 1_000_000;
    const parts: string[] = ['voltage_V,current_A\n'];
    for (let k = 0; k < n; k++) {
      const v = 0.001 + (10 * k) / n;
      parts.push(`${v},${1e-9 * v * (1 + 0.01 * normal())}\n`);
    }
    const csv = join(dir, 'sweep-1e6.csv');
    writeFileSync(csv, parts.join(''));
    const preload = join(dir, 'maxrss.mjs');
    writeFileSync(
      preload,
      "process.on('exit', () => { const u = process.resourceUsage(); process.stderr.write('maxrss ' + u.maxRSS + '\\ncpu ' + (u.userCPUTime + u.systemCPUTime) + '\\n'); });\n",
    );
    const py = join(dir, 'polyfit.py');
    writeFileSync(
      py,
      [
        'import resource, sys',
        'import numpy as np, pandas as pd',
        'd = pd.read_csv(sys.argv[1])',
        'slope, intercept = np.polyfit(d.iloc[:, 0].to_numpy(), d.iloc[:, 1].to_numpy(), 1)',
        'print(repr(slope), repr(intercept))',
        'ru = resource.getrusage(resource.RUSAGE_SELF)',
        "print('maxrss', ru.ru_maxrss, file=sys.stderr)",
        "print('cpu', int((ru.ru_utime + ru.ru_stime) * 1e6), file=sys.stderr)",
      ].join('\n'),
    );

    const missing = ensurePandas();
    const ours: Run[] = [];
    const theirs: Run[] = [];
    for (let r = 0; r < 5; r++) {
      ours.push(timed(process.execPath, ['--import', preload, CLI, 'fit', csv, '--model', 'ohmic', '--json']));
      if (!missing) theirs.push(timed(PYTHON, [py, csv]));
    }
    const slope = JSON.parse(ours[0].stdout).line.slope as number;
    report(
      'plumbline fit, 1e6-row CSV (whole process, median of 5)',
      median(ours.map((r) => r.seconds)),
      `s; peak RSS ${median(ours.map((r) => r.maxRssMB)).toFixed(0)} MB; CPU ${median(ours.map((r) => r.cpuSeconds)).toFixed(2)} s`,
      'faster than pandas + numpy',
    );
    if (missing) process.stdout.write(`  pandas + numpy comparison skipped: ${missing}\n`);
    else {
      const theirSlope = Number(theirs[0].stdout.trim().split(/\s+/)[0]);
      report(
        'pandas.read_csv + numpy.polyfit, same file',
        median(theirs.map((r) => r.seconds)),
        `s; peak RSS ${median(theirs.map((r) => r.maxRssMB)).toFixed(0)} MB; CPU ${median(theirs.map((r) => r.cpuSeconds)).toFixed(2)} s`,
      );
      report(
        '  ratio plumbline / pandas (time)',
        median(ours.map((r) => r.seconds)) / median(theirs.map((r) => r.seconds)),
        `× (slopes agree to ${Math.abs(slope / theirSlope - 1).toExponential(1)})`,
        '< 1',
      );
    }

    const small = join(dir, 'small.csv');
    writeFileSync(small, 'V,I\n1,1.0e-9\n2,2.1e-9\n3,2.9e-9\n4,4.0e-9\n5,5.1e-9\n');
    const startup = (extra: string[]) => {
      const t: number[] = [];
      for (let r = 0; r < 7; r++) t.push(timed(process.execPath, [CLI, 'fit', small, '--model', 'ohmic', ...extra]).seconds);
      return median(t);
    };
    report('fit start-up, bare numbers (median of 7)', startup(['--area', '1e-8', '--thickness', '8e-9', '--temperature', '298.15']), 's');
    report('fit start-up, "1e-4 cm^2" "8 nm" "25 degC"', startup(['--area', '1e-4 cm^2', '--thickness', '8 nm', '--temperature', '25 degC']), 's', '≤ 0.2 s');
    report('fit start-up, a unit only mathjs knows ("3e-7 inch")', startup(['--area', '1e-4 cm^2', '--thickness', '3e-7 inch']), 's');
  } finally {
    rmSync(dir, { recursive: true, force: true });
  }
}
