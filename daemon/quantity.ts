/**
 * Quantities typed by people ("8 nm", "1e-4 cm^2", "300 K", "25 degC") returned as SI numbers. A
 * bare number is taken as SI. The units of the trade are read by our own small reader
 * (unit-parser.ts, mathjs's grammar and arithmetic); anything else goes to mathjs units, with the
 * same results. The error names the setting and the kind of quantity expected.
 */
import { createRequire } from 'node:module';
import type { Unit } from 'mathjs';
import { type ParsedQuantity, readQuantity, sameDimensions, valueIn } from './unit-parser.js';

// mathjs takes most of a second to load; only quantities written with units need it.
const lazyRequire = createRequire(import.meta.url);
function unit(text: string): Unit {
  return (lazyRequire('mathjs') as typeof import('mathjs')).unit(text);
}

export type QuantityKind = 'length' | 'area' | 'temperature' | 'voltage' | 'current' | 'irradiance' | 'richardson' | 'number';

const REFERENCE: Record<Exclude<QuantityKind, 'number'>, { si: string; example: string }> = {
  length: { si: 'm', example: '8 nm' },
  area: { si: 'm^2', example: '1e-4 cm^2' },
  temperature: { si: 'K', example: '300 K' },
  voltage: { si: 'V', example: '0.5 V' },
  current: { si: 'A', example: '1 mA' },
  irradiance: { si: 'W/m^2', example: '1000 W/m^2' },
  richardson: { si: 'A/(m^2 K^2)', example: '120 A/(cm^2 K^2)' },
};

export class QuantityError extends Error {
  readonly code = 'BAD_QUANTITY';
  constructor(
    readonly setting: string,
    message: string,
  ) {
    super(message);
    this.name = 'QuantityError';
  }
}

const BARE = /^[+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?$/;

const targets = new Map<string, ParsedQuantity>();
function target(si: string): ParsedQuantity {
  let q = targets.get(si);
  if (q === undefined) targets.set(si, (q = readQuantity(`1 ${si}`)!));
  return q;
}

/** "25 C" reads as 25 coulomb: say how to write degrees Celsius. */
function celsiusHint(kind: QuantityKind, t: string): string {
  if (kind !== 'temperature' || !/^[+-]?[\d.]+(?:e[+-]?\d+)?\s*°?\s*C$/i.test(t)) return '';
  return `; ${t.includes('°') ? '' : 'C is the coulomb — '}for degrees Celsius write "${t.replace(/\s*°?\s*C$/i, '')} degC"`;
}

export function parseQuantity(text: string, kind: QuantityKind, setting: string): number {
  const t = text.trim();
  if (BARE.test(t)) return Number(t);
  if (kind === 'number') throw new QuantityError(setting, `${setting} '${text}': expected a plain number`);
  const ref = REFERENCE[kind];
  const own = readQuantity(t);
  if (own !== undefined) {
    const si = target(ref.si);
    if (!sameDimensions(own.dims, si.dims))
      throw new QuantityError(
        setting,
        `${setting} '${text}': expected ${/^[aeiou]/.test(kind) ? 'an' : 'a'} ${kind} (e.g. "${ref.example}")${celsiusHint(kind, t)}`,
      );
    const v = valueIn(own, si);
    if (!Number.isFinite(v)) throw new QuantityError(setting, `${setting} '${text}': not a finite value`);
    return v;
  }
  let u: Unit;
  try {
    u = unit(t);
  } catch (e) {
    throw new QuantityError(
      setting,
      `${setting} '${text}': not a quantity mathjs understands (${(e as Error).message}); e.g. "${ref.example}"${celsiusHint(kind, t)}`,
    );
  }
  if (!u.equalBase(unit(`1 ${ref.si}`))) {
    throw new QuantityError(
      setting,
      `${setting} '${text}': expected ${/^[aeiou]/.test(kind) ? 'an' : 'a'} ${kind} (e.g. "${ref.example}")${celsiusHint(kind, t)}`,
    );
  }
  const v = u.toNumber(ref.si);
  if (!Number.isFinite(v)) throw new QuantityError(setting, `${setting} '${text}': not a finite value`);
  return v;
}
