/**
 * Messages a newcomer meets: a temperature typed as "25 C" (which reads as 25 coulomb) says how to
 * write degrees Celsius.
 */
import { describe, expect, it } from 'vitest';
import { runCli, tempFile } from '../helpers/cli.js';

describe('messages', () => {
  const file = tempFile(
    'iv.csv',
    `V,I\n${Array.from({ length: 12 }, (_x, k) => `${0.05 * (k + 1)},${1e-12 * Math.exp((0.05 * (k + 1)) / 0.03)}`).join('\n')}\n`,
  );
  for (const typed of ['25 C', '25 °C']) {
    it(`--temperature "${typed}" points to degC`, () => {
      const r = runCli(['fit', file, '--model', 'diode', '--temperature', typed]);
      expect(r.code).toBe(2);
      expect(r.stderr).toMatch(/--temperature .*for degrees Celsius write "25 degC"/);
    });
  }
});
