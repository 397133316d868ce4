/**
 * The Lambert W function, principal branch W₀ (w·eʷ = x, x ≥ −1/e), and its overflow-safe form
 * W(eᴸ) for arguments given by their logarithm L, which the single-diode model needs: its argument
 * θ = a·exp(b) overflows double precision for real cells (Jain & Kapoor, Sol. Energy Mater.
 * Sol. Cells 81, 269, 2004). For L large, w solves w + ln w = L, which Newton handles without ever
 * forming eᴸ.
 */

/** W₀(x) for x ≥ −1/e, by Halley's iteration from a branch-appropriate start; ~1 ulp. */
export function lambertW0(x: number): number {
  if (Number.isNaN(x) || x < -1 / Math.E) return Number.NaN;
  if (x === 0) return 0;
  if (x === Infinity) return Infinity;
  if (x === -1 / Math.E) return -1;
  let w: number;
  if (x < -0.32) {
    // Near the branch point: series in p = √(2(e·x + 1)).
    const p = Math.sqrt(2 * (Math.E * x + 1));
    w = -1 + p - (p * p) / 3 + (11 / 72) * p * p * p;
  } else if (x < 3) {
    w = Math.log1p(x) * (1 - Math.log1p(Math.log1p(x)) / (2 + Math.log1p(x)));
  } else {
    const l1 = Math.log(x);
    const l2 = Math.log(l1);
    w = l1 - l2 + l2 / l1;
  }
  for (let k = 0; k < 20; k++) {
    const ew = Math.exp(w);
    const f = w * ew - x;
    const wp1 = w + 1;
    if (wp1 === 0) break;
    const step = f / (ew * wp1 - ((w + 2) * f) / (2 * wp1));
    w -= step;
    if (Math.abs(step) <= 4e-16 * (1 + Math.abs(w))) break;
  }
  return w;
}

/** W₀(eᴸ) without forming eᴸ (valid for every real L). */
export function lambertWExp(L: number): number {
  if (Number.isNaN(L)) return Number.NaN;
  if (L < 2) return lambertW0(Math.exp(L));
  // w + ln w = L; start from the asymptotic expansion.
  const lnL = Math.log(L);
  let w = L - lnL + lnL / L;
  for (let k = 0; k < 50; k++) {
    const f = w + Math.log(w) - L;
    // Halley on f(w) = w + ln w − L: f' = 1 + 1/w, f'' = −1/w².
    const f1 = 1 + 1 / w;
    const f2 = -1 / (w * w);
    const step = f / (f1 - (f * f2) / (2 * f1));
    w -= step;
    if (Math.abs(step) <= 4e-16 * w) break;
  }
  return w;
}
