/**
 * What every conduction mechanism declares. A mechanism is a linearization (x and y transforms
 * under which its forward model is a straight line), the inputs it needs, its forward model (the
 * simulator calls it), and the extraction of physical parameters from slope and intercept with
 * propagated standard errors and plausibility notes.
 */
import type { LineFit } from './line-fit.js';

/** Physical inputs, SI units. Every field optional until a mechanism needs it. */
export interface Inputs {
  /** Film thickness d, m. */
  thickness?: number;
  /** Device area, m². */
  area?: number;
  /** Temperature, K. */
  temperature?: number;
  /** Tunnelling effective-mass ratio m* / m₀. */
  massRatio?: number;
  /** Relative permittivity ε_r (static, for space-charge-limited current). */
  permittivity?: number;
  /** Optical refractive index n (dynamic permittivity ≈ n²). */
  refractiveIndex?: number;
  /** Flat-band (offset) voltage subtracted from the bias before computing the field, V. */
  flatBand?: number;
  /** Richardson constant A*, A·m⁻²·K⁻². */
  richardson?: number;
}
export type InputName = keyof Inputs;

/** Inputs with the defaults a fit applied; `assumed` lists the ones that were not given. */
export interface ResolvedInputs extends Inputs {
  temperature: number;
  massRatio: number;
  flatBand: number;
  richardson: number;
  assumed: InputName[];
}

export type AxisKind = 'linear' | 'log';

export interface AxisSpec {
  /** Quantity plotted, in the trade's notation, e.g. "J/E²". */
  readonly label: string;
  /** Unit of that quantity (depends on whether an area was given). */
  readonly unit: string;
  /** 'log': the quantity is shown on a log axis and fitted as its natural logarithm. */
  readonly kind: AxisKind;
}

/**
 * What a dataset's own two columns hold, when the caller knows it: a mechanism of raw columns
 * (`linear`) labels its axes with them. A file's columns may hold anything, so `fit` leaves this
 * out and those axes carry no unit; a station's readings are `READING_COLUMNS`.
 */
export interface DataColumns {
  readonly x: { readonly label: string; readonly unit: string };
  readonly y: { readonly label: string; readonly unit: string };
}

/** A source-measure unit's readings as a station records them: the bias in V, the current in A. */
export const READING_COLUMNS: DataColumns = { x: { label: 'V', unit: 'V' }, y: { label: 'I', unit: 'A' } };

export interface ParameterValue {
  readonly value: number;
  /** One standard uncertainty: the statistical and window-choice parts added in quadrature. */
  readonly stdErr: number;
  readonly unit: string;
  /** The statistical part (the fit's covariance, scaled by χ²/dof). */
  readonly statStdErr?: number;
  /** The window-choice part: the spread of the value over admissible windows beyond what noise explains. */
  readonly windowStdErr?: number;
}

export interface Extraction {
  readonly parameters: Record<string, ParameterValue>;
  /** Plausibility notes and caveats, in words a user can act on. */
  readonly warnings: string[];
  /** False when a check says the mechanism cannot describe these data (e.g. wrong slope sign). */
  readonly plausible: boolean;
  /**
   * The warnings of the checks that made `plausible` false, the deciding one first (among the
   * warnings are caveats that fail nothing: an input that is missing, a window that starts low).
   */
  readonly failed?: readonly string[];
  /** Positive findings worth reporting in a ranking (e.g. "ε_r close to n²"). */
  readonly notes: string[];
}

/** Points in the fit's coordinates, sorted by x; `v` holds the bias each came from. */
export interface FitPoints {
  readonly x: Float64Array;
  readonly y: Float64Array;
  readonly w: Float64Array | undefined;
  /** Bias as the mechanism saw it (|V − V_FB|, raw V, or T). */
  readonly v: Float64Array;
  /** The x column as recorded (for windows stated in the data's own x). */
  readonly raw: Float64Array;
  /** The y column as recorded. */
  readonly current: Float64Array;
}

export interface ExtractionInput {
  readonly line: LineFit;
  /** The points inside the window (the ones the line was fitted to). */
  readonly used: FitPoints;
  /** Every transformable point, inside the window or not (for regime analysis). */
  readonly all: FitPoints;
  readonly inputs: ResolvedInputs;
  /** The line came from a fit with these extra terms (a leakage; a diode's series resistance and exact "−1"). */
  readonly terms?: { readonly leakage: boolean; readonly series: boolean };
}

/**
 * How the bias column enters: 'magnitude' uses |V − V_FB| for one polarity (the other polarity is
 * excluded and counted); 'raw' uses the column as it is; 'temperature' reads it as T in kelvin.
 */
export type BiasMode = 'magnitude' | 'raw' | 'temperature';

