/**
 * Instrument accuracy model: σ_I = gain·|I| + offset (the "± % of reading + offset" form of SMU
 * data sheets), and its propagation into the straight-line weights. For a logarithmic y axis
 * σ(ln I) = σ_I / |I|, so a constant offset down-weights currents near the noise floor.
 */
export interface AccuracySpec {
  /** Fraction of reading (0.001 for ±0.1 %). */
  readonly gain: number;
  /** Offset in amperes. */
  readonly offset: number;
}

/** One standard uncertainty of a current reading, A. */
export function currentSigma(spec: AccuracySpec, current: number): number {
  return spec.gain * Math.abs(current) + spec.offset;
}

/** Standard uncertainty of ln|I|, dimensionless: σ_I/|I|. */
export function lnCurrentSigma(spec: AccuracySpec, current: number): number {
  return currentSigma(spec, current) / Math.abs(current);
}

/** Weight 1/σ² for a point on a log-y (ln) or linear-y axis. */
export function pointWeight(spec: AccuracySpec, current: number, yKind: 'log' | 'linear'): number {
  const s = yKind === 'log' ? lnCurrentSigma(spec, current) : currentSigma(spec, current);
  return s > 0 && Number.isFinite(s) ? 1 / (s * s) : 0;
}
