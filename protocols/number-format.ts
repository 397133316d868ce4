/**
 * How numbers are written for people — the command line's text, the page and the offline report
 * all print through these functions, so one value reads the same everywhere. Files and JSON keep
 * full precision and never pass through here.
 *
 * Rules:
 *  - plain decimals for 1e-3 ≤ |x| < 1e5, otherwise an exponent ("1.23e-9");
 *  - a value with an uncertainty keeps two significant digits of the uncertainty and rounds the
 *    value to the same decimal place (the usual convention of the GUM, JCGM 100:2008 §7.2.6);
 *    in exponent form both share one exponent: "(1.235 ± 0.051)e-9";
 *  - axis ticks get the fewest digits that keep every label on an axis distinct.
 * No dependencies, no DOM and no Node APIs: the page imports this file as it is.
 */

const FIXED_LO = 1e-3;
const FIXED_HI = 1e5;

function finiteText(x: number): string {
  if (Number.isNaN(x)) return 'NaN';
  return x > 0 ? '∞' : '−∞';
}

/** Drops trailing zeros of a decimal mantissa ("1.2300e-9" → "1.23e-9", "2.500" → "2.5"). */
function trim(s: string): string {
  const [m, e] = s.split('e');
  const t = m.includes('.') ? m.replace(/0+$/, '').replace(/\.$/, '') : m;
  return e === undefined ? t : `${t}e${e.replace(/^\+/, '')}`;
}

/**
 * A number with `decimals` decimals (as toFixed), never a negative zero: a value that rounds to
 * zero is written "0.000", not "-0.000" (a reading of -4 µV at 1 mV resolution is zero).
 */
export function formatFixed(x: number, decimals: number): string {
  if (!Number.isFinite(x)) return finiteText(x);
  const s = x.toFixed(decimals);
  return /^-0(\.0*)?$/.test(s) ? s.slice(1) : s;
}

/** A number with `digits` significant digits (trailing zeros dropped). */
export function formatNumber(x: number, digits = 4): string {
  if (!Number.isFinite(x)) return finiteText(x);
  if (x === 0) return '0';
  // Rounding may carry a value across a threshold (99999.7 → 1e5): decide on the rounded value.
  const r = Number(x.toPrecision(digits));
  const ar = Math.abs(r);
  if (ar >= FIXED_LO && ar < FIXED_HI) return trim(r.toFixed(Math.min(20, Math.max(0, digits - 1 - exponentOf(r)))));
  return trim(x.toExponential(Math.max(0, digits - 1)));
}

/** Decimal exponent of |x| (x ≠ 0). */
function exponentOf(x: number): number {
  return Math.floor(Math.log10(Math.abs(x)) + 1e-12);
}

/**
 * "value ± uncertainty", the uncertainty to two significant digits and the value to the same
 * decimal place. Without a usable uncertainty (not finite, or ≤ 0) the value alone, 5 digits.
 */
export function formatMeasurement(value: number, stdErr: number | null | undefined): string {
  if (!Number.isFinite(value)) return finiteText(value);
  if (stdErr === null || stdErr === undefined || !Number.isFinite(stdErr) || !(stdErr > 0)) return formatNumber(value, 5);
  // Decimal place of the uncertainty's second significant digit (after rounding to 2 digits).
  const err = Number(stdErr.toPrecision(2));
  const q = exponentOf(err) - 1;
  const big = Math.max(Math.abs(value), err);
  // An uncertainty far below the value's own precision (noise-free data): both written plainly.
  if (value !== 0 && exponentOf(value) - q + 1 > 10) return `${formatNumber(value, 10)} ± ${formatNumber(err, 2)}`;
  // An uncertainty thousands of times the value (a parameter the data do not determine): rounded to
  // the uncertainty's place the value would read 0.0; each is written in its own form instead.
  if (value !== 0 && err > 1000 * Math.abs(value)) return `${formatNumber(value, 4)} ± ${formatNumber(err, 2)}`;
  if (big >= FIXED_LO && big < FIXED_HI && -q <= 8) {
    const dec = Math.max(0, -q);
    const v = Math.round(value / 10 ** q) * 10 ** q;
    return `${formatFixed(v, dec)} ± ${err.toFixed(dec)}`;
  }
  // One exponent for both: the larger magnitude's.
  const p = exponentOf(big);
  const dec = Math.min(15, Math.max(0, p - q));
  const scale = 10 ** p;
  return `(${formatFixed(value / scale, dec)} ± ${(err / scale).toFixed(dec)})e${p}`;
}

