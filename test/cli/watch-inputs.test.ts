/**
 * `plumbline watch` takes the device's inputs for the live fit from its options and says which it
 * used and where each came from; the journal's session records them. Readings: ten lines of a
 * straight I–V (no physics needed for the inputs check).
 */
import { readdirSync, readFileSync } from 'node:fs';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { runCli } from '../helpers/cli.js';
import { tempDir } from '../helpers/daemon.js';

describe("watch with the device's inputs", () => {
  it('uses --thickness, --area and --temperature and says so', () => {
    const data = join(tempDir(), 'data');
    const csv = `V,I\n${Array.from({ length: 10 }, (_x, k) => `${k * 0.1},${k * 1e-9}`).join('\n')}\n`;
    const r = runCli(
      ['watch', '-', '--no-page', '--model', 'poole-frenkel', '--thickness', '20 nm', '--area', '1e-4 cm^2', '--temperature', '350 K', '--data', data],
      csv,
    );
    expect(r.code, r.stderr).toBe(0);
    const out = r.stdout + r.stderr;
    expect(out).toMatch(/analysis: poole-frenkel; inputs thickness 20 nm, area 1e-4 cm², temperature 350 K from the options/);
    const session = readdirSync(data)[0];
    const first = JSON.parse(readFileSync(join(data, session, 'journal.jsonl'), 'utf8').split('\n')[0]);
    expect(first.analysis.inputs).toMatchObject({ thickness: 2e-8, area: 1e-8, temperature: 350 });
  });
});
