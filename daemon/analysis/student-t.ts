/**
 * Student's t distribution for integer degrees of freedom: P(|T| < t) in closed form
 * (Abramowitz & Stegun 1964, Handbook of Mathematical Functions, 26.7.3 for odd ν and 26.7.4 for
 * even ν, with θ = arctan(t/√ν)), and its two-sided quantile by bisection.
 */

/** A(t|ν) = P(|T| < t) for T ~ Student's t with ν ≥ 1 degrees of freedom (integer), t ≥ 0. */
export function studentTTwoSided(t: number, nu: number): number {
  if (!(nu >= 1) || !Number.isInteger(nu)) throw new RangeError(`degrees of freedom must be a positive integer, got ${nu}`);
  if (!(t > 0)) return 0;
  if (!Number.isFinite(t)) return 1;
  const theta = Math.atan(t / Math.sqrt(nu));
  const s = Math.sin(theta);
  const c = Math.cos(theta);
  if (nu % 2 === 1) {
    // (2/π)[θ + sinθ (cosθ + (2/3)cos³θ + … + (2·4⋯(ν−3))/(1·3⋯(ν−2)) cos^(ν−2)θ)]
    let sum = 0;
    if (nu > 1) {
      let term = c;
      sum = term;
      for (let k = 3; k <= nu - 2; k += 2) {
        term *= ((k - 1) / k) * c * c;
        sum += term;
      }
    }
    return (2 / Math.PI) * (theta + s * sum);
  }
  // sinθ [1 + (1/2)cos²θ + (1·3)/(2·4)cos⁴θ + … + (1·3⋯(ν−3))/(2·4⋯(ν−2)) cos^(ν−2)θ]
  let term = 1;
  let sum = 1;
  for (let k = 2; k <= nu - 2; k += 2) {
    term *= ((k - 1) / k) * c * c;
    sum += term;
  }
  return s * sum;
}

/** The t with P(|T| < t) = confidence (two-sided), ν integer ≥ 1. */
export function studentTQuantile(confidence: number, nu: number): number {
  if (!(confidence > 0 && confidence < 1)) throw new RangeError(`confidence must lie in (0, 1), got ${confidence}`);
  let lo = 0;
  let hi = 1;
  while (studentTTwoSided(hi, nu) < confidence) hi *= 2;
  for (let k = 0; k < 200 && hi - lo > 1e-12 * hi; k++) {
    const mid = 0.5 * (lo + hi);
    if (studentTTwoSided(mid, nu) < confidence) lo = mid;
    else hi = mid;
  }
  return 0.5 * (lo + hi);
}
