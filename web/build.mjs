// Builds the page into dist/web: compiles web/src with tsc (plain ES modules, no bundler), copies
// index.html and style.css, and vendors uPlot (ESM build and stylesheet) from node_modules.
// Node built-ins only, so the fresh-clone setup can run it.
import { spawnSync } from 'node:child_process';
import { copyFileSync, mkdirSync } from 'node:fs';
import { dirname, join } from 'node:path';
import { fileURLToPath } from 'node:url';

const web = dirname(fileURLToPath(import.meta.url));
const root = join(web, '..');
const out = join(root, 'dist', 'web');
mkdirSync(join(out, 'vendor'), { recursive: true });
const r = spawnSync(process.execPath, [join(root, 'node_modules', 'typescript', 'bin', 'tsc'), '-p', join(web, 'tsconfig.json')], { stdio: 'inherit' });
if (r.status !== 0) process.exit(r.status ?? 1);
copyFileSync(join(web, 'index.html'), join(out, 'index.html'));
copyFileSync(join(web, 'style.css'), join(out, 'style.css'));
copyFileSync(join(root, 'node_modules', 'uplot', 'dist', 'uPlot.esm.js'), join(out, 'vendor', 'uPlot.esm.js'));
copyFileSync(join(root, 'node_modules', 'uplot', 'dist', 'uPlot.min.css'), join(out, 'vendor', 'uPlot.min.css'));
