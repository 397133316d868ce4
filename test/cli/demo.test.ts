/** `plumbline demo`: one simulated sweep, its progress lines in plain numbers. */
import { describe, expect, it } from 'vitest';
import { runCli } from '../helpers/cli.js';

describe('demo', () => {
  it('prints the sweep with no negative zero (the first level, 0 V, reads back just below zero)', () => {
    const r = runCli(['demo']);
    expect(r.code).toBe(0);
    expect(r.stdout).toMatch(/point {3}1\/91 {2}V = 0\.000 V/);
    // A value rounded to zero carries no sign (common practice in instrument read-outs).
    expect(r.stdout).not.toMatch(/(^|[^\d.e])-0(\.0+)?(?![\d.])/m);
  });
});
