/**
 * Quantities with units read without mathjs must come out exactly as mathjs reads them (mathjs
 * units are the reference: Unit.parse, equalBase and toNumber, the path used before our own reader
 * existed), errors included; and the common forms must not load mathjs at all.
 */
import { spawnSync } from 'node:child_process';
import { join } from 'node:path';
import fc from 'fast-check';
import { unit } from 'mathjs';
import { describe, expect, it } from 'vitest';
import { parseQuantity, type QuantityKind } from '../../daemon/quantity.js';
import { readQuantity } from '../../daemon/unit-parser.js';
import { PROJECT_ROOT } from '../helpers/reference.js';

const SI: Record<Exclude<QuantityKind, 'number'>, { si: string; example: string }> = {
  length: { si: 'm', example: '8 nm' },
  area: { si: 'm^2', example: '1e-4 cm^2' },
  temperature: { si: 'K', example: '300 K' },
  voltage: { si: 'V', example: '0.5 V' },
  current: { si: 'A', example: '1 mA' },
  irradiance: { si: 'W/m^2', example: '1000 W/m^2' },
  richardson: { si: 'A/(m^2 K^2)', example: '120 A/(cm^2 K^2)' },
};
const KINDS = Object.keys(SI) as Exclude<QuantityKind, 'number'>[];

/** What mathjs alone makes of the text (value, or the error message the setting gets). */
function byMathjs(text: string, kind: Exclude<QuantityKind, 'number'>): number | string {
  const t = text.trim();
  const ref = SI[kind];
  let u: ReturnType<typeof unit>;
  try {
    u = unit(t);
  } catch (e) {
    return `--q '${text}': not a quantity mathjs understands (${(e as Error).message}); e.g. "${ref.example}"`;
  }
  if (!u.equalBase(unit(`1 ${ref.si}`))) return `--q '${text}': expected ${/^[aeiou]/.test(kind) ? 'an' : 'a'} ${kind} (e.g. "${ref.example}")`;
  const v = u.toNumber(ref.si);
  return Number.isFinite(v) ? v : `--q '${text}': not a finite value`;
}

function ours(text: string, kind: Exclude<QuantityKind, 'number'>): number | string {
  try {
    return parseQuantity(text, kind, '--q');
  } catch (e) {
    return (e as Error).message;
  }
}

const PREFIXES = ['', 'da', 'h', 'k', 'M', 'G', 'T', 'P', 'E', 'd', 'c', 'm', 'u', 'n', 'p', 'f', 'a'];
const UNITS = ['m', 'V', 'A', 'K', 'eV', 'W'];

describe('quantities with units: our reader against mathjs units', () => {
  it('every unit with every prefix it takes, in every kind: the same value to the last bit, or the same error', () => {
    let read = 0;
    for (const u of [...UNITS.flatMap((b) => PREFIXES.map((p) => p + b)), 'degC']) {
      for (const text of [`1 ${u}`, `8.25${u}`, `-0.5 ${u}`, `3e-7 ${u}^2`, `12 ${u}^-1`]) {
        if (readQuantity(text) !== undefined) read++;
        for (const kind of KINDS) expect(ours(text, kind), `${text} as ${kind}`).toBe(byMathjs(text, kind));
      }
    }
    expect(read).toBe((UNITS.length * PREFIXES.length + 1) * 5); // all read by our own reader
    // Offsets apply only to a single underived temperature unit (mathjs Unit.to).
    for (const [text, kind] of [
      ['5 degC A/(m^2 degC^3)', 'richardson'],
      ['5 degC^1', 'temperature'],
      ['-273.15 degC', 'temperature'],
      ['2 K degC/K', 'temperature'],
    ] as const) {
      expect(readQuantity(text), text).toBeDefined();
      expect(ours(text, kind), text).toBe(byMathjs(text, kind));
    }
  });

  const token = fc.constantFrom(
    'm',
    'cm',
    'nm',
    'um',
    'mm',
    'km',
    'V',
    'mV',
    'kV',
    'A',
    'mA',
    'uA',
    'nA',
    'pA',
    'K',
    'mK',
    'degC',
    'eV',
    'meV',
    'W',
    'mW',
    'kg',
    's',
    'Hz',
    'inch',
    'degF',
    'ohm',
    'in',
  );
  const term = fc.tuple(token, fc.constantFrom('', '^2', '^-2', '^ 2', '^3', '^0.5', '^-1')).map(([t, p]) => t + p);
  const joiner = fc.constantFrom(' ', '*', '/', ' / ', ' * ', '');
  const expr = fc
    .array(fc.tuple(joiner, term, fc.boolean()), { minLength: 1, maxLength: 4 })
    .map((parts) => parts.map(([j, t, paren], k) => (k === 0 ? '' : j) + (paren ? `(${t})` : t)).join(''));
  const value = fc.oneof(
    fc.double({ noNaN: true, noDefaultInfinity: true }).map(String),
    fc.integer({ min: -1000, max: 1000 }).map(String),
    fc.constantFrom('1e999', '+5', '.5', '5.', '-.25', '7e', '1E3', ''),
  );

  it('random unit expressions (our units, others, parentheses, powers, odd numbers): the same result as mathjs', () => {
    fc.assert(
      fc.property(value, fc.constantFrom('', ' ', '  ', '\t'), expr, fc.constantFrom(...KINDS), (v, gap, e, kind) => {
        const text = `${v}${gap}${e}`;
        expect(ours(text, kind), text).toBe(byMathjs(text, kind));
      }),
      { numRuns: 4000 },
    );
  });

  it('the forms in the README and the usual ones are read without mathjs', () => {
    for (const text of [
      '8 nm',
      '20nm',
      '1e-4 cm^2',
      '1e-8 m^2',
      '300 K',
      '25 degC',
      '-0.9 V',
      '1 mA',
      '1e-12 A',
      '1000 W/m^2',
      '112 A/(cm^2 K^2)',
      '120 A/(m^2 K^2)',
      '3.1 eV',
    ]) {
      expect(readQuantity(text), text).toBeDefined();
    }
    const script = [
      `import { createRequire } from 'node:module';`,
      `const { parseQuantity } = await import(${JSON.stringify(join(PROJECT_ROOT, 'dist', 'daemon', 'quantity.js'))});`,
      `const v = [parseQuantity('8 nm', 'length', '--thickness'), parseQuantity('1e-4 cm^2', 'area', '--area'), parseQuantity('25 degC', 'temperature', '--temperature')];`,
      `const loaded = Object.keys(createRequire(import.meta.url).cache).some((k) => k.includes('mathjs'));`,
      `console.log(JSON.stringify({ v, loaded }));`,
      `parseQuantity('3 inch', 'length', '--thickness');`,
      `console.log(JSON.stringify({ later: Object.keys(createRequire(import.meta.url).cache).some((k) => k.includes('mathjs')) }));`,
    ].join('\n');
    const r = spawnSync(process.execPath, ['--input-type=module', '-e', script], { encoding: 'utf8', cwd: PROJECT_ROOT });
    const [first, second] = r.stdout
      .trim()
      .split('\n')
      .map((l) => JSON.parse(l));
    expect(first).toEqual({ v: [8e-9, byMathjs('1e-4 cm^2', 'area'), 298.15], loaded: false });
    expect(second).toEqual({ later: true }); // inches: mathjs is asked
  });
});
