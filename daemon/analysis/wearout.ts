/**
 * Wear-out of a thin dielectric, the forward model the simulated device breaks by: each device has
 * a charge to breakdown drawn from a Weibull distribution whose scale depends on the field and on
 * the area,
 *
 *   η_Q(E, A) = η_ref · exp(−γ·(E − E_ref)) · (A_ref / A)^(1/β),
 *
 * - the field acceleration has the exponential form of the thermochemical "E model"
 *   (McPherson & Mogul, J. Appl. Phys. 84, 1513 (1998): time to failure ∝ exp(−γE); from memory),
 *   applied here to the charge scale;
 * - the area factor is weakest-link (Poisson) area scaling (Wu & Suñé, IEEE Trans. Electron
 *   Devices 56, 1433 (2009)), the same `areaScaledScale` the Weibull analysis uses.
 *
 * Under a field that changes with time (a ramp), damage accumulates linearly,
 * D = ∫ J dt / η_Q(E(t)), and the device breaks when D reaches its own unit-scale Weibull variate
 * u = (−ln(1 − U))^(1/β); at a constant field this gives Q_bd ~ Weibull(β, η_Q(E)) exactly.
 * Pure maths; no I/O.
 */
import { areaScaledScale } from './weibull.js';

export interface WearoutSpec {
  /** Weibull shape β of the charge to breakdown (the slope of the Weibull plot). */
  readonly shape: number;
  /** Scale of the charge to breakdown at the reference field and area, C/m². */
  readonly chargeScale: number;
  /** Reference field, V/m. */
  readonly referenceField: number;
  /** Field acceleration γ, m/V (ln of the scale falls by γ per V/m above the reference). */
  readonly fieldAcceleration: number;
  /** Reference area, m². */
  readonly referenceArea: number;
}

/** η_Q at field E (V/m) for a device of area A (m²), C/m². */
export function chargeScaleAt(spec: WearoutSpec, field: number, area: number): number {
  const atField = spec.chargeScale * Math.exp(-spec.fieldAcceleration * (Math.abs(field) - spec.referenceField));
  return areaScaledScale(atField, spec.shape, spec.referenceArea, area);
}

/** A unit-scale Weibull variate from a uniform U on (0, 1): (−ln(1 − U))^(1/β). */
export function unitWeibull(shape: number, uniform: number): number {
  return (-Math.log1p(-uniform)) ** (1 / shape);
}
