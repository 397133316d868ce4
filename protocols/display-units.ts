/**
 * The trade's units on screen and in text. Everything inside plumbline, in its files and in JSON is
 * SI (energies in eV); what a person reads — the page, the offline report, the command line's text —
 * shows each quantity in the unit device engineers quote it in: thickness in nm, area in cm², field
 * in MV/cm, current density in A/cm², mobility in cm²/(V·s), the Fowler–Nordheim abscissa 1/E in
 * cm/MV, √E in (MV/cm)^½ (common practice). Dimensionless values carry no unit.
 *
 * One table, keyed by the SI unit strings the analysis writes, plus a few quantities that have a
 * unit of their own (J_sc in mA/cm², efficiency in %). displayed value = SI value × scale.
 * No dependencies, no DOM and no Node APIs: the page imports this file as it is.
 */
import { formatMeasurement, formatNumber } from './number-format.js';

export interface DisplayUnit {
  /** The unit as printed ('' for a dimensionless value). */
  readonly unit: string;
  /** displayed = SI × scale. */
  readonly scale: number;
}

// Field: 1 MV/cm = 1e8 V/m. Current density: 1 A/cm² = 1e4 A/m². Area: 1 cm² = 1e-4 m².
const MV_CM = 1e-8; // V/m → MV/cm
const A_CM2 = 1e-4; // A/m² → A/cm²

/** SI unit string (spaces removed) → display unit. Anything not listed is shown as written, prettified. */
const BY_UNIT: Record<string, DisplayUnit> = {
  '': { unit: '', scale: 1 },
  '1': { unit: '', scale: 1 },
  m: { unit: 'nm', scale: 1e9 },
  'm^2': { unit: 'cm²', scale: 1e4 },
  'V/m': { unit: 'MV/cm', scale: MV_CM },
  'm/V': { unit: 'cm/MV', scale: 1 / MV_CM },
  '(V/m)^0.5': { unit: '(MV/cm)^½', scale: Math.sqrt(MV_CM) },
  'A/m^2': { unit: 'A/cm²', scale: A_CM2 },
  'A/m^2/(V/m)^2': { unit: '(A/cm²)/(MV/cm)²', scale: A_CM2 / (MV_CM * MV_CM) },
  'A/(V/m)^2': { unit: 'A/(MV/cm)²', scale: 1 / (MV_CM * MV_CM) },
  'A/m^2/(V/m)': { unit: '(A/cm²)/(MV/cm)', scale: A_CM2 / MV_CM },
  'A/(V/m)': { unit: 'A/(MV/cm)', scale: 1 / MV_CM },
  'A/m^2/K^2': { unit: '(A/cm²)/K²', scale: A_CM2 },
  'A/K^2': { unit: 'A/K²', scale: 1 },
  'A/m^2/V': { unit: '(A/cm²)/V', scale: A_CM2 },
  'A/m^2/V^2': { unit: '(A/cm²)/V²', scale: A_CM2 },
  'A/(m^2K^2)': { unit: 'A/(cm²·K²)', scale: A_CM2 },
  'A/(m^2*K^2)': { unit: 'A/(cm²·K²)', scale: A_CM2 },
  'A*m^-2*K^-2': { unit: 'A/(cm²·K²)', scale: A_CM2 },
  'm^2/(V*s)': { unit: 'cm²/(V·s)', scale: 1e4 },
  'm^2/(Vs)': { unit: 'cm²/(V·s)', scale: 1e4 },
  'S/m': { unit: 'S/cm', scale: 1e-2 },
  'ohm*m': { unit: 'Ω·cm', scale: 1e2 },
  'C/m^2': { unit: 'C/cm²', scale: 1e-4 },
  'W/m^2': { unit: 'mW/cm²', scale: 0.1 },
  'F/m^2': { unit: 'F/cm²', scale: 1e-4 },
  'm^-3': { unit: 'cm⁻³', scale: 1e-6 },
  '1/m^3': { unit: 'cm⁻³', scale: 1e-6 },
};

