/**
 * Control charts for one fitted parameter across sweeps (NIST/SEMATECH e-Handbook of Statistical
 * Methods §6.3.2.4 EWMA and §6.3.2.3 tabular CUSUM).
 *
 * Phase I: the first `baseline` sweeps give the centre μ0 and σ. σ is the moving-range estimate
 * MR̄/1.128 (common practice for individual values), never smaller than the mean fit standard
 * error of the baseline values nor than `minRelativeSigma`·|μ0| — so a baseline of nearly equal
 * values does not make the chart fire on noise.
 * Phase II: every later value updates the statistic and is compared with the limits. The centre
 * μ0 is itself an estimate from n0 baseline values, so the limits carry its variance too:
 * σ_eff² = σ_z,t² + σ²/n0 for the EWMA (the deviation z_t − μ0 has both parts), σ·√(1 + 1/n0) for
 * the CUSUM (Montgomery, Introduction to Statistical Quality Control, on control limits from
 * estimated parameters: a short Phase I otherwise raises false alarms far more often than the
 * nominal run length says).
 */

import { studentTQuantile } from './student-t.js';

export interface DriftSettings {
  readonly method: 'ewma' | 'cusum';
  /** Number of sweeps in the Phase-I baseline (≥ 2). */
  readonly baseline: number;
  /** EWMA weight λ (0 < λ ≤ 1); 0.2–0.3 usual. */
  readonly lambda: number;
  /** EWMA limit width L in σ_z; 3 usual. */
  readonly L: number;
  /** EWMA warning width in σ_z (a caution before the limit). */
  readonly warnL: number;
  /** CUSUM reference value k and decision interval h, in σ (0.5 and 4 or 5 usual). */
  readonly k: number;
  readonly h: number;
  /** Floor on σ as a fraction of |μ0|. */
  readonly minRelativeSigma: number;
}

export const DEFAULT_DRIFT: DriftSettings = {
  method: 'ewma',
  baseline: 5,
  lambda: 0.2,
  L: 3,
  warnL: 2,
  k: 0.5,
  h: 4,
  minRelativeSigma: 1e-3,
};

export interface DriftPoint {
  readonly phase: 'baseline' | 'monitor';
  readonly statistic: number | null;
  readonly center: number | null;
  readonly lower: number | null;
  readonly upper: number | null;
  readonly sigma: number | null;
  readonly state: 'baseline' | 'in-control' | 'warning' | 'out-of-control' | 'no-value';
}

/** EWMA statistic z_t = λx_t + (1−λ)z_{t−1}, z_0 = μ0 (NIST/SEMATECH §6.3.2.4). */
export function ewmaStep(z: number, x: number, lambda: number): number {
  return lambda * x + (1 - lambda) * z;
}

/** σ of z after t updates: σ√(λ/(2−λ)·[1−(1−λ)^{2t}]). */
export function ewmaSigma(sigma: number, lambda: number, t: number): number {
  return sigma * Math.sqrt((lambda / (2 - lambda)) * (1 - (1 - lambda) ** (2 * t)));
}

/** Moving-range estimate of σ for individual values: mean |x_i − x_{i−1}| / 1.128 (d2 for n = 2). */
export function movingRangeSigma(values: readonly number[]): number {
  if (values.length < 2) return 0;
  let s = 0;
  for (let i = 1; i < values.length; i++) s += Math.abs(values[i] - values[i - 1]);
  return s / (values.length - 1) / 1.128;
}

export class DriftChart {
  private readonly base: { value: number; stdErr: number }[] = [];
  private mu = Number.NaN;
  private sigma = Number.NaN;
  private z = Number.NaN;
  private t = 0;
  private cPlus = 0;
  private cMinus = 0;

  constructor(readonly settings: DriftSettings = DEFAULT_DRIFT) {
    if (!(settings.baseline >= 2)) throw new RangeError('drift baseline needs at least 2 sweeps');
    if (!(settings.lambda > 0 && settings.lambda <= 1)) throw new RangeError('EWMA lambda must be in (0, 1]');
  }

  get centre(): number {
    return this.mu;
  }