export interface Mechanism {
  readonly id: string;
  readonly title: string;
  /** Whether y is fitted as a logarithm of the current (density) or as the current itself. */
  readonly yKind: AxisKind;
  readonly bias: BiasMode;
  /** Inputs without which the mechanism cannot be fitted at all. */
  readonly requires: readonly InputName[];
  /** Inputs that add parameters or checks when present. */
  readonly uses: readonly InputName[];
  /** Whether J = I/area is used when an area is known. */
  readonly usesArea: boolean;
  /** Whether the mechanism takes part in the automatic ranking of I–V data. */
  readonly ranked: boolean;
  /** Whether y comes from the current reading, so the sweep's noise model weights the fit. */
  readonly current?: boolean;
  /** The sign the slope must have for the mechanism to describe the data (+1 rising, −1 falling). */
  readonly slopeSign?: 1 | -1;
  /** Only the forward branch (the one carrying the larger current) is analysed: a diode. */
  readonly forwardOnly?: boolean;
  /** A parallel ohmic leakage may be fitted together with it (log mechanisms of a film or junction). */
  readonly leakage?: boolean;
  /** A series resistance may be fitted together with it (the diode's I·R_s bend). */
  readonly series?: boolean;
  /** Its current rises faster than ohmic (log–log slope well above 1) wherever it dominates. */
  readonly superOhmic?: boolean;
  /** For linear mechanisms: y = J / linearScale(bias) (e.g. J/V for space-charge-limited current). */
  linearScale?(bias: number, inputs: ResolvedInputs): number;
  /** The plot's axes; `columns`, when known, says what the data's raw columns are (see DataColumns). */
  axes(inputs: ResolvedInputs, columns?: DataColumns): { x: AxisSpec; y: AxisSpec };
  /** x coordinate from the bias (after the bias mode is applied). */
  x(bias: number, inputs: ResolvedInputs): number;
  /**
   * For log mechanisms: y = ln(J) − lnOffset(bias), e.g. ln(E²) for Fowler–Nordheim. For linear
   * mechanisms y = J and this is absent.
   */
  lnOffset?(bias: number, inputs: ResolvedInputs): number;
  extract(input: ExtractionInput): Extraction;
  /**
   * Forward model: current density (A/m², or A when no area applies) at the bias, from the
   * mechanism's physical parameters. The simulator and the synthetic-data tests call this.
   */
  forward(bias: number, params: Record<string, number>, inputs: ResolvedInputs): number;
}

/** Helper for a parameter entry. */
export function param(value: number, stdErr: number, unit: string): ParameterValue {
  return { value, stdErr, unit };
}

/** Unit of the y quantity J: a density when an area is given, a current otherwise. */
export function currentUnit(inputs: Inputs, usesArea = true): string {
  return usesArea && inputs.area !== undefined ? 'A/m^2' : 'A';
}

/** Field in the film from the bias magnitude, V/m. */
export function field(bias: number, inputs: Inputs): number {
  return bias / (inputs.thickness as number);
}

/**
 * Where an analysis input is set, in words that fit both places a message of the analysis is read:
 * the command line (`fit`, `rank`, `run` options) and the page (its Analysis form).
 */
export function setWith(option: string): string {
  return `${option}, or the page's Analysis form`;
}

/** Range check that adds a warning (to `failed` too, when given) and returns whether the value is inside. */
export function inRange(warnings: string[], what: string, value: number, lo: number, hi: number, unit: string, failed?: string[]): boolean {
  if (value >= lo && value <= hi && Number.isFinite(value)) return true;
  const u = unit ? ` ${unit}` : '';
  const text = `${what} = ${fmt(value)}${u} is outside the plausible range ${fmt(lo)}–${fmt(hi)}${u}`;
  warnings.push(text);
  failed?.push(text);
  return false;
}

/**
 * A value with its standard error for messages: the error to two significant digits and the value
 * to the same decimal place (3.10028 ± 0.00013; (9.987 ± 0.048)e11 for large or small numbers).
 */
export function fmtPm(value: number, stdErr: number): string {
  if (!Number.isFinite(value) || !Number.isFinite(stdErr) || !(stdErr > 0)) return `${fmt(value)} ± ${fmt(stdErr)}`;
  const last = Math.floor(Math.log10(stdErr)) - 1;
  const scale = Math.max(Math.abs(value), stdErr);
  if (scale >= 1e6 || scale < 1e-3) {
    const p = Math.floor(Math.log10(scale));
    const digits = Math.max(0, p - last);
    const m = (x: number) => (x / 10 ** p).toFixed(digits);
    return `(${m(value)} ± ${m(stdErr)})e${p}`;
  }
  const d = Math.max(0, -last);
  return `${value.toFixed(d)} ± ${stdErr.toFixed(d)}`;
}

/** Four significant digits, for messages. */
export function fmt(v: number): string {
  if (!Number.isFinite(v)) return String(v);
  // A million and up in powers of ten (5.546e8, not 554600000): digits a reader need not count.
  if (Math.abs(v) >= 1e6) {
    const [m, e] = v.toExponential(3).split('e');
    return `${Number(m)}e${Number(e)}`;
  }
  return Number(v.toPrecision(4)).toString();
}