/** Quantities (parameter or input names) with a display unit of their own. */
const BY_QUANTITY: Record<string, DisplayUnit> = {
  jsc: { unit: 'mA/cm²', scale: 0.1 },
  shortCircuitCurrentDensity: { unit: 'mA/cm²', scale: 0.1 },
  efficiency: { unit: '%', scale: 100 },
  irradiance: { unit: 'W/m²', scale: 1 },
};

function key(siUnit: string): string {
  return siUnit.replace(/\s+/g, '');
}

/** A unit string in print form: ^2 → ², ^-1 → ⁻¹, * → ·, ohm → Ω, '1' → ''. */
export function prettyUnit(u: string): string {
  if (u === '1') return '';
  const sup: Record<string, string> = { '-': '⁻', '0': '⁰', '1': '¹', '2': '²', '3': '³', '4': '⁴', '5': '⁵', '6': '⁶', '7': '⁷', '8': '⁸', '9': '⁹' };
  return u
    .replace(/\^0\.5/g, '^½')
    .replace(/\^(-?\d+)/g, (_, e: string) =>
      e
        .split('')
        .map((c) => sup[c] ?? c)
        .join(''),
    )
    .replace(/\*/g, '·')
    .replace(/\bohm\b/g, 'Ω');
}

/** The display unit of a quantity given in `siUnit` (optionally named, for the few with their own). */
export function displayUnit(siUnit: string, quantity?: string): DisplayUnit {
  if (quantity !== undefined && BY_QUANTITY[quantity]) return BY_QUANTITY[quantity];
  return BY_UNIT[key(siUnit)] ?? { unit: prettyUnit(siUnit), scale: 1 };
}

/** An SI value in its display unit. */
export function toDisplay(value: number, siUnit: string, quantity?: string): number {
  return value * displayUnit(siUnit, quantity).scale;
}

/** A value typed in the display unit, back to SI. */
export function fromDisplay(value: number, siUnit: string, quantity?: string): number {
  return value / displayUnit(siUnit, quantity).scale;
}

/** "value ± error unit" in the display unit (no unit for dimensionless values). */
export function formatParameter(p: { value: number; stdErr?: number | null; unit: string }, quantity?: string): { text: string; unit: string } {
  const d = displayUnit(p.unit, quantity);
  const text = p.stdErr === undefined || p.stdErr === null ? formatNumber(p.value * d.scale, 5) : formatMeasurement(p.value * d.scale, p.stdErr * d.scale);
  return { text, unit: d.unit };
}

/** formatParameter as one string: "3.152 ± 0.021 eV", "2.13 ± 0.04" (dimensionless). */
export function formatParameterText(p: { value: number; stdErr?: number | null; unit: string }, quantity?: string): string {
  const f = formatParameter(p, quantity);
  return f.unit ? `${f.text} ${f.unit}` : f.text;
}

/** A value without uncertainty in its display unit: "7 nm", "1e-4 cm²", "300 K". */
export function formatQuantity(value: number, siUnit: string, quantity?: string, digits = 5): string {
  const d = displayUnit(siUnit, quantity);
  const t = formatNumber(value * d.scale, digits);
  return d.unit ? `${t} ${d.unit}` : t;
}

/** An axis label: "J/E² ((A/cm²)/(MV/cm)²)", or the quantity alone when it has no unit. */
export function axisLabel(a: { label: string; unit: string }): string {
  const u = displayUnit(a.unit).unit;
  return u ? `${a.label} (${u})` : a.label;
}

/**
 * The analysis inputs a person types: SI name → display unit, and the words for the form and for
 * messages. Inputs without a unit (mass ratio, permittivity, refractive index) have unit ''.
 */
export const INPUTS: Readonly<Record<string, { readonly si: string; readonly label: string; readonly hint: string } & DisplayUnit>> = {
  thickness: { si: 'm', label: 'thickness', hint: 'film thickness d', ...BY_UNIT.m },
  area: { si: 'm^2', label: 'area', hint: 'device area (J = I/area)', ...BY_UNIT['m^2'] },
  temperature: { si: 'K', label: 'temperature', hint: 'device temperature', unit: 'K', scale: 1 },
  massRatio: { si: '1', label: 'mass ratio m*/m₀', hint: 'tunnelling effective-mass ratio', unit: '', scale: 1 },
  refractiveIndex: { si: '1', label: 'refractive index n', hint: 'optical index: the dynamic ε_r should be near n²', unit: '', scale: 1 },
  permittivity: { si: '1', label: 'static ε_r', hint: 'relative permittivity (space-charge-limited current)', unit: '', scale: 1 },
  richardson: { si: 'A/(m^2*K^2)', label: 'Richardson A*', hint: 'effective Richardson constant', unit: 'A/(cm²·K²)', scale: A_CM2 },
  flatBand: { si: 'V', label: 'flat band V_FB', hint: 'offset subtracted from the bias before the field', unit: 'V', scale: 1 },
};

