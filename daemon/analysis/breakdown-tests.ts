/**
 * Breakdown tests of thin dielectrics: the criteria that decide, reading by reading, that a device
 * under a voltage ramp, a current ramp or constant-voltage stress has broken down, and the charge it
 * passed until then. JEDEC JESD35-A (wafer-level testing of thin dielectrics) names these kinds of
 * criteria — the current passing a set level, the current jumping between consecutive steps, the
 * slope of the current–voltage curve changing, and, under a forced current, the voltage collapsing;
 * the thresholds are configurable and their defaults here are ours (common practice: a jump of a
 * decade; a slope three times its recent median; a voltage falling by a tenth).
 *
 * Charge is integrated as the staircase the instrument applies: each reading stands for the hold
 * that ends with it, Q = Σ |I_k|·Δt_k, divided by the area for Q_bd in C/m².
 *
 * Pure maths; no I/O.
 */

/** Which criterion fired. */
export type BreakdownCriterion = 'current-limit' | 'compliance' | 'current-jump' | 'slope-change' | 'voltage-collapse';

export interface BreakdownVerdict {
  readonly criterion: BreakdownCriterion;
  /** Index of the reading at which the criterion fired. */
  readonly index: number;
  /** Plain words, with the numbers. */
  readonly reason: string;
  readonly numbers: Readonly<Record<string, number>>;
}

export interface VoltageRampCriteria {
  readonly currentJump: number;
  readonly slopeFactor: number;
  readonly slopeWindow: number;
  /** Bias span each local slope is taken over, V (default 0.1). */
  readonly slopeSpan?: number;
  readonly currentLimit?: number;
  readonly floor: number;
}

const g = (x: number) => x.toPrecision(3);

/**
 * At compliance, whether the source still held the bias: the measured voltage within `drop` (a
 * tenth by default, common practice) of the programmed one. A broken film lets the bias collapse
 * (JEDEC JESD35-A counts compliance with a collapsing bias as breakdown); a healthy film whose
 * tunnelling current merely reached the limit keeps it, and that is the end of what the ramp can
 * show, not a breakdown.
 */
export function biasHeldAtCompliance(programmed: number, measured: number, drop = 0.1): boolean {
  return Number.isFinite(measured) && Math.abs(measured) >= (1 - drop) * Math.abs(programmed);
}

/**
 * Judges a voltage ramp (or any rising staircase of bias) one reading at a time. The slope test
 * compares the local slope d ln|I|/dV with the median of the previous `slopeWindow` slopes: a
 * tunnelling or emission current has a slope that falls smoothly as the bias rises, so a slope that
 * suddenly triples marks a new conduction path (a soft breakdown); the jump test catches the hard
 * breakdown that a decade step in one reading means. Each local slope is taken from the newest
 * reading at least `slopeSpan` below (the previous one when the steps are coarser), so that fine
 * steps do not turn reading noise into slope.
 */
export class VoltageRampJudge {
  private prev: { v: number; i: number } | undefined;
  /** Readings above the floor, for the slope's base (pruned to what the span needs). */
  private readonly history: { v: number; i: number }[] = [];
  private readonly slopes: number[] = [];
  private n = 0;

  constructor(
    readonly criteria: VoltageRampCriteria,
    readonly compliance: number,
  ) {}

  add(v: number, i: number, atCompliance: boolean): BreakdownVerdict | undefined {
    const k = this.n++;
    const a = Math.abs(i);
    const c = this.criteria;
    const limit = c.currentLimit ?? Infinity;
    if (atCompliance)
      return {
        criterion: 'compliance',
        index: k,
        reason: `the current reached the ${g(this.compliance)} A compliance at ${g(v)} V`,
        numbers: { voltage: v, current: i },
      };
    if (a >= limit)
      return {
        criterion: 'current-limit',
        index: k,
        reason: `|I| = ${g(a)} A at ${g(v)} V reached the breakdown current ${g(limit)} A`,
        numbers: { voltage: v, current: i, limit },
      };
    const p = this.prev;
    this.prev = { v, i: a };
    if (!p || !Number.isFinite(a) || p.i < c.floor || a < c.floor) return undefined;
    const ratio = a / p.i;
    if (ratio >= c.currentJump) {
      return {
        criterion: 'current-jump',
        index: k,
        reason: `the current jumped ×${g(ratio)} in one step (${g(p.i)} → ${g(a)} A at ${g(v)} V)`,
        numbers: { voltage: v, current: i, previous: p.i, ratio },
      };
    }
    // The slope's base: the newest earlier reading at least slopeSpan below this one.
    const span = c.slopeSpan ?? 0.1;
    this.history.push({ v, i: a });
    let base: { v: number; i: number } | undefined;
    for (let j = this.history.length - 2; j >= 0; j--) {
      if (Math.abs(v - this.history[j].v) >= span - 1e-12) {
        base = this.history[j];
        // Older readings are never needed again: the next base is at least this one.
        if (j > 0) this.history.splice(0, j);
        break;
      }
    }
    const dv = base ? v - base.v : 0;
    if (c.slopeFactor > 0 && base && dv !== 0) {
      const s = Math.log(a / base.i) / Math.abs(dv);
      if (this.slopes.length >= c.slopeWindow) {
        const recent = this.slopes.slice(-c.slopeWindow).sort((x, y) => x - y);
        const med = recent[recent.length >> 1];
        if (med > 0 && s >= c.slopeFactor * med) {
          this.slopes.push(s);
          return {
            criterion: 'slope-change',
            index: k,
            reason: `the slope of ln|I| against V rose to ${g(s)} /V, ${g(s / med)}× its recent median ${g(med)} /V, at ${g(v)} V`,
            numbers: { voltage: v, current: i, slope: s, median: med },
          };
        }
      }
      this.slopes.push(s);
    }
    return undefined;
  }
}

