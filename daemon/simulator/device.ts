/**
 * The device on the simulated instrument's terminals: its current at a bias comes from the analysis
 * forward models (never a second copy of a formula), plus an optional parallel leakage, with slow
 * degradation across readings (e.g. charge trapping that shifts a barrier) and dielectric breakdown
 * at a field (after which the device is a low resistance for good).
 */
import { resolveInputs } from '../analysis/analyze.js';
import type { Inputs } from '../analysis/mechanism.js';
import { getMechanism } from '../analysis/mechanisms/index.js';
import { singleDiodeCurrent } from '../analysis/single-diode.js';

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
}

export class SimulatedDevice {
  private readonly params: Record<string, number>;
  private readonly inputs;
  private readonly mech;
  private readings = 0;
  broken = false;

  constructor(readonly spec: DeviceSpec) {
    this.mech = getMechanism(spec.mechanism === 'single-diode' ? 'diode' : spec.mechanism);
    this.inputs = resolveInputs(this.mech, spec.inputs);
    this.params = { ...spec.params };
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
    this.readings++;
    const d = this.spec.inputs.thickness;
    if (!this.broken && this.spec.breakdownField !== undefined && d !== undefined && Math.abs(v) / d >= this.spec.breakdownField) {
      this.broken = true;
    }
    if (this.spec.drift) this.params[this.spec.drift.parameter] += this.spec.drift.perReading;
  }

  get parameterValues(): Readonly<Record<string, number>> {
    return this.params;
  }
}