/** Analysis inputs (SI) as text in display units: "thickness 7 nm, area 1e-4 cm², temperature 300 K". */
export function formatInputs(inputs: Record<string, number | undefined | { value: number; assumed?: boolean }>): string {
  const out: string[] = [];
  for (const [k, raw] of Object.entries(inputs)) {
    if (raw === undefined) continue;
    const v = typeof raw === 'number' ? raw : raw.value;
    const assumed = typeof raw === 'object' && raw.assumed;
    const d = INPUTS[k];
    const t = d ? formatNumber(v * d.scale, 5) + (d.unit ? ` ${d.unit}` : '') : formatNumber(v, 5);
    out.push(`${d?.label ?? k} ${t}${assumed ? ' (assumed)' : ''}`);
  }
  return out.join(', ');
}

/** Names of fitted parameters and figures of merit as the trade writes them (keys stay as in JSON). */
export const PARAMETER_LABELS: Readonly<Record<string, string>> = {
  barrierHeight: 'barrier height φ_B',
  relativePermittivity: 'relative permittivity ε_r',
  idealityFactor: 'ideality factor n',
  saturationCurrent: 'saturation current I₀',
  idealityFactor1: 'ideality factor n₁',
  saturationCurrent1: 'saturation current I₀₁',
  idealityFactor2: 'ideality factor n₂',
  saturationCurrent2: 'saturation current I₀₂',
  hoppingDistance: 'hopping distance a',
  mobility: 'mobility μ',
  exponent: 'exponent',
  transitionVoltage: 'transition voltage V_tr',
  resistance: 'resistance R',
  conductivity: 'conductivity σ',
  trapEnergy: 'trap energy φ_t',
  rate: 'rate',
  prefactor: 'prefactor',
  activationEnergy: 'activation energy E_a',
  photocurrent: 'photocurrent I_ph',
  seriesResistance: 'series resistance R_s',
  leakageResistance: 'leakage resistance R_leak',
  shuntResistance: 'shunt resistance R_sh',
  isc: 'short-circuit current I_sc',
  jsc: 'short-circuit current density J_sc',
  voc: 'open-circuit voltage V_oc',
  pmax: 'maximum power P_max',
  vmp: 'voltage at P_max',
  imp: 'current at P_max',
  fillFactor: 'fill factor FF',
  efficiency: 'efficiency η',
};

/**
 * The figures of a breakdown test's result (a `test-result` event's `result`, a row of
 * device-results.csv) with their SI units and the trade's names; shown in display units (field in
 * MV/cm, charge to breakdown in C/cm²). For a device that survived, the value it reached.
 */
export const RESULT_FIGURES: Readonly<Record<string, { readonly si: string; readonly label: string; readonly reached: string }>> = {
  breakdownVoltage: { si: 'V', label: 'breakdown voltage V_bd', reached: 'highest voltage reached' },
  breakdownField: { si: 'V/m', label: 'breakdown field E_bd', reached: 'highest field reached' },
  chargeToBreakdown: { si: 'C/m^2', label: 'charge to breakdown Q_bd', reached: 'charge passed' },
  timeToBreakdown: { si: 's', label: 'time to breakdown t_bd', reached: 'time under stress' },
  leakageBefore: { si: 'A', label: 'leakage at the use voltage, before', reached: 'leakage at the use voltage, before' },
  leakageAfter: { si: 'A', label: 'leakage at the use voltage, after', reached: 'leakage at the use voltage, after' },
};

/** A parameter's name for people: the trade's words, or the key itself. */
export function parameterLabel(key: string): string {
  return PARAMETER_LABELS[key] ?? key;
}
