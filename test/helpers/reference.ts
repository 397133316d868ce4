/**
 * Access to the shared reference data (NIST StRD) at ../shared/reference-data, read at test time
 * and never copied into the project. Where the folder is absent (a user's fresh clone) the suites
 * that need it say so in one line and skip.
 */
import { expect } from 'vitest';
import { existsSync, readFileSync } from 'node:fs';
import { dirname, join } from 'node:path';
import { fileURLToPath } from 'node:url';

export const PROJECT_ROOT = join(dirname(fileURLToPath(import.meta.url)), '..', '..');
export const STRD_DIR = join(PROJECT_ROOT, '..', 'shared', 'reference-data', 'strd');
export const HAVE_STRD = existsSync(join(STRD_DIR, 'index.json'));
if (!HAVE_STRD) console.warn(`NIST StRD reference data not found at ${STRD_DIR}: the certified-value checks are skipped`);

export interface StrdParam {
  value: number;
  sd: number;
  valueText: string;
  sdText: string;
}
export interface StrdSet {
  name: string;
  x: number[];
  y: number[];
  xText: string[];
  yText: string[];
  certified: {
    params: Record<string, StrdParam>;
    residualSD: number;
    rSquared: number;
    residualSumOfSquares: number;
  };
  start1?: Record<string, number>;
  start2?: Record<string, number>;
  modelExpression: string;
  parameterNames: string[];
}

export function loadStrd(name: string): StrdSet {
  return JSON.parse(readFileSync(join(STRD_DIR, `${name}.json`), 'utf8')) as StrdSet;
}

/** Log relative error: the number of significant digits on which `computed` agrees with `ref`. */
export function lre(computed: number, ref: number): number {
  if (computed === ref) return 16;
  return -Math.log10(Math.abs(computed - ref) / Math.abs(ref));
}

/** Relative closeness with a stated tolerance; the one comparison helper the numerics tests use. */
/** Asserts |computed − ref| ≤ relTol·|ref|; a failure prints both numbers and the relative gap. */
export function expectRelClose(computed: number, ref: number, relTol: number): void {
  const gap = Math.abs(computed - ref) / Math.abs(ref);
  expect(gap, `${computed} against ${ref}: relative gap ${gap.toExponential(2)} > ${relTol}`).toBeLessThanOrEqual(relTol);
}
