/**
 * Byte-level number reading for CSV tables: a decimal field read straight from the file's bytes,
 * without making a string of it. The syntax is exactly the strict one of `parseNumberField`
 * (`[+-]digits[.digits][e[+-]digits]`, or `.digits`, surrounding blanks trimmed by the caller) and
 * the value is the correctly rounded double, as `Number()` gives it.
 *
 * Up to 19 significant digits the value is computed here: exactly when the digits fit in 53 bits and
 * the power of ten is exact (Clinger 1990, "How to read floating point numbers accurately", the fast
 * path), otherwise as a double-double product (Dekker 1971) whose rounding is accepted only when
 * the product sits clearly away from a rounding boundary. Everything else (more digits, an exponent
 * near the ends of the double range, a value exactly halfway between two doubles) goes to `Number()`.
 */

/** 10^k, exact in a double for 0 ≤ k ≤ 22. */
const EXACT_POW10 = Float64Array.from({ length: 23 }, (_, k) => 10 ** k);
const MAX_SAFE = 9007199254740991; // 2^53 − 1
/** 2^27 + 1: Dekker's splitting constant for 53-bit doubles. */
const SPLIT = 134217729;
/** Powers of ten as double-doubles, filled on first use: 10^q ≈ POW_HI[q + BIAS] + POW_LO[q + BIAS]. */
const BIAS = 290;
const POW_HI = new Float64Array(2 * BIAS + 1).fill(Number.NaN);
const POW_LO = new Float64Array(2 * BIAS + 1);
const RELATIVE_MARGIN = 2 ** -88;

const ZERO = 48;
const NINE = 57;
const PLUS = 43;
const MINUS = 45;
const DOT = 46;
const LOWER_E = 101;
const UPPER_E = 69;

/** Space, tab, CR, vertical tab, form feed: the ASCII blanks String.prototype.trim removes. */
export function isAsciiBlank(c: number): boolean {
  return c === 32 || (c >= 9 && c <= 13);
}

/** Exact 2^e for −1022 ≤ e ≤ 1023, built from its bits. */
const bits = new DataView(new ArrayBuffer(8));
function pow2(e: number): number {
  bits.setUint32(0, (e + 1023) << 20);
  bits.setUint32(4, 0);
  return bits.getFloat64(0);
}

/** 10^q (|q| ≤ 290) as a double-double, accurate to about 2^-106 (from BigInt arithmetic). */
function pow10(q: number): void {
  const i = q + BIAS;
  if (q >= 0) {
    const p = 10n ** BigInt(q);
    const hi = Number(p);
    POW_HI[i] = hi;
    POW_LO[i] = Number(p - BigInt(hi));
    return;
  }
  // 10^q = 2^-K · (2^K / 10^-q), the quotient carried to about 110 bits.
  const d = 10n ** BigInt(-q);
  const shift = d.toString(2).length + 110;
  const s = (1n << BigInt(shift)) / d;
  const hi = Number(s);
  const lo = Number(s - BigInt(hi));
  // Scale by 2^-shift in two exact steps (each factor and each product stays a normal double).
  const a = pow2(-(shift - 600));
  const b = pow2(-600);
  POW_HI[i] = hi * a * b;
  POW_LO[i] = lo * a * b;
}

function fallback(bytes: Uint8Array, start: number, end: number): number {
  let s = '';
  for (let i = start; i < end; i++) s += String.fromCharCode(bytes[i]);
  return Number(s);
}

/** Where the last scan stopped, and (for `scanInto`) the value it read. */
export interface ScanCursor {
  end: number;
  value: number;
}

const cursor: ScanCursor = { end: 0, value: 0 };

/**
 * The number written in bytes[start, end) (already trimmed of blanks), or NaN when the field is
 * not a plain decimal number.
 */
export function parseDecimal(bytes: Uint8Array, start: number, end: number): number {
  const v = scanDecimal(bytes, start, end, cursor);
  return cursor.end === end ? v : Number.NaN;
}

/**
 * Reads the longest decimal number at bytes[start…limit) and sets `at.end` just past it: the value,
 * or NaN when there is none (no digit, or an exponent marker without digits; `at.end` then says
 * where the reading stopped, which the caller treats as text).
 */
export function scanDecimal(bytes: Uint8Array, start: number, limit: number, at: ScanCursor): number {
  scanInto(bytes, start, limit, at);
  return at.value;
}

/**
 * As scanDecimal, the value left in `at.value` (a double field updated in place: a number returned
 * from a call that is not inlined is a new heap object, one per field of a million-row file).
 */
