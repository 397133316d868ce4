/**
 * `plumbline watch` takes the device's inputs for the live fit from its options and says which it
 * used and where each came from; the journal's session records them. Without --config it borrows
 * nothing of the default station config's demo device, and a model that needs an input nobody gave
 * stops it (exit 2), as `fit` does. Readings: ten lines of a
 * straight I–V (no physics needed for the inputs check).
 */
import { readdirSync, readFileSync } from 'node:fs';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { runCli } from '../helpers/cli.js';
import { tempDir, writeConfig } from '../helpers/daemon.js';

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

  it("without --config, borrows nothing of the demo scenario's device (7 nm, 1e-4 cm², m*/m0 0.42)", () => {
    const data = join(tempDir(), 'data');
    const csv = `V,I\n${Array.from({ length: 10 }, (_x, k) => `${k * 0.1},${k * 1e-9}`).join('\n')}\n`;
    const r = runCli(['watch', '-', '--no-page', '--data', data], csv);
    expect(r.code, r.stderr).toBe(0);
    const out = r.stdout + r.stderr;
    expect(out).toMatch(/analysis: ohmic \(the default; choose one with --model\); inputs none from the options/);
    expect(out).not.toMatch(/default station config|7 nm/);
    const first = JSON.parse(readFileSync(join(data, readdirSync(data)[0], 'journal.jsonl'), 'utf8').split('\n')[0]);
    expect(first.analysis.model).toBe('ohmic');
    expect(first.analysis.inputs).toEqual({});
  });

  it('a model that needs an input nobody gave stops with exit 2, as fit does', () => {
    const data = join(tempDir(), 'data');
    const r = runCli(['watch', '-', '--no-page', '--model', 'fowler-nordheim', '--area', '1e-4 cm^2', '--data', data], 'V,I\n1,1e-12\n');
    expect(r.code).toBe(2);
    expect(r.stderr).toMatch(/model 'fowler-nordheim' needs the film thickness \(--thickness/);
  });

  it("a config the user names gives its analysis's model and inputs; the options go over them", () => {
    const dir = tempDir();
    const data = join(dir, 'data');
    const config = writeConfig(dir, {
      instrument: { kind: 'simulator', scenario: 'oxide-fn-trapping' },
      analysis: { model: 'poole-frenkel', inputs: { thickness: 2e-8, area: 1e-8 } },
    });
    const csv = `V,I\n${Array.from({ length: 10 }, (_x, k) => `${k * 0.1},${k * 1e-9}`).join('\n')}\n`;
    const r = runCli(['watch', '-', '--no-page', '--config', config, '--thickness', '30 nm', '--data', data], csv);
    expect(r.code, r.stderr).toBe(0);
    expect(r.stdout + r.stderr).toContain(`analysis: poole-frenkel (from ${config}); inputs thickness 30 nm from the options, area 1e-4 cm² from ${config}`);
    const first = JSON.parse(readFileSync(join(data, readdirSync(data)[0], 'journal.jsonl'), 'utf8').split('\n')[0]);
    expect(Object.keys(first.analysis.inputs).sort()).toEqual(['area', 'thickness']);
    expect(first.analysis.inputs.thickness).toBeCloseTo(3e-8, 20);
    expect(first.analysis.inputs.area).toBe(1e-8);
  });
});
