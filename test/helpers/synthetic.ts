/**
 * Synthetic sweeps from the analysis forward models with seeded multiplicative noise: the recovery
 * tests generate data with known parameters and check the fits return them. (The parameter values
 * are textbook-typical; the data are generated, not measured.)
 */
import { seededNormal } from '../../daemon/analysis/random.js';

export function sweep(from: number, to: number, n: number): Float64Array {
  return Float64Array.from({ length: n }, (_, k) => from + ((to - from) * k) / (n - 1));
}

/** Applies relative noise (fraction of reading) with a fixed seed. */
export function withNoise(values: Float64Array, relative: number, seed = 1): Float64Array {
  const normal = seededNormal(seed);
  return values.map((v) => v * (1 + relative * normal()));
}
