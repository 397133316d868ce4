/**
 * SCPI / IEEE 488.2 numeric data: NR1 (integer), NR2 (explicit point), NR3 (exponent). The SCPI
 * special values come back as 9.91E37 (not a number) and ±9.9E37 (infinity / overflow); they are
 * turned into flagged non-readings, never into numbers that could enter a fit.
 */
export type NumberFlag = 'ok' | 'nan' | 'overflow' | 'malformed';

export interface ScpiNumber {
  readonly value: number;
  readonly flag: NumberFlag;
}

const NRF = /^[+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?$/;

/** Parses one NR1/NR2/NR3 field (surrounding whitespace allowed). Never throws. */
export function parseScpiNumber(field: string): ScpiNumber {
  const t = field.trim();
  if (t.length === 0 || t.length > 64 || !NRF.test(t)) return { value: Number.NaN, flag: 'malformed' };
  const v = Number(t);
  if (Math.abs(v - 9.91e37) < 1e35) return { value: Number.NaN, flag: 'nan' };
  if (Math.abs(v) >= 9.8e37 || !Number.isFinite(v)) return { value: v > 0 ? Infinity : -Infinity, flag: 'overflow' };
  return { value: v, flag: 'ok' };
}

/** Formats a number for the wire: NR3 with 10 significant digits; refuses non-finite values. */
export function formatScpiNumber(v: number): string {
  if (!Number.isFinite(v)) throw new RangeError(`cannot send ${v} to an instrument`);
  return v.toExponential(9).toUpperCase();
}