  /** Adds one sweep's value (undefined when that sweep had no fit). */
  add(value: number | undefined, stdErr = 0): DriftPoint {
    const s = this.settings;
    if (value === undefined || !Number.isFinite(value)) {
      return {
        phase: this.base.length < s.baseline ? 'baseline' : 'monitor',
        statistic: null,
        center: this.finite(this.mu),
        lower: null,
        upper: null,
        sigma: this.finite(this.sigma),
        state: 'no-value',
      };
    }
    if (this.base.length < s.baseline) {
      this.base.push({ value, stdErr: Number.isFinite(stdErr) ? stdErr : 0 });
      if (this.base.length === s.baseline) this.closeBaseline();
      return { phase: 'baseline', statistic: value, center: this.finite(this.mu), lower: null, upper: null, sigma: this.finite(this.sigma), state: 'baseline' };
    }
    this.t++;
    if (s.method === 'ewma') {
      this.z = ewmaStep(this.z, value, s.lambda);
      const sz = Math.hypot(ewmaSigma(this.sigma, s.lambda, this.t), this.sigma / Math.sqrt(this.base.length));
      const dev = Math.abs(this.z - this.mu);
      const state = dev > s.L * sz ? 'out-of-control' : dev > s.warnL * sz ? 'warning' : 'in-control';
      return { phase: 'monitor', statistic: this.z, center: this.mu, lower: this.mu - s.L * sz, upper: this.mu + s.L * sz, sigma: this.sigma, state };
    }
    const sEff = this.sigma * Math.sqrt(1 + 1 / this.base.length);
    const K = s.k * sEff;
    const H = s.h * sEff;
    this.cPlus = Math.max(0, value - this.mu - K + this.cPlus);
    this.cMinus = Math.max(0, this.mu - K - value + this.cMinus);
    const c = Math.max(this.cPlus, this.cMinus);
    const state = c > H ? 'out-of-control' : c > H / 2 ? 'warning' : 'in-control';
    return { phase: 'monitor', statistic: this.cPlus >= this.cMinus ? this.cPlus : -this.cMinus, center: 0, lower: -H, upper: H, sigma: this.sigma, state };
  }

  /**
   * A trend through the baseline sweeps, when there is one: the least-squares slope of the values
   * against the sweep number, per sweep, with its standard error from the larger of the scatter
   * about the line and the fits' own errors; set when the slope lies beyond the two-sided 99 % point
   * of Student's t with n − 2 degrees of freedom (and at least 3 standard errors; four baseline
   * sweeps at least). Limits are only meaningful from an in-control
   * baseline (phase I of a control chart: Montgomery, Introduction to Statistical Quality Control,
   * 7th ed. 2013, §5.4 — from memory); a trending one widens them and the watch reacts late.
   */
  baselineTrend: { slope: number; stdErr: number; sweeps: number } | undefined;

  private trendOf(vals: readonly number[], meanSe: number): { slope: number; stdErr: number; sweeps: number } | undefined {
    const n = vals.length;
    if (n < 4) return undefined;
    const mx = (n - 1) / 2;
    const my = vals.reduce((a, b) => a + b, 0) / n;
    let sxx = 0;
    let sxy = 0;
    for (let k = 0; k < n; k++) {
      sxx += (k - mx) ** 2;
      sxy += (k - mx) * (vals[k] - my);
    }
    const slope = sxy / sxx;
    let sse = 0;
    for (let k = 0; k < n; k++) sse += (vals[k] - my - slope * (k - mx)) ** 2;
    const s = Math.max(Math.sqrt(sse / (n - 2)), meanSe);
    const stdErr = s / Math.sqrt(sxx);
    // Beyond the two-sided 99 % point of Student's t for n − 2 degrees of freedom (at least 3):
    // with five baseline sweeps the scatter is known from three, and a plain 3σ would cry wolf.
    const limit = Math.max(3, studentTQuantile(0.99, n - 2));
    return stdErr > 0 && Math.abs(slope) >= limit * stdErr ? { slope, stdErr, sweeps: n } : undefined;
  }

  private closeBaseline(): void {
    const vals = this.base.map((b) => b.value);
    this.mu = vals.reduce((a, b) => a + b, 0) / vals.length;
    const meanSe = this.base.reduce((a, b) => a + b.stdErr, 0) / this.base.length;
    this.baselineTrend = this.trendOf(vals, meanSe);
    this.sigma = Math.max(movingRangeSigma(vals), meanSe, this.settings.minRelativeSigma * Math.abs(this.mu), Number.MIN_VALUE);
    this.z = this.mu;
  }

  private finite(x: number): number | null {
    return Number.isFinite(x) ? x : null;
  }
}