/**
 * Labels for axis ticks: one notation and one number of decimals for the whole axis (exponent form
 * when any tick needs it), the fewest decimals at which every label still reads as its tick (so
 * 2.5 is never shown as "3") and no two labels are the same.
 */
export function formatTicks(ticks: readonly number[]): string[] {
  const finite = ticks.filter((t) => Number.isFinite(t));
  const nonzero = finite.filter((t) => t !== 0);
  const big = nonzero.reduce((m, t) => Math.max(m, Math.abs(t)), 0);
  const small = nonzero.reduce((m, t) => Math.min(m, Math.abs(t)), Infinity);
  const sorted = [...finite].sort((x, y) => x - y);
  let step = Infinity;
  for (let k = 1; k < sorted.length; k++) if (sorted[k] > sorted[k - 1]) step = Math.min(step, sorted[k] - sorted[k - 1]);
  if (!Number.isFinite(step)) step = big || 1;
  const tol = step * 1e-6;
  const expForm = nonzero.length > 0 && (big >= FIXED_HI || small < FIXED_LO);
  const label = (t: number, d: number) => {
    if (!Number.isFinite(t)) return finiteText(t);
    if (Math.abs(t) < tol) return expForm ? (0).toExponential(d).replace(/e\+?/, 'e') : (0).toFixed(d);
    return expForm ? t.toExponential(d).replace('e+', 'e') : t.toFixed(d);
  };
  for (let d = 0; d <= 15; d++) {
    const labels = ticks.map((t) => label(t, d));
    const exact = ticks.every((t, k) => !Number.isFinite(t) || Math.abs(Number(labels[k]) - (Math.abs(t) < tol ? 0 : t)) <= tol);
    if (exact && new Set(labels).size === labels.length) return expForm ? labels.map((l) => (/^-?0(\.0+)?e/.test(l) ? '0' : l)) : labels;
  }
  return ticks.map((t) => label(t, 15));
}

const SUPERSCRIPT: Record<string, string> = { '-': '⁻', '0': '⁰', '1': '¹', '2': '²', '3': '³', '4': '⁴', '5': '⁵', '6': '⁶', '7': '⁷', '8': '⁸', '9': '⁹' };

/** A power of ten as on a printed log axis: 10⁻⁹ (plain decimals from 0.001 to 10000). */
export function formatPowerOfTen(e: number): string {
  if (e >= -3 && e <= 4) return formatNumber(10 ** e);
  return `10${String(e)
    .split('')
    .map((c) => SUPERSCRIPT[c] ?? c)
    .join('')}`;
}

/** Label of a tick on a log axis: decades as 10ⁿ, other ticks as m×10ⁿ (or plain decimals). */
export function formatLogTick(v: number): string {
  if (!(v > 0) || !Number.isFinite(v)) return '';
  const e = exponentOf(v);
  const m = Number((v / 10 ** e).toPrecision(3));
  if (Math.abs(m - 1) < 1e-9) return formatPowerOfTen(e);
  if (e >= -3 && e <= 4) return formatNumber(v, 3);
  return `${formatNumber(m, 3)}×${formatPowerOfTen(e)}`;
}

/**
 * Labels for the ticks of one log axis, in one style: plain decimals when every tick lies in
 * 0.001 … 10000, otherwise powers of ten throughout (10⁻⁶, 2×10⁻⁶).
 */
