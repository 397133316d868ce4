/**
 * Keeps daemon/analysis pure maths (project convention, DEVELOPERS.md): no Node built-ins, no
 * network, file or DOM modules, no runtime mathjs import (the custom model receives it injected).
 */
import { readdirSync, readFileSync, statSync } from 'node:fs';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { PROJECT_ROOT } from '../helpers/reference.js';

function files(dir: string): string[] {
  return readdirSync(dir).flatMap((f) => {
    const p = join(dir, f);
    return statSync(p).isDirectory() ? files(p) : p.endsWith('.ts') ? [p] : [];
  });
}

describe('daemon/analysis imports nothing with I/O', () => {
  const all = files(join(PROJECT_ROOT, 'daemon', 'analysis'));
  it('has files to check', () => expect(all.length).toBeGreaterThan(10));
  for (const f of all) {
    it(f.slice(PROJECT_ROOT.length + 1), () => {
      const imports = [...readFileSync(f, 'utf8').matchAll(/^import\s+(type\s+)?[^'"]*from\s+'([^']+)'/gm)];
      for (const m of imports) {
        const typeOnly = Boolean(m[1]);
        const spec = m[2];
        const allowed = spec.startsWith('.') || (typeOnly && spec === 'mathjs');
        expect(allowed, `${spec} imported in ${f}`).toBe(true);
      }
    });
  }
});
