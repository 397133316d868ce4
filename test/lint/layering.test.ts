/**
 * The layering rules in biome.jsonc catch what they are for. A scratch tree with the project's own
 * lint config holds files that break each rule — a static, a dynamic and a double-quoted import out
 * of daemon/analysis, a Node built-in there, the page importing the daemon's code or a protocols
 * module outside the contract, protocols importing the station's run and server — beside files that
 * keep them; the linter must name every breaking line and none of the others.
 */
import { spawnSync } from 'node:child_process';
import { copyFileSync, mkdirSync, writeFileSync } from 'node:fs';
import { dirname, join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { tempDir } from '../helpers/daemon.js';
import { PROJECT_ROOT } from '../helpers/reference.js';

const FILES: Record<string, string> = {
  'daemon/analysis/good.ts':
    "import { fitLine } from './line-fit.js';\nimport type { EvalFunction } from 'mathjs';\nexport const g = [fitLine] as unknown as EvalFunction[];\n",
  'daemon/analysis/bad-static.ts': "import { openTcp } from '../../protocols/transport.js';\nexport const a = openTcp;\n",
  'daemon/analysis/bad-dynamic.ts': 'export async function f() {\n  return import("node:fs");\n}\n',
  'daemon/analysis/bad-quoted.ts': 'import { GuardedSource } from "../run/guard.js";\nexport const b = GuardedSource;\n',
  'daemon/analysis/mechanisms/good.ts': "import { thing } from '../mechanism.js';\nexport const c = thing;\n",
  'daemon/analysis/mechanisms/bad.ts': "import { Station } from '../../run/station.js';\nexport const d = Station;\n",
  'web/src/good.ts': "import { FLAG } from '../../protocols/wire.js';\nexport const e = FLAG;\n",
  'web/src/bad-daemon.ts': "import { analyze } from '../../daemon/analysis/analyze.js';\nexport const h = analyze;\n",
  'web/src/bad-protocol.ts': "import { openTcp } from '../../protocols/transport.js';\nexport const k = openTcp;\n",
  'protocols/good.ts': "import { FLAG } from './wire.js';\nexport const m = FLAG;\n",
  'protocols/bad.ts':
    "import { startServer } from '../daemon/server/app.js';\nimport { RunController } from '../daemon/run/runner.js';\nexport const n = [startServer, RunController];\n",
};

describe('layering rules', () => {
  it('name every import that crosses a layer, and no other', () => {
    const dir = tempDir('plumbline-lint-');
    copyFileSync(join(PROJECT_ROOT, 'biome.jsonc'), join(dir, 'biome.jsonc'));
    for (const [f, text] of Object.entries(FILES)) {
      mkdirSync(dirname(join(dir, f)), { recursive: true });
      writeFileSync(join(dir, f), text);
    }
    const bin = join(PROJECT_ROOT, 'node_modules', '.bin', 'biome');
    const r = spawnSync(
      bin,
      ['lint', '--reporter=json', '--max-diagnostics=200', '--only=style/noRestrictedImports', '--only=correctness/noNodejsModules', '.'],
      { cwd: dir, encoding: 'utf8' },
    );
    const report = JSON.parse(r.stdout) as { diagnostics: { category: string; location: { path: string | { file: string } } }[] };
    const hits = report.diagnostics.map((d) => `${typeof d.location.path === 'string' ? d.location.path : d.location.path.file} ${d.category}`);
    const files = new Set(hits.map((h) => h.split(' ')[0].replace(/^\.\//, '')));
    expect([...files].sort()).toEqual([
      'daemon/analysis/bad-dynamic.ts',
      'daemon/analysis/bad-quoted.ts',
      'daemon/analysis/bad-static.ts',
      'daemon/analysis/mechanisms/bad.ts',
      'protocols/bad.ts',
      'web/src/bad-daemon.ts',
      'web/src/bad-protocol.ts',
    ]);
    // Both imports of protocols/bad.ts are named.
    expect(hits.filter((h) => h.startsWith('protocols/bad.ts'))).toHaveLength(2);
    expect(hits.some((h) => h.startsWith('daemon/analysis/bad-dynamic.ts') && h.endsWith('noNodejsModules'))).toBe(true);
  });
});
