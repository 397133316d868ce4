/**
 * The package as a user receives it: a fresh clone of this repository (its committed state), packed
 * with `npm pack` (whose prepack step installs and builds), installed into an empty folder from the
 * tarball, and the installed `plumbline` command run there. The tarball holds the built code, the
 * page, the configs and the documents — no tests, no source maps, no build caches.
 */
import { spawnSync } from 'node:child_process';
import { existsSync, mkdirSync, readFileSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { PROJECT_ROOT } from '../helpers/reference.js';
import { tempDir } from '../helpers/daemon.js';

function sh(cmd: string, args: string[], cwd: string, timeout = 240_000) {
  const r = spawnSync(cmd, args, { cwd, encoding: 'utf8', timeout, env: { ...process.env, npm_config_audit: 'false', npm_config_fund: 'false' } });
  return { code: r.status ?? -1, out: `${r.stdout ?? ''}${r.stderr ?? ''}` };
}

describe('npm pack of a fresh clone', () => {
  it('installs a working plumbline command: --version from package.json, fit on a CSV', () => {
    const tmp = tempDir('plumbline-pack-');
    const clone = join(tmp, 'clone');
    const c = sh('git', ['clone', '--quiet', '--depth', '1', `file://${PROJECT_ROOT}`, clone], tmp);
    expect(c.code, c.out).toBe(0);
    const pack = sh('npm', ['pack', '--pack-destination', tmp], clone);
    expect(pack.code, pack.out).toBe(0);
    const version = (JSON.parse(readFileSync(join(PROJECT_ROOT, 'package.json'), 'utf8')) as { version: string }).version;
    const tgz = join(tmp, `plumbline-${version}.tgz`);
    expect(existsSync(tgz)).toBe(true);
    const list = sh('tar', ['tzf', tgz], tmp).out.split('\n').filter(Boolean);
    expect(list).toContain('package/dist/daemon/cli.js');
    expect(list).toContain('package/dist/web/index.html');
    expect(list).toContain('package/config/station.json');
    expect(list).toContain('package/LICENSE');
    expect(list.filter((f) => /\.map$|^package\/test\/|^package\/dist\/test\/|\.ci\/|tsbuildinfo/.test(f))).toEqual([]);
    const app = join(tmp, 'app');
    mkdirSync(app);
    writeFileSync(join(app, 'package.json'), JSON.stringify({ name: 'scratch', version: '1.0.0', private: true }));
    const inst = sh('npm', ['install', '--prefer-offline', '--no-audit', '--no-fund', tgz], app);
    expect(inst.code, inst.out).toBe(0);
    const bin = join(app, 'node_modules', '.bin', 'plumbline');
    const v = sh(bin, ['--version'], app);
    expect(v.code, v.out).toBe(0);
    expect(v.out.trim()).toBe(version);
    // An ohmic film of 1 GΩ (V/I = 1e9 Ω): the fit gives it back.
    writeFileSync(join(app, 'sweep.csv'), `V,I\n${[1, 2, 3, 4, 5, 6].map((x) => `${x},${x * 1e-9}`).join('\n')}\n`);
    const fit = sh(bin, ['fit', 'sweep.csv', '--model', 'ohmic', '--json'], app);
    expect(fit.code, fit.out).toBe(0);
    const r = JSON.parse(fit.out);
    expect(r.parameters.resistance.value).toBeCloseTo(1e9, -3);
  }, 300_000);
});
