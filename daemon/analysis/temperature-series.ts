/**
 * Temperature series: a fitted quantity from sweeps taken at several temperatures, on an Arrhenius
 * plot. The quantity is either the intercept of a mechanism's line (already a logarithm: for
 * Poole–Frenkel, ln(J/E) at E → 0 = ln C − qφ_t/kT, so the slope against 1/T gives the trap depth;
 * for Schottky emission, ln(J/T²) at E → 0 = ln A* − qφ_B/kT, the Richardson plot, gives the
 * barrier) or a positive fitted parameter p (ln p against 1/T). The line is a weighted fit (weights
 * 1/σ² from the per-sweep standard errors, scaled by χ²_ν when it exceeds 1), and
 * E_a = −k_B·slope in eV, with its standard error (Arrhenius; Sze & Ng).
 */
import { BOLTZMANN_EV_PER_K } from './constants.js';
import { AnalysisError } from './errors.js';
import { fitLine } from './line-fit.js';

export interface SeriesPoint {
  readonly temperature: number;
  /** ln of the quantity (the intercept as is; ln p for a parameter). */
  readonly y: number;
  /** Standard error of y. */
  readonly yStdErr: number;
}

export interface ArrheniusResult {
  readonly activationEnergy: { value: number; stdErr: number; unit: 'eV' };
  /** e^intercept: the quantity extrapolated to 1/T → 0, in the quantity's own unit. */
  readonly prefactor: { value: number; stdErr: number };
  readonly slope: number;
  readonly slopeStdErr: number;
  readonly chi2Reduced: number | null;
  readonly n: number;
}

/**
 * A point for the Arrhenius plot from a fitted quantity: an intercept is already a logarithm;
 * a parameter p enters as ln p with δ(ln p) = δp/p.
 */
export function seriesPoint(temperature: number, value: number, stdErr: number, alreadyLog: boolean): SeriesPoint {
  if (alreadyLog) return { temperature, y: value, yStdErr: stdErr };
  if (!(value > 0)) throw new AnalysisError('BAD_INPUT', `${value} is not positive: no logarithm for the Arrhenius plot`);
  return { temperature, y: Math.log(value), yStdErr: stdErr / value };
}

export function arrhenius(points: readonly SeriesPoint[]): ArrheniusResult {
  if (points.length < 3) throw new AnalysisError('TOO_FEW_POINTS', `an Arrhenius fit needs sweeps at 3 or more temperatures; ${points.length} given`);
  const temps = new Set(points.map((p) => p.temperature));
  if (temps.size < 2) throw new AnalysisError('DEGENERATE_X', 'all sweeps are at one temperature');
  const x = points.map((p) => 1 / p.temperature);
  const y = points.map((p) => p.y);
  const weighted = points.every((p) => p.yStdErr > 0 && Number.isFinite(p.yStdErr));
  const f = fitLine(x, y, weighted ? { weights: points.map((p) => 1 / (p.yStdErr * p.yStdErr)), absoluteWeights: true } : {});
  // Absolute weights: when the scatter exceeds the stated errors, widen by √χ²_ν (Bevington).
  const scale = weighted && f.chi2Reduced !== null && f.chi2Reduced > 1 ? Math.sqrt(f.chi2Reduced) : 1;
  const slopeSe = f.slopeStdErr * scale;
  const pre = Math.exp(f.intercept);
  return {
    activationEnergy: { value: -BOLTZMANN_EV_PER_K * f.slope, stdErr: BOLTZMANN_EV_PER_K * slopeSe, unit: 'eV' },
    prefactor: { value: pre, stdErr: pre * f.interceptStdErr * scale },
    slope: f.slope,
    slopeStdErr: slopeSe,
    chi2Reduced: f.chi2Reduced,
    n: points.length,
  };
}

/** Reads a temperature from an annotation ("T = 350 K", "T=77K", tag "T=300K"); undefined if none. */
export function temperatureFromText(text: string): number | undefined {
  const m = /\bT\s*=\s*([0-9]+(?:\.[0-9]+)?)\s*K\b/.exec(text);
  if (!m) return undefined;
  const t = Number(m[1]);
  return t > 0 ? t : undefined;
}