export function formatLogTicks(ticks: readonly number[]): string[] {
  const pos = ticks.filter((v) => v > 0 && Number.isFinite(v));
  const plain = pos.every((v) => v >= 1e-3 && v < 1e4 * (1 + 1e-9));
  return ticks.map((v) => {
    if (!(v > 0) || !Number.isFinite(v)) return '';
    if (plain) return formatNumber(v, 3);
    const e = exponentOf(v);
    const m = Number((v / 10 ** e).toPrecision(3));
    const pow = `10${String(e)
      .split('')
      .map((c) => SUPERSCRIPT[c] ?? c)
      .join('')}`;
    return Math.abs(m - 1) < 1e-9 ? pow : `${formatNumber(m, 3)}×${pow}`;
  });
}

/**
 * Round tick values between lo and hi (about `count` of them, never fewer than 3 on a range that
 * has any width). Ticks are counted by index (never by adding a step to a running total), so a
 * range narrower than the spacing of doubles near lo gives the two ends instead of a loop without
 * end.
 */
export function niceTicks(lo: number, hi: number, count = 5): number[] {
  if (!Number.isFinite(lo) || !Number.isFinite(hi)) return [];
  if (!(hi > lo)) return [lo];
  const pick = (n: number): number => {
    const raw = (hi - lo) / n;
    const mag = 10 ** Math.floor(Math.log10(raw));
    return [1, 2, 2.5, 5, 10].map((m) => m * mag).find((s) => s >= raw * (1 - 1e-9)) ?? 10 * mag;
  };
  let step = pick(count);
  let first = Math.ceil(lo / step - 1e-9);
  let last = Math.floor(hi / step + 1e-9);
  if (last - first + 1 < 3) {
    step = pick(Math.max(count, 4) * 2);
    first = Math.ceil(lo / step - 1e-9);
    last = Math.floor(hi / step + 1e-9);
  }
  // A step below the resolution of the values themselves: no distinct round ticks exist.
  if (!(step > Math.max(Math.abs(lo), Math.abs(hi)) * 4 * Number.EPSILON) || last - first > 10 * count) return [lo, hi];
  const out: number[] = [];
  for (let k = first; k <= last; k++) {
    const t = k * step;
    out.push(Math.abs(t) < step * 1e-9 ? 0 : Number(t.toPrecision(12)));
  }
  return out;
}

/**
 * Ticks of a log axis between lo and hi (both > 0): whole decades (thinned to about eight), or —
 * when fewer than three decades fall inside — the 1-2-5 steps, then every integer multiple.
 */
export function logTicks(lo: number, hi: number): number[] {
  if (!(lo > 0) || !(hi > lo) || !Number.isFinite(hi)) return lo > 0 ? [lo] : [];
  const a = Math.ceil(Math.log10(lo) - 1e-9);
  const b = Math.floor(Math.log10(hi) + 1e-9);
  if (b - a + 1 >= 3) {
    const step = Math.max(1, Math.ceil((b - a + 1) / 8));
    const out: number[] = [];
    for (let e = a; e <= b; e += step) out.push(Number((10 ** e).toPrecision(12)));
    return out;
  }
  for (const mult of [
    [1, 2, 5],
    [1, 2, 3, 4, 5, 6, 7, 8, 9],
  ]) {
    const out: number[] = [];
    for (let e = Math.floor(Math.log10(lo)); e <= Math.ceil(Math.log10(hi)); e++) {
      for (const m of mult) {
        const v = Number((m * 10 ** e).toPrecision(12));
        if (v >= lo * (1 - 1e-9) && v <= hi * (1 + 1e-9)) out.push(v);
      }
    }
    if (out.length >= 3) return out;
  }
  // Less than one step of the finest table: fall back to linear ticks inside the range.
  return niceTicks(lo, hi, 4).filter((v) => v > 0);
}
