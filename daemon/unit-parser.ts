/**
 * A small reader for the quantities people type on the command line ("8 nm", "1e-4 cm^2",
 * "25 degC", "120 A/(cm^2 K^2)"), so that a command with units starts without loading mathjs
 * (most of a second). It knows the units of this trade (m, V, A, K, degC, eV, W with the SI prefixes
 * from atto to exa) and follows mathjs's unit grammar and arithmetic step for step — number, units
 * joined by blanks, `*` or `/`, `^` powers, parentheses; the value scaled unit by unit as
 * value · (unit · prefix)^power; an offset only for a single temperature unit — so that what it
 * reads comes out bit for bit as mathjs would give it. Whatever it does not know (another unit, a
 * prefix it lacks, a form it does not follow) it declines, and the caller asks mathjs.
 */

/** Exponents of mass, length, time, current, temperature, luminous intensity, amount, angle, bit. */
export type Dimensions = readonly number[];

interface UnitDef {
  readonly value: number;
  readonly offset: number;
  readonly dims: Dimensions;
  readonly prefixed: boolean;
}

// The values and offsets are mathjs's own (Unit.js), so the results agree to the last bit; a test
// checks every unit and prefix here against mathjs.
const UNITS: Record<string, UnitDef> = {
  m: { value: 1, offset: 0, dims: [0, 1, 0, 0, 0, 0, 0, 0, 0], prefixed: true },
  V: { value: 1, offset: 0, dims: [1, 2, -3, -1, 0, 0, 0, 0, 0], prefixed: true },
  A: { value: 1, offset: 0, dims: [0, 0, 0, 1, 0, 0, 0, 0, 0], prefixed: true },
  K: { value: 1, offset: 0, dims: [0, 0, 0, 0, 1, 0, 0, 0, 0], prefixed: true },
  degC: { value: 1, offset: 273.15, dims: [0, 0, 0, 0, 1, 0, 0, 0, 0], prefixed: false },
  eV: { value: 1.602176565e-19, offset: 0, dims: [1, 2, -2, 0, 0, 0, 0, 0, 0], prefixed: true },
  W: { value: 1, offset: 0, dims: [1, 2, -3, 0, 0, 0, 0, 0, 0], prefixed: true },
};

const PREFIXES: Record<string, number> = {
  da: 1e1,
  h: 1e2,
  k: 1e3,
  M: 1e6,
  G: 1e9,
  T: 1e12,
  P: 1e15,
  E: 1e18,
  d: 1e-1,
  c: 1e-2,
  m: 1e-3,
  u: 1e-6,
  n: 1e-9,
  p: 1e-12,
  f: 1e-15,
  a: 1e-18,
};

interface UnitTerm {
  readonly unit: UnitDef;
  readonly prefix: number;
  readonly power: number;
}

/** A quantity as mathjs holds it: the value in SI base units, and its units. */
export interface ParsedQuantity {
  readonly value: number;
  readonly dims: Dimensions;
  readonly terms: readonly UnitTerm[];
}

/** Prefix + unit for a unit word, or undefined when it is not one of ours. */
function findUnit(word: string): { unit: UnitDef; prefix: number } | undefined {
  if (Object.hasOwn(UNITS, word)) return { unit: UNITS[word], prefix: 1 };
  for (const name of Object.keys(UNITS)) {
    if (word.length > name.length && word.endsWith(name) && UNITS[name].prefixed) {
      const p = word.slice(0, word.length - name.length);
      if (Object.hasOwn(PREFIXES, p)) return { unit: UNITS[name], prefix: PREFIXES[p] };
    }
  }
  return undefined;
}

const NUMBER = /^-?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?/;
const WORD = /^[A-Za-z][A-Za-z0-9]*/;

/**
 * Reads "number units" (the text already trimmed); undefined when the text is not in the forms and
 * units this reader knows (then mathjs decides, and words its own error).
 */
export function readQuantity(text: string): ParsedQuantity | undefined {
  let s = text;
  const skip = () => {
    s = s.replace(/^[ \t]+/, '');
  };
  const num = (): string | undefined => {
    const m = NUMBER.exec(s[0] === '+' ? s.slice(1) : s);
    if (!m) return undefined;
    // An exponent marker must be followed by digits (mathjs reads "4e" as 4 and a unit "e").
    s = s.slice((s[0] === '+' ? 1 : 0) + m[0].length);
    return m[0];
  };
  skip();
  const valueText = num();
  if (valueText === undefined) return undefined;
  const value = Number.parseFloat(valueText);
  skip();
  let multiplier = 1;
  let expecting = false;
  if (s[0] === '*' || s[0] === '/') {
    multiplier = s[0] === '/' ? -1 : 1;
    expecting = true;
    s = s.slice(1);
  }
  const stack: number[] = [];
  let stackProduct = 1;
  const terms: UnitTerm[] = [];
  const dims = [0, 0, 0, 0, 0, 0, 0, 0, 0];
  for (;;) {
    skip();
    while (s[0] === '(') {
      stack.push(multiplier);
      stackProduct *= multiplier;
      multiplier = 1;
      s = s.slice(1);
      skip();
    }
    if (s === '') break;
    const w = WORD.exec(s);
    if (!w) return undefined;
    s = s.slice(w[0].length);
    const found = findUnit(w[0]);
    if (!found) return undefined;
    let power = multiplier * stackProduct;
    skip();
    if (s[0] === '^') {
      s = s.slice(1);
      skip();
      const p = num();
      if (p === undefined) return undefined;
      power *= Number(p);
    }
    terms.push({ unit: found.unit, prefix: found.prefix, power });
    for (let i = 0; i < dims.length; i++) dims[i] += found.unit.dims[i] * power;
    skip();
    while (s[0] === ')') {
      if (stack.length === 0) return undefined;
      stackProduct /= stack.pop()!;
      s = s.slice(1);
      skip();
    }
    expecting = false;
    multiplier = 1;
    if (s[0] === '*' || s[0] === '/') {
      multiplier = s[0] === '/' ? -1 : 1;
      expecting = true;
      s = s.slice(1);
    }
  }
  if (expecting || stack.length !== 0 || terms.length === 0) return undefined;
  let v = value;
  for (const t of terms) v *= (t.unit.value * t.prefix) ** t.power;
  return { value: v, dims, terms };
}

/** Same dimensions, to mathjs's tolerance (Unit.equalBase). */
export function sameDimensions(a: Dimensions, b: Dimensions): boolean {
  for (let i = 0; i < a.length; i++) if (Math.abs(a[i] - b[i]) > 1e-12) return false;
  return true;
}

function derived(q: ParsedQuantity): boolean {
  return q.terms.length > 1 || Math.abs(q.terms[0].power - 1) > 1e-15;
}

/**
 * The quantity's value in the target unit (mathjs's Unit.toNumber): an offset is applied only
 * between two single, underived units (degC → K), then the target's own scale divided out.
 */
export function valueIn(q: ParsedQuantity, target: ParsedQuantity): number {
  let v = q.value;
  const a = q.terms[0];
  const b = target.terms[0];
  if (!derived(q) && a.unit.offset !== b.unit.offset) v += a.unit.value * a.unit.offset - b.unit.value * b.unit.offset;
  for (const t of target.terms) v /= (t.unit.value * t.prefix) ** t.power;
  return v;
}