/**
 * Judges a current ramp: the forced current rises, so does the voltage it needs; a breakdown opens a
 * path and the voltage collapses. Reaching the voltage limit means the current could not be driven
 * (the device held: the test ends without breakdown).
 */
export class CurrentRampJudge {
  private vmax = 0;
  private n = 0;

  /**
   * `voltageFloor`: a fall counts only once the device has held at least this voltage — below it the
   * readings are the instrument's offset on a device that already conducts, and microvolts "falling"
   * by a tenth are noise, not a breakdown.
   */
  constructor(
    readonly voltageDrop: number,
    readonly voltageFloor = 0,
  ) {}

  add(v: number, i: number): BreakdownVerdict | undefined {
    const k = this.n++;
    const a = Math.abs(v);
    if (this.vmax > 0 && this.vmax >= this.voltageFloor && a < (1 - this.voltageDrop) * this.vmax) {
      return {
        criterion: 'voltage-collapse',
        index: k,
        reason: `the voltage fell to ${g(a)} V from ${g(this.vmax)} V (more than ${Math.round(this.voltageDrop * 100)} %) at ${g(Math.abs(i))} A`,
        numbers: { voltage: v, current: i, highest: this.vmax },
      };
    }
    this.vmax = Math.max(this.vmax, a);
    return undefined;
  }
}

/** Judges constant-voltage stress: a jump of the current between readings, or a current limit. */
export class StressJudge {
  private prev: number | undefined;
  private n = 0;

  constructor(
    readonly criteria: { readonly currentJump: number; readonly currentLimit?: number; readonly floor: number },
    readonly compliance: number,
  ) {}

  add(t: number, i: number, atCompliance: boolean): BreakdownVerdict | undefined {
    const k = this.n++;
    const a = Math.abs(i);
    if (atCompliance)
      return {
        criterion: 'compliance',
        index: k,
        reason: `the current reached the ${g(this.compliance)} A compliance after ${g(t)} s of stress`,
        numbers: { time: t, current: i },
      };
    const limit = this.criteria.currentLimit ?? Infinity;
    if (a >= limit)
      return {
        criterion: 'current-limit',
        index: k,
        reason: `|I| = ${g(a)} A after ${g(t)} s reached the breakdown current ${g(limit)} A`,
        numbers: { time: t, current: i, limit },
      };
    const p = this.prev;
    this.prev = a;
    if (p !== undefined && p >= this.criteria.floor && a >= this.criteria.currentJump * p) {
      return {
        criterion: 'current-jump',
        index: k,
        reason: `the current jumped ×${g(a / p)} between readings (${g(p)} → ${g(a)} A) after ${g(t)} s of stress`,
        numbers: { time: t, current: i, previous: p, ratio: a / p },
      };
    }
    return undefined;
  }
}

/**
 * Charge through the device over readings 0 … upTo−1, C. A stepped source sets a level, holds it and
 * reads at the end of the hold, so each reading stands for the hold that ends with it: `hold[k]` s
 * (t_k − t_{k−1} for a ramp; the stress time only, for stress interrupted by sense sweeps).
 */
export function heldCharge(hold: ArrayLike<number>, i: ArrayLike<number>, upTo = hold.length): number {
  let q = 0;
  const n = Math.min(upTo, hold.length);
  for (let k = 0; k < n; k++) {
    const a = Math.abs(i[k]);
    if (Number.isFinite(a) && hold[k] > 0) q += a * hold[k];
  }
  return q;
}

/**
 * Charge to breakdown from the readings before the one that showed it (index `at`), C: the held
 * charge of readings 0 … at−1 plus half of the breakdown step at the last intact current — the
 * device broke at an unknown moment of that step, on average half-way.
 */
export function chargeToBreakdown(hold: ArrayLike<number>, i: ArrayLike<number>, at: number): number {
  const q = heldCharge(hold, i, at);
  if (at <= 0 || at >= hold.length) return q;
  const a = Math.abs(i[at - 1]);
  return q + (Number.isFinite(a) ? 0.5 * a * hold[at] : 0);
}

/**
 * Charge to breakdown on a staircase from the moments the levels were set (`tSet`) and read
 * (`tMeas`), s, up to the reading `at` that showed the breakdown, C. What is known: each intact
 * level's current flowed from its setting to the next one's; the last intact level's from its
 * setting to its reading. The device broke at an unknown moment between that reading and the one
 * that showed the breakdown: half of that interval is counted, at the last intact current (the
 * midpoint estimate, unbiased whatever the length of the interval).
 */
export function staircaseChargeToBreakdown(tSet: ArrayLike<number>, tMeas: ArrayLike<number>, i: ArrayLike<number>, at: number): number {
  let q = 0;
  const n = Math.min(at, tSet.length);
  for (let k = 0; k < n; k++) {
    const a = Math.abs(i[k]);
    if (!Number.isFinite(a)) continue;
    const end = k + 1 < n ? tSet[k + 1] : tMeas[k];
    q += a * Math.max(0, end - tSet[k]);
  }
  if (at > 0 && at < tMeas.length) {
    const a = Math.abs(i[at - 1]);
    if (Number.isFinite(a)) q += 0.5 * a * Math.max(0, tMeas[at] - tMeas[at - 1]);
  }
  return q;
}