export function scanInto(bytes: Uint8Array, start: number, limit: number, at: ScanCursor): void {
  let i = start;
  let negative = false;
  let c = i < limit ? bytes[i] : -1;
  if (c === PLUS || c === MINUS) {
    negative = c === MINUS;
    c = ++i < limit ? bytes[i] : -1;
  }
  // Significant digits: the first 15 in `head`, up to 4 more in `tail` (`tailDigits` of them).
  // Leading zeros are digits but not significant; after the first other digit every one is.
  let head = 0;
  let tail = 0;
  let tailDigits = 0;
  let significant = 0;
  let digits = 0;
  let exponent = 0;
  while (c === ZERO) {
    digits++;
    c = ++i < limit ? bytes[i] : -1;
  }
  while (c >= ZERO && c <= NINE) {
    if (significant < 15) head = head * 10 + (c - ZERO);
    else if (significant < 19) {
      tail = tail * 10 + (c - ZERO);
      tailDigits++;
    }
    significant++;
    digits++;
    c = ++i < limit ? bytes[i] : -1;
  }
  if (c === DOT) {
    c = ++i < limit ? bytes[i] : -1;
    if (significant === 0) {
      while (c === ZERO) {
        exponent--;
        digits++;
        c = ++i < limit ? bytes[i] : -1;
      }
    }
    while (c >= ZERO && c <= NINE) {
      if (significant < 15) head = head * 10 + (c - ZERO);
      else if (significant < 19) {
        tail = tail * 10 + (c - ZERO);
        tailDigits++;
      }
      significant++;
      exponent--;
      digits++;
      c = ++i < limit ? bytes[i] : -1;
    }
  }
  if (digits === 0) {
    at.end = i;
    at.value = Number.NaN;
    return;
  }
  if (c === LOWER_E || c === UPPER_E) {
    c = ++i < limit ? bytes[i] : -1;
    let expNegative = false;
    if (c === PLUS || c === MINUS) {
      expNegative = c === MINUS;
      c = ++i < limit ? bytes[i] : -1;
    }
    let e = 0;
    let expDigits = 0;
    while (c >= ZERO && c <= NINE) {
      if (e < 100000) e = e * 10 + (c - ZERO);
      expDigits++;
      c = ++i < limit ? bytes[i] : -1;
    }
    at.end = i;
    if (expDigits === 0) {
      at.value = Number.NaN;
      return;
    }
    exponent += expNegative ? -e : e;
  }
  at.end = i;
  if (significant === 0) {
    at.value = negative ? -0 : 0;
    return;
  }
  // value = (the significant digits as an integer) · 10^exponent
  const v = significant > 19 ? Number.NaN : value(head, tail, tailDigits, exponent);
  at.value = Number.isNaN(v) ? fallback(bytes, start, i) : negative ? -v : v;
}

/** head · 10^tailDigits + tail, times 10^q, correctly rounded; NaN when it cannot be decided here. */
function value(head: number, tail: number, tailDigits: number, q: number): number {
  let wh = head;
  let wl = 0;
  if (tailDigits > 0) {
    const scale = EXACT_POW10[tailDigits];
    const w = head * scale + tail;
    if (w <= MAX_SAFE) wh = w;
    else {
      // head · scale + tail exactly, as a double-double.
      const p = head * scale;
      const pe = twoProductError(head, scale, p);
      const s = p + tail;
      const se = tail - (s - p); // exact: |p| ≥ |tail|
      const l = se + pe; // both small integers: exact
      wh = s + l;
      wl = l - (wh - s);
    }
  }
  // Clinger's fast path: an exact integer times an exact power of ten, rounded once.
  if (wl === 0 && wh <= MAX_SAFE && q >= -22 && q <= 22) {
    return q >= 0 ? wh * EXACT_POW10[q] : wh / EXACT_POW10[-q];
  }
  if (q < -BIAS + 20 || q > BIAS - 20) return Number.NaN;
  const k = q + BIAS;
  if (Number.isNaN(POW_HI[k])) pow10(q);
  const ph = POW_HI[k];
  const pl = POW_LO[k];
  const h = wh * ph;
  const l = twoProductError(wh, ph, h) + (wh * pl + wl * ph);
  const r = h + l;
  // Accept r only if every value within a relative 2^-88 of h + l (far more than the error of
  // the double-double product) rounds to it; a value at or near a halfway point goes to Number().
  const margin = Math.abs(h) * RELATIVE_MARGIN;
  if (h + (l + margin) !== h + (l - margin) || !Number.isFinite(r) || Math.abs(r) < 1e-290) return Number.NaN;
  return r;
}

/** The rounding error of p = fl(a·b), exactly (Dekker's product without a fused multiply-add). */
function twoProductError(a: number, b: number, p: number): number {
  let t = SPLIT * a;
  const ah = t - (t - a);
  const al = a - ah;
  t = SPLIT * b;
  const bh = t - (t - b);
  const bl = b - bh;
  return ah * bh - p + ah * bl + al * bh + al * bl;
}
