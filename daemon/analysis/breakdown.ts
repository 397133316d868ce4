/**
 * Breakdown watch within one sweep. Dielectric breakdown shows as the current jumping by decades
 * over a few bias steps, often straight to compliance, and it is irreversible (common practice;
 * see ../shared/physics.md §10). Two signatures:
 *  - a jump of ≥ `jumpDecades` within `withinSteps` points, with the current above `floor`;
 *    confirmed when the point is also at compliance or the live fit predicts ≥ `jumpDecades` less;
 *  - compliance reached straight from a low-current regime (the previous point below
 *    `lowFraction` × the compliance limit): confirmed;
 *  - compliance with the bias collapsing: the source cannot hold even `collapseFraction` of the
 *    previous point's bias, so the device's resistance fell by far more than the sweep step explains
 *    (a tunnelling or diode current that reaches compliance still holds nearly the full bias): confirmed.
 * A smooth climb into compliance (a tunnelling current that simply grows) triggers neither.
 */

export interface BreakdownSettings {
  readonly jumpDecades: number;
  readonly withinSteps: number;
  /** Currents below this (A) are treated as noise for the jump test. */
  readonly floor: number;
  readonly lowFraction: number;
  readonly collapseFraction: number;
}

export const DEFAULT_BREAKDOWN: BreakdownSettings = { jumpDecades: 2, withinSteps: 3, floor: 1e-10, lowFraction: 1e-2, collapseFraction: 0.5 };

export interface BreakdownVerdict {
  readonly state: 'suspected' | 'confirmed';
  readonly reason: string;
  readonly numbers: Record<string, number>;
}

export class BreakdownWatch {
  private readonly recent: number[] = [];
  private prevV: number | undefined;

  constructor(readonly settings: BreakdownSettings = DEFAULT_BREAKDOWN, readonly complianceLimit = Infinity) {}

  reset(): void {
    this.recent.length = 0;
    this.prevV = undefined;
  }

  /**
   * One point: |I| in A, whether the instrument reported compliance, and the live fit's predicted
   * |I| at this bias (undefined when there is no fit or it would be an extrapolation).
   */
  add(v: number, i: number, compliance: boolean, predicted?: number | (() => number | undefined)): BreakdownVerdict | undefined {
    const a = Math.abs(i);
    const s = this.settings;
    let verdict: BreakdownVerdict | undefined;
    const prev = this.recent.length ? this.recent[this.recent.length - 1] : undefined;
    if (compliance && prev !== undefined && prev < s.lowFraction * this.complianceLimit) {
      verdict = {
        state: 'confirmed',
        reason: `compliance at ${v.toPrecision(4)} V straight after ${prev.toExponential(2)} A (below ${s.lowFraction} × the ${this.complianceLimit.toExponential(2)} A limit)`,
        numbers: { bias: v, current: a, previousCurrent: prev, complianceLimit: this.complianceLimit },
      };
    } else if (compliance && this.prevV !== undefined && Math.abs(v) < s.collapseFraction * Math.abs(this.prevV)) {
      verdict = {
        state: 'confirmed',
        reason: `compliance with the bias collapsing from ${this.prevV.toPrecision(4)} V to ${v.toPrecision(4)} V (the device's resistance fell abruptly)`,
        numbers: { bias: v, previousBias: this.prevV, current: a, complianceLimit: this.complianceLimit },
      };
    } else if (a >= s.floor) {
      let minPrev = Infinity;
      for (let k = Math.max(0, this.recent.length - s.withinSteps); k < this.recent.length; k++) minPrev = Math.min(minPrev, this.recent[k]);
      const jump = minPrev > 0 && Number.isFinite(minPrev) ? Math.log10(a / Math.max(minPrev, s.floor / 10)) : 0;
      if (jump >= s.jumpDecades) {
        const pred = typeof predicted === 'function' ? predicted() : predicted;
        const vsFit = pred !== undefined && pred > 0 ? Math.log10(a / pred) : undefined;
        const confirmed = compliance || (vsFit !== undefined && vsFit >= s.jumpDecades);
        const numbers: Record<string, number> = { bias: v, current: a, jumpDecades: jump, steps: s.withinSteps };
        if (vsFit !== undefined) numbers.decadesAboveFit = vsFit;
        verdict = {
          state: confirmed ? 'confirmed' : 'suspected',
          reason: `current rose ${jump.toFixed(1)} decades within ${s.withinSteps} steps at ${v.toPrecision(4)} V${compliance ? ' into compliance' : ''}${vsFit !== undefined ? `, ${vsFit.toFixed(1)} decades above the live fit` : ''}`,
          numbers,
        };
      }
    }
    this.recent.push(a);
    this.prevV = v;
    if (this.recent.length > s.withinSteps + 1) this.recent.shift();
    return verdict;
  }
}
