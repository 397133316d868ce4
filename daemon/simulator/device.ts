/**
 * The device on the simulated instrument's terminals: its current at a bias comes from the analysis
 * forward models (never a second copy of a formula), plus an optional parallel leakage, with slow
 * degradation across readings (e.g. charge trapping that shifts a barrier) and dielectric breakdown
 * at a field (after which the device is a low resistance for good).
 */
import { resolveInputs } from '../analysis/analyze.js';
import type { Inputs } from '../analysis/mechanism.js';
import { getMechanism } from '../analysis/mechanisms/index.js';
import { seededUniform } from '../analysis/random.js';
import { singleDiodeCurrent } from '../analysis/single-diode.js';
import { chargeScaleAt, unitWeibull, type WearoutSpec } from '../analysis/wearout.js';

export interface DeviceSpec {
  /**
   * Mechanism id whose forward model gives the current, or 'single-diode' for a cell or diode with
   * R_s and R_sh (params photocurrent, saturationCurrent, idealityFactor, seriesResistance,
   * shuntResistance; the device then draws current into its + terminal as an SMU records it).
   */
  readonly mechanism: string;
  /** Its physical parameters, as the forward model names them. */
  readonly params: Record<string, number>;
  readonly inputs: Inputs;
  /** 'symmetric': I(−V) = −I(V) (films); 'raw': the model sees the signed bias (diodes). */
  readonly polarity?: 'symmetric' | 'raw';
  /** Parallel leakage resistance, Ω. */
  readonly leakageResistance?: number;
  /** A parameter that drifts by `perReading` with every measured point (degradation). */
  readonly drift?: { readonly parameter: string; readonly perReading: number };
  /** Field (V/m) at which the film breaks down; afterwards it conducts through `brokenResistance`. */
  readonly breakdownField?: number;
  readonly brokenResistance?: number;
  /** Wear-out: the film breaks once the charge it passed reaches its own drawn charge to breakdown. */
  readonly wearout?: WearoutSpec;
}

/** What broke the device, when, and the truth a test can be checked against. */
export interface BreakdownRecord {
  /** Charge density passed until breakdown, C/m². */
  readonly charge: number;
  /** Field and bias when it broke, V/m and V. */
  readonly field: number;
  readonly voltage: number;
  /** Seconds of wear (time under bias) until breakdown. */
  readonly time: number;
}

export class SimulatedDevice {
  private readonly params: Record<string, number>;
  private readonly inputs;
  private readonly mech;
  broken = false;
  /** Charge density passed so far, C/m² (wear-out devices). */
  injected = 0;
  /** Accumulated damage (Miner's sum of J dt / η_Q(E)); breaks at `endurance`. */
  private damage = 0;
  private wearTime = 0;
  /** This device's unit-scale Weibull variate: how much damage it takes. */
  readonly endurance: number;
  breakdown: BreakdownRecord | undefined;

  constructor(
    readonly spec: DeviceSpec,
    seed = 1,
  ) {
    this.mech = getMechanism(spec.mechanism === 'single-diode' ? 'diode' : spec.mechanism);
    this.inputs = resolveInputs(this.mech, spec.inputs);
    this.params = { ...spec.params };
    this.endurance = spec.wearout ? unitWeibull(spec.wearout.shape, seededUniform((seed ^ 0x5bd1e995) >>> 0)()) : Infinity;
  }

  /** The charge to breakdown this device would show at a constant field E (V/m), C/m². */
  chargeToBreakdownAt(field: number): number {
    const w = this.spec.wearout;
    if (!w) return Infinity;
    return this.endurance * chargeScaleAt(w, field, this.inputs.area ?? w.referenceArea);
  }

  /**
   * Wear under bias v (V) held for dt seconds: the charge density J·dt adds to the damage in
   * proportion to 1/η_Q(E); the film breaks when the damage reaches its endurance.
   */
  age(v: number, dt: number): void {
    const w = this.spec.wearout;
    const d = this.inputs.thickness;
    if (!w || this.broken || !(dt > 0) || d === undefined) return;
    const area = this.inputs.area ?? w.referenceArea;
    const field = Math.abs(v - this.inputs.flatBand) / d;
    if (field === 0) return;
    const j = Math.abs(this.current(v)) / area;
    const scale = chargeScaleAt(w, field, area);
    const dq = j * dt;
    // Break part-way through the interval when the damage crosses the endurance.
    const room = (this.endurance - this.damage) * scale;
    if (dq >= room) {
      const frac = room / dq;
      this.injected += room;
      this.wearTime += dt * frac;
      this.damage = this.endurance;
      this.broken = true;
      this.breakdown = { charge: this.injected, field, voltage: v, time: this.wearTime };
      return;
    }
    this.injected += dq;
    this.wearTime += dt;
    this.damage += dq / scale;
  }

  /** Current (A) at bias v (V), without instrument effects. Pure: does not advance degradation. */
  current(v: number): number {
    if (this.broken) return v / (this.spec.brokenResistance ?? 100);
    if (this.spec.mechanism === 'single-diode') {
      // SMU (load) convention: current into the device is positive, the negative of the generator current.
      const p = this.params;
      return -singleDiodeCurrent(v, {
        photocurrent: p.photocurrent ?? 0,
        saturationCurrent: p.saturationCurrent,
        idealityFactor: p.idealityFactor,
        seriesResistance: p.seriesResistance ?? 0,
        shuntResistance: p.shuntResistance ?? Infinity,
        temperature: this.inputs.temperature,
      });
    }
    const area = this.mech.usesArea && this.inputs.area !== undefined ? this.inputs.area : 1;
    let i: number;
    if (this.spec.polarity === 'raw') {
      i = v === 0 ? 0 : this.mech.forward(v, this.params, this.inputs) * area;
    } else {
      const b = Math.abs(v - this.inputs.flatBand);
      i = b === 0 ? 0 : Math.sign(v - this.inputs.flatBand) * this.mech.forward(b, this.params, this.inputs) * area;
    }
    if (this.spec.leakageResistance) i += v / this.spec.leakageResistance;
    return Number.isFinite(i) ? i : Math.sign(v) * 1e30;
  }

  /** Called once per measured point at bias v: applies breakdown and degradation. */
  stress(v: number): void {
    const d = this.spec.inputs.thickness;
    if (!this.broken && this.spec.breakdownField !== undefined && d !== undefined && Math.abs(v) / d >= this.spec.breakdownField) {
      this.broken = true;
      this.breakdown = { charge: this.injected, field: Math.abs(v) / d, voltage: v, time: this.wearTime };
    }
    if (this.spec.drift) this.params[this.spec.drift.parameter] += this.spec.drift.perReading;
  }

  get parameterValues(): Readonly<Record<string, number>> {
    return this.params;
  }
}
