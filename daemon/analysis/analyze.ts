/**
 * One I–V dataset through one mechanism, as it came off the instrument: readings sorted into
 * floor, compliance, zero bias and the two branches of bias (sweep-points.ts), each branch that
 * carries signal fitted on its own (fit-branch.ts: window automatic by default, manual, or every
 * usable point; weights from the noise model; leakage and series terms where they matter; the
 * window-choice uncertainty), parameters extracted, regimes found. The result is the report
 * `plumbline fit` prints and the live chain publishes.
 */
import type { AccuracySpec } from './accuracy.js';
import { RICHARDSON_FREE_A_PER_M2_K2 } from './constants.js';
import { AnalysisError } from './errors.js';
import { decadesOf, describe, fitBranch, type BranchFit, type WindowMode } from './fit-branch.js';
import type { AxisSpec, DataColumns, FitPoints, Inputs, InputName, Mechanism, ParameterValue, ResolvedInputs } from './mechanism.js';
import { fmt, fmtPm, setWith } from './mechanism.js';
import { compileCustom, customMechanism, type CustomSpec } from './mechanisms/custom.js';
import { getMechanism } from './mechanisms/index.js';
import { floorLevel, type NoiseModel } from './noise-floor.js';
import { fitLine } from './line-fit.js';
import { REGIME_SEGMENTS, segmentLine } from './segmentation.js';
import { chooseBranches, classifySweep, REASONS, sweepLegs, type Branch, type SweepClasses } from './sweep-points.js';

export { REASONS } from './sweep-points.js';

/** One dataset: the x column (bias in V, or temperature in K), the y column (current, A). */
export interface IVData {
  readonly x: ArrayLike<number>;
  readonly y: ArrayLike<number>;
  /** Non-zero where the instrument reported compliance. */
  readonly compliance?: ArrayLike<number>;
  /** Non-zero at a reading that showed a confirmed breakdown (never fitted). */
  readonly breakdown?: ArrayLike<number>;
  /** All columns by identifier, for custom expressions. */
  readonly columns?: Record<string, ArrayLike<number>>;
}

export type WindowRequest = { readonly from?: number; readonly to?: number } | 'auto' | 'all';

export interface FitRequest {
  readonly model: string;
  readonly inputs?: Inputs;
  /** Default: 'auto' for mechanisms of the current, 'all' for raw columns, temperatures and custom transforms. */
  readonly window?: WindowRequest;
  readonly accuracy?: AccuracySpec;
  /** Readings with |I| ≥ 0.99·limit are treated as at compliance (common practice). */
  readonly complianceLimit?: number;
  readonly custom?: CustomSpec;
  /** What the data's two columns are, when known (a station's readings: READING_COLUMNS); labels raw-column axes. */
  readonly columns?: DataColumns;
  /** Search the whole curve for regimes (default true; the live chain's fits skip it). */
  readonly regimes?: boolean;
  /**
   * A quick look (the live chain's fits while a sweep is still running): no window-choice
   * uncertainty and no second window search; the sweep's final fit is always the full one.
   */
  readonly quick?: boolean;
  /**
   * The device is lit (a solar cell under its lamp): current against the bias near zero is the
   * photocurrent it is measured for, said in a note rather than warned about.
   */
  readonly illuminated?: boolean;
  /** Analyse only this branch (+1 positive, −1 negative bias). */
  readonly polarity?: 1 | -1;
  /** Also analyse the other branch when it carries signal (default true). */
  readonly eachBranch?: boolean;
  /** A classification made earlier for the same data and settings (ranking reuses one). */
  readonly classes?: SweepClasses;
  /**
   * Split an out-and-back sweep into its first pass (fitted) and its way back (fitted apart and
   * compared: hysteresis is warned of). Default true; the data must be in the order taken.
   */
  readonly legs?: boolean;
  /**
   * The noise floor earlier sweeps of the same run measured (σ, A, and how many null readings it
   * rests on): used when this sweep has no null readings of its own (zero bias, against the bias).
   */
  readonly knownFloor?: { readonly sigma: number; readonly readings: number };
}

export interface Regime {
  /** Range in the data's own x. */
  readonly from: number;
  readonly to: number;
  readonly slope: number;
  readonly intercept: number;
  readonly n: number;
}

export interface NoiseReport {
  /** σ of a reading at zero current, A. */
  readonly floor: number;
  /** Readings with |I| below this are at the noise floor, A. */
  readonly floorLevel: number;
  readonly floorSource: NoiseModel['floorSource'];
  readonly floorReadings: number;
  /** Relative σ of a reading (fraction), on this mechanism's plot. */
  readonly relative: number;
  readonly relativeSource: NoiseModel['relativeSource'];
}

export interface BranchSummary {
  readonly polarity: 'positive' | 'negative';
  readonly points: number;
  readonly window: { from: number; to: number };
  readonly parameters: Record<string, ParameterValue>;
  readonly plausible: boolean;
  readonly warnings: string[];
}

export interface FitReport {
  readonly model: string;
  readonly title: string;
  readonly points: { used: number; excluded: number; reasons: Record<string, number> };
  readonly window: { from: number; to: number; mode: WindowMode };
  readonly line: {
    slope: number;
    slopeStdErr: number;
    intercept: number;
    interceptStdErr: number;
    covariance: number;
    r2: number;
    residualStdDev: number;
    chi2Reduced: number | null;
    n: number;
  };
  readonly axes: { x: AxisSpec; y: AxisSpec };
  readonly parameters: Record<string, ParameterValue>;
  readonly warnings: string[];
  readonly notes: string[];
  readonly plausible: boolean;
  /** The warnings of the checks that made the fit implausible, the deciding one first (empty when plausible). */
  readonly failed: string[];
  readonly inputs: Record<string, { value: number; assumed: boolean }>;
  readonly regimes: Regime[];
  readonly noise: NoiseReport;
  /** The branch of bias this report is about (null for raw columns and temperatures). */
  readonly branch: 'positive' | 'negative' | null;
  /** Every branch analysed, this report's first. */
  readonly branches: BranchSummary[];
}

/** A report together with the points and fit behind it (for plots, ranking and the live chain). */
export interface DetailedFit {
  readonly report: FitReport;
  readonly mechanism: Mechanism;
  readonly inputs: ResolvedInputs;
  readonly fit: BranchFit;
  readonly classes: SweepClasses;
  /** The warnings of the checks that made the report implausible, the deciding one first (empty when plausible). */
  readonly failed: readonly string[];
}

/** Applies defaults (300 K, m* / m₀ = 0.5, V_FB = 0, free-electron A*) and checks required inputs. */
export function resolveInputs(mech: Mechanism, inputs: Inputs = {}): ResolvedInputs {
  for (const need of mech.requires) {
    if (inputs[need] === undefined) {
      throw new AnalysisError('MISSING_INPUT', `model '${mech.id}' needs the ${describeInput(need)}`, need);
    }
  }
  for (const [k, v] of Object.entries(inputs)) {
    if (v !== undefined && !Number.isFinite(v)) throw new AnalysisError('BAD_INPUT', `${k} is not a finite number`, k);
    if (v !== undefined && k !== 'flatBand' && !(v > 0)) {
      throw new AnalysisError('BAD_INPUT', `${k} must be positive, got ${v}`, k);
    }
  }
  const assumed: InputName[] = [];
  const used = new Set<InputName>([...mech.requires, ...mech.uses]);
  const pick = <K extends InputName>(k: K, dflt: number): number => {
    const v = inputs[k];
    if (v !== undefined) return v;
    if (used.has(k)) assumed.push(k);
    return dflt;
  };
  return {
    ...inputs,
    temperature: pick('temperature', 300),
    massRatio: pick('massRatio', 0.5),
    flatBand: pick('flatBand', 0),
    richardson: pick('richardson', RICHARDSON_FREE_A_PER_M2_K2),
    assumed,
  };
}

/**
 * Where the inputs of a thin-film or junction I–V sample lie (our bounds, common practice: films
 * from a monolayer to a thick slab, pads from a nanowire contact to a whole wafer, cryostat to
 * furnace), with how to write each in its trade's unit. Inputs are SI: a value far outside its
 * range is most often a unit left off ("7" for 7 nm is 7 m).
 */
export const INPUT_RANGE: Readonly<
  Record<'thickness' | 'area' | 'temperature', { lo: number; hi: number; what: string; si: string; symbol: string; example: string }>
> = {
  thickness: { lo: 1e-10, hi: 1e-3, what: '0.1 nm – 1 mm', si: 'metres', symbol: 'm', example: '"8 nm"' },
  area: { lo: 1e-14, hi: 1e-2, what: '0.01 µm² – 100 cm²', si: 'square metres', symbol: 'm²', example: '"1e-4 cm^2"' },
  temperature: { lo: 1, hi: 1500, what: '1 K – 1500 K', si: 'kelvin', symbol: 'K', example: '"300 K" or "25 degC"' },
};

/**
 * Dimensionless inputs and where real films put them. Effective-mass ratios of carriers tunnelling
 * through dielectrics are quoted from about 0.1 (high-k oxides) to about 1 (SiO2 values run
 * 0.3–0.5, Weinberg 1982; the rest common practice, from memory): under 0.02 or over 2 is a typing
 * slip. Refractive indices of solids at optical frequencies lie from about 1.3 (fluorides) to about
 * 4 (Si, Ge); 1–5 is allowed.
 */
const RATIO_RANGE: Readonly<Partial<Record<InputName, { lo: number; hi: number; what: string }>>> = {
  massRatio: { lo: 0.02, hi: 2, what: 'effective-mass ratio m*/m₀' },
  refractiveIndex: { lo: 1, hi: 5, what: 'refractive index n' },
};

/** Warnings for inputs the model uses that lie far outside where such samples are (see INPUT_RANGE, RATIO_RANGE). */
export function oddInputs(inputs: Inputs, used: readonly InputName[]): string[] {
  const out: string[] = [];
  for (const k of new Set(used)) {
    const q = RATIO_RANGE[k];
    const w = inputs[k];
    if (q && w !== undefined && !(w >= q.lo && w <= q.hi)) {
      out.push(`${q.what} ${fmt(w)} is outside ${fmt(q.lo)}–${fmt(q.hi)}, where real films put it: check the value`);
      continue;
    }
    const r = (INPUT_RANGE as Partial<Record<InputName, (typeof INPUT_RANGE)['area']>>)[k];
    const v = inputs[k];
    if (!r || v === undefined || (v >= r.lo && v <= r.hi)) continue;
    out.push(`${k} ${fmt(v)} ${r.symbol} is outside ${r.what}, where such samples lie: inputs are in SI (${r.si}): check its unit (e.g. ${r.example})`);
  }
  return out;
}

/**
 * The parameters a model's fit gives, learned by running its extraction once on a small straight
 * line of the slope sign the mechanism expects (what a plan can be checked against before a run
 * starts). Undefined when that cannot tell (a model whose extraction needs real data, or none).
 */
export function parameterNames(model: string, inputs: Inputs = {}): string[] | undefined {
  try {
    const mech = getMechanism(model);
    const resolved = resolveInputs(mech, inputs);
    const sign = mech.slopeSign ?? 1;
    const x = Float64Array.from([1, 2, 3, 4]);
    const y = Float64Array.from(x, (v) => sign * v + 0.01 * (v % 2));
    const line = fitLine(x, y);
    const pts: FitPoints = { x, y, w: Float64Array.from(x, () => 1), v: x, raw: x, current: Float64Array.from(x, (v) => 1e-9 * v) };
    const names = Object.keys(mech.extract({ line, used: pts, all: pts, inputs: resolved }).parameters);
    // The terms fitted beside the line, when the data carry them (fit-branch.ts).
    if (mech.leakage) names.push('leakageResistance');
    if (mech.series) names.push('seriesResistance');
    return names.length > 0 ? names : undefined;
  } catch {
    return undefined;
  }
}

function describeInput(k: InputName): string {
  const d: Record<InputName, [string, string]> = {
    thickness: ['film thickness', '--thickness, e.g. "8 nm"'],
    area: ['device area', '--area, e.g. "1e-4 cm^2"'],
    temperature: ['temperature', '--temperature, e.g. "300 K"'],
    massRatio: ['effective-mass ratio', '--mass-ratio'],
    permittivity: ['relative permittivity', '--permittivity'],
    refractiveIndex: ['refractive index', '--refractive-index'],
    flatBand: ['flat-band voltage', '--flat-band'],
    richardson: ['Richardson constant', '--richardson'],
  };
  return `${d[k][0]} (${setWith(d[k][1])})`;
}

const ASSUMED_TEXT: Partial<Record<InputName, string>> = {
  temperature: 'temperature not given: 300 K assumed',
  massRatio: 'effective-mass ratio not given: m* / m0 = 0.5 assumed (Weinberg 1982 review value for SiO2)',
  richardson: 'Richardson constant not given: the free-electron value 1.2017e6 A/(m^2 K^2) assumed',
};

/**
 * One reading into the mechanism's coordinates (x, y, and the bias as the mechanism sees it), written
 * into `out`; returns the exclusion reason instead when the point cannot enter. `sign` is the
 * polarity the 'magnitude' mechanisms accept (+1 or −1); `area` divides the current (1 for none).
 * The live chain calls this per point.
 */
export function transformPoint(
  mech: Mechanism,
  inputs: ResolvedInputs,
  rawX: number,
  rawY: number,
  sign: number,
  area: number,
  out: { x: number; y: number; bias: number },
): string | undefined {
  let j = rawY;
  let bias = rawX;
  if (mech.bias === 'magnitude') {
    const b = (rawX - inputs.flatBand) * sign;
    if (b === 0) return REASONS.zeroBias;
    if (b < 0) return REASONS.oppositePolarity;
    if (rawY * sign < 0 && mech.yKind === 'log') return REASONS.againstBias;
    bias = b;
    j = rawY * sign;
  } else if (mech.bias === 'temperature' && !(rawX > 0)) {
    return REASONS.nonPositiveTemperature;
  }
  j /= area;
  const x = mech.x(bias, inputs);
  let y: number;
  if (mech.yKind === 'log') {
    const mag = mech.bias === 'raw' ? Math.abs(j) : j;
    if (!(mag > 0)) return REASONS.nonPositiveLog;
    y = Math.log(mag) - (mech.lnOffset ? mech.lnOffset(bias, inputs) : 0);
  } else y = j / (mech.linearScale ? mech.linearScale(bias, inputs) : 1);
  if (!Number.isFinite(x) || !Number.isFinite(y)) return REASONS.notFinite;
  out.x = x;
  out.y = y;
  out.bias = bias;
  return undefined;
}

/**
 * The current a fitted line predicts at a bias (inverse of transformPoint), in A: for log mechanisms
 * area·exp(a + b·x + lnOffset), for linear ones area·(a + b·x)·linearScale. Magnitude for 'magnitude'
 * mechanisms.
 */
export function predictCurrent(mech: Mechanism, inputs: ResolvedInputs, slope: number, intercept: number, bias: number, area: number): number {
  const x = mech.x(bias, inputs);
  const y = intercept + slope * x;
  if (mech.yKind === 'log') return area * Math.exp(y + (mech.lnOffset ? mech.lnOffset(bias, inputs) : 0));
  return area * y * (mech.linearScale ? mech.linearScale(bias, inputs) : 1);
}

function rawRange(p: FitPoints): { from: number; to: number } {
  let lo = Infinity;
  let hi = -Infinity;
  for (let k = 0; k < p.raw.length; k++) {
    lo = Math.min(lo, p.raw[k]);
    hi = Math.max(hi, p.raw[k]);
  }
  return { from: lo, to: hi };
}

/** Segments the whole linearized curve into regimes (only where there are enough points). */
export function findRegimes(all: FitPoints): Regime[] {
  if (all.x.length < 12) return [];
  const seg = segmentLine(all.x, all.y, REGIME_SEGMENTS);
  return seg.segments
    .map((s) => {
      let lo = Infinity;
      let hi = -Infinity;
      for (let k = s.start; k <= s.end; k++) {
        lo = Math.min(lo, all.raw[k]);
        hi = Math.max(hi, all.raw[k]);
      }
      return { from: lo, to: hi, slope: s.slope, intercept: s.intercept, n: s.n };
    })
    .sort((a, b) => a.from - b.from);
}

/** Fits one mechanism to one dataset. Throws AnalysisError with a code on unusable input. */
export function analyze(data: IVData, request: FitRequest): FitReport {
  return analyzeDetailed(data, request).report;
}

/** How a window's two ends are called where the window came from, and how to write one. */
export interface WindowNames {
  readonly from: string;
  readonly to: string;
  readonly write: (from: number, to: number) => string;
}

/** The settings' names (station config, the REST API, the page): the fields of `window`. */
export const WINDOW_FIELDS: WindowNames = {
  from: 'window.from',
  to: 'window.to',
  write: (from, to) => `"window": { "from": ${fmt(from)}, "to": ${fmt(to)} }`,
};

/**
 * The one rule for a manual window against the branches: a mechanism read on one polarity (bias
 * 'magnitude': each branch, V − V_FB of one sign, is fitted on its own, so that |V − V_FB| is the
 * mechanism's bias) takes a window on one side of zero bias (of the flat band, when one is given).
 * A window reaching from one branch into the other is not one window: it would be cut into a piece
 * on each branch. Returns what is wrong, naming the settings as `names` calls them and what to give
 * instead, or undefined when the window is fine. `mech` undefined: every mechanism ranked (all of
 * them read one polarity).
 */
export function windowAcrossBranches(
  mech: Pick<Mechanism, 'bias'> | undefined,
  window: WindowRequest | undefined,
  flatBand = 0,
  names: WindowNames = WINDOW_FIELDS,
): string | undefined {
  if (typeof window !== 'object' || (mech !== undefined && mech.bias !== 'magnitude')) return undefined;
  const lo = Math.min(window.from ?? -Infinity, window.to ?? Infinity) - flatBand;
  const hi = Math.max(window.from ?? -Infinity, window.to ?? Infinity) - flatBand;
  if (!(lo < 0 && hi > 0)) return undefined;
  const ends = [lo, hi].filter(Number.isFinite).map(Math.abs);
  const m = Math.max(...ends);
  const span = `${window.from ?? '−∞'} to ${window.to ?? '∞'} V`;
  const zero = flatBand === 0 ? 'zero bias' : `the flat band (${fmt(flatBand)} V)`;
  return (
    `${names.from}/${names.to}: the window ${span} spans ${zero}; a window must lie on one side of ${flatBand === 0 ? 'zero bias' : 'it'} (one branch: each polarity is fitted on its own), ` +
    `e.g. ${names.write(flatBand + m / 2, flatBand + m)} or ${names.write(flatBand - m, flatBand - m / 2)}`
  );
}

/** The default window of a mechanism: automatic for mechanisms of the current, all points otherwise. */
export function defaultWindow(mech: Mechanism): 'auto' | 'all' {
  return mech.current ? 'auto' : 'all';
}

/**
 * The conduction mechanisms of a film that compete for the same curve: each is a straight line on
 * its own plot (ln J, ln J/E or ln J/E² against 1/E, √E or E), so a curve straight on one is bent on
 * the others, and the one that holds the curve over the most decades is the common-practice reading.
 */
const FILM_MECHANISMS = ['fowler-nordheim', 'poole-frenkel', 'schottky', 'trap-assisted-tunneling', 'hopping'];
/** Below this share of the branch's decades, an automatic window is compared with the other film mechanisms. */
const COMPARE_SHARE = 0.6;

/**
 * A film mechanism whose automatic window holds only part of the branch is asked whether another
 * film mechanism's line holds the same readings and far more: at least two decades more and half
 * as many again, over a window that covers nine tenths of this one's bias range. Then the curve is
 * the other mechanism's, and this one found a nearly straight piece of a bent plot (Poole–Frenkel
 * on a Fowler–Nordheim oxide, trap-assisted tunnelling on one: their plots bend too gently for the
 * noise to show over two or three decades). Returns the warning, or undefined. The other fits are
 * quick ones (no window-choice uncertainty), made only when this window is short.
 */
function betterMechanism(
  mech: Mechanism,
  fit: BranchFit,
  data: IVData,
  request: FitRequest,
  classes: SweepClasses,
  branch: Branch | undefined,
  base: Parameters<typeof fitBranch>[5],
): string | undefined {
  if (!FILM_MECHANISMS.includes(mech.id)) return undefined;
  const own = decadesOf(fit.used.current);
  if (own >= COMPARE_SHARE * decadesOf(fit.all.current)) return undefined;
  const mine = rawRange(fit.used);
  for (const id of FILM_MECHANISMS) {
    if (id === mech.id) continue;
    let other: BranchFit;
    const alt = getMechanism(id);
    try {
      other = fitBranch(alt, resolveInputs(alt, request.inputs), data, classes, branch, { ...base, quick: true }, { ...classes.reasons });
    } catch {
      continue;
    }
    const theirs = decadesOf(other.used.current);
    const r = rawRange(other.used);
    const shared = Math.min(r.to, mine.to) - Math.max(r.from, mine.from);
    if (theirs >= own + 2 && theirs >= 1.5 * own && shared >= 0.9 * (mine.to - mine.from)) {
      return `the ${alt.title.split(',')[0]} line holds these readings and more: ${theirs.toFixed(1)} decades of current against this line's ${own.toFixed(1)}; the curve is read better as ${alt.title.split(',')[0]} (compare mechanisms with plumbline rank)`;
    }
  }
  return undefined;
}

/** As analyze, with the points and the fit behind the report. */
export function analyzeDetailed(data: IVData, request: FitRequest): DetailedFit {
  if (request.legs !== false) {
    const legs = sweepLegs(data.x);
    if (legs) return outAndBack(data, request, legs);
  }
  return analyzeOnePass(data, request);
}

/** The readings `index` names, every column with them. */
export function pick(data: IVData, index: readonly number[]): IVData {
  const take = (a: ArrayLike<number>) => Float64Array.from(index, (k) => a[k]);
  return {
    x: take(data.x),
    y: take(data.y),
    compliance: data.compliance ? take(data.compliance) : undefined,
    breakdown: data.breakdown ? take(data.breakdown) : undefined,
    columns: data.columns ? Object.fromEntries(Object.entries(data.columns).map(([k, a]) => [k, take(a)])) : undefined,
  };
}

/**
 * An out-and-back sweep: the first pass is the result; the way back is fitted on its own and its
 * main parameter compared (on the same branch). Legs apart by more than three combined standard
 * errors are a hysteresis warning: the curve moved between them (charge trapped on the way out,
 * heating), and the result is the way out's — the one a fresh film gives.
 */
function outAndBack(data: IVData, request: FitRequest, legs: { out: number[]; back: number[] }): DetailedFit {
  const one = { ...request, legs: false, classes: undefined };
  const out = analyzeOnePass(pick(data, legs.out), one);
  let back: FitReport | undefined;
  let backError = '';
  try {
    back = analyzeOnePass(pick(data, legs.back), { ...one, regimes: false }).report;
  } catch (e) {
    if (!(e instanceof AnalysisError)) throw e;
    backError = e.message;
  }
  const r = out.report;
  const key = Object.keys(r.parameters)[0];
  const a = key ? r.parameters[key] : undefined;
  const b = key && back && back.branch === r.branch ? back.parameters[key] : undefined;
  const unit = a?.unit && a.unit !== '1' ? ` ${a.unit}` : '';
  const notes = [
    ...r.notes,
    `an out-and-back sweep: the ${legs.out.length} readings of the first pass are fitted, the ${legs.back.length} on the way back apart${
      b ? ` (way back: ${key} ${fmtPm(b.value, b.stdErr)}${unit})` : back ? '' : ` (the way back could not be fitted: ${backError})`
    }`,
  ];
  const warnings = [...r.warnings];
  if (a && b && Math.abs(a.value - b.value) > 3 * Math.hypot(a.stdErr, b.stdErr)) {
    const apart = Math.abs(a.value - b.value) / Math.hypot(a.stdErr, b.stdErr);
    warnings.push(
      `hysteresis: the way back gives ${key} ${fmtPm(b.value, b.stdErr)}${unit} against ${fmtPm(a.value, a.stdErr)}${unit} on the way out (${apart.toFixed(1)} standard errors apart): the curve moved between the legs (charge trapped on the way out, or heating); this result is the first pass's`,
    );
  }
  const reasons = { ...r.points.reasons, [REASONS.wayBack]: legs.back.length };
  const report: FitReport = { ...r, notes, warnings, points: { ...r.points, excluded: r.points.excluded + legs.back.length, reasons } };
  return { ...out, report };
}

function analyzeOnePass(data: IVData, request: FitRequest): DetailedFit {
  const mech = request.model === 'custom' ? customMechanism(request.custom ?? missingCustom()) : getMechanism(request.model);
  const inputs = resolveInputs(mech, request.inputs);
  const custom = request.model === 'custom' && request.custom ? compileCustom(request.custom) : undefined;
  const classes =
    request.classes ??
    classifySweep(data, {
      flatBand: inputs.flatBand,
      complianceLimit: request.complianceLimit,
      accuracy: request.accuracy,
      detectCompliance: !!mech.current,
      knownFloor: request.knownFloor,
    });
  const win = request.window ?? defaultWindow(mech);
  const mode: WindowMode = win === 'auto' ? 'auto' : win === 'all' ? 'all' : 'manual';
  const manual = typeof win === 'object' ? win : undefined;
  const base = {
    mode,
    from: manual?.from,
    to: manual?.to,
    absoluteNoise: request.accuracy !== undefined,
    custom,
    columns: data.columns,
    quick: request.quick === true,
  };

  // Which branches: the user's window decides, then a forced polarity, then the physics.
  let branches: Branch[];
  if (mech.bias !== 'magnitude' || custom) branches = [];
  else if (request.polarity !== undefined) branches = [request.polarity > 0 ? classes.positive : classes.negative];
  else if (manual) {
    const across = windowAcrossBranches(mech, manual, inputs.flatBand);
    if (across) throw new AnalysisError('BAD_WINDOW', across, 'window');
    const hi = Math.max(manual.from ?? -Infinity, manual.to ?? Infinity) - inputs.flatBand;
    branches = [hi > 0 ? classes.positive : classes.negative];
  } else branches = chooseBranches(classes, !!mech.forwardOnly);
  if (request.eachBranch === false || mech.forwardOnly) branches = branches.slice(0, 1);

  const fits: { fit: BranchFit; branch: Branch | undefined }[] = [];
  const failures: string[] = [];
  const list = branches.length ? branches : [undefined];
  for (let q = 0; q < list.length; q++) {
    const b = list[q];
    const reasons: Record<string, number> = { ...classes.reasons };
    if (b) {
      const other = b.sign > 0 ? classes.negative : classes.positive;
      const analysed = list.some((x) => x === other);
      if (other.index.length) reasons[analysed ? REASONS.otherBranch : REASONS.oppositePolarity] = other.index.length;
    }
    try {
      const fit = fitBranch(mech, inputs, data, classes, b, base, reasons);
      const better = mode === 'auto' ? betterMechanism(mech, fit, data, request, classes, b, base) : undefined;
      fits.push({ fit: better ? { ...fit, plausible: false, warnings: [...fit.warnings, better], failed: [...fit.failed, better] } : fit, branch: b });
    } catch (e) {
      if (!(e instanceof AnalysisError) || (q === 0 && list.length === 1)) throw e;
      failures.push(`${b && b.sign > 0 ? 'positive' : 'negative'} branch: ${e.message}`);
    }
  }
  if (fits.length === 0) {
    throw new AnalysisError('TOO_FEW_POINTS', failures.join('; '));
  }
  const primary = fits[0].fit;
  const polarity = (f: BranchFit): 'positive' | 'negative' | null => (f.sign > 0 ? 'positive' : f.sign < 0 ? 'negative' : null);
  const summaries: BranchSummary[] = fits.map(({ fit }) => ({
    polarity: polarity(fit) as 'positive' | 'negative',
    points: fit.used.x.length,
    window: rawRange(fit.used),
    parameters: fit.parameters,
    plausible: fit.plausible,
    warnings: fit.warnings,
  }));
  const odd = oddInputs(inputs, [...mech.requires, ...mech.uses]);
  const warnings = [
    ...odd,
    ...inputs.assumed.map((k) => ASSUMED_TEXT[k]).filter((s): s is string => !!s),
    ...classes.notes.filter((n) => !request.illuminated && /too large to be noise/.test(n)),
    ...primary.warnings,
  ];
  const notes = [...classes.notes.filter((n) => request.illuminated || !/too large to be noise/.test(n)), ...primary.notes];
  if (fits.length > 1) {
    const key = Object.keys(primary.parameters)[0];
    const describeOne = (f: BranchFit) => {
      const p = key ? f.parameters[key] : undefined;
      return `${polarity(f)}${p ? ` ${key} ${fmtPm(p.value, p.stdErr)}${p.unit && p.unit !== '1' ? ` ${p.unit}` : ''}` : ''}`;
    };
    notes.push(
      `both polarities carry signal: each branch is analysed on its own (${fits.map((f) => describeOne(f.fit)).join('; ')}); this report is the ${polarity(primary)} branch's, the others are under "branches"`,
    );
    const a = key ? fits[0].fit.parameters[key] : undefined;
    const b = key ? fits[1].fit.parameters[key] : undefined;
    if (a && b && Math.abs(a.value - b.value) > 3 * Math.hypot(a.stdErr, b.stdErr)) {
      warnings.push(
        `the two branches give different ${key} (${fmt(a.value)} and ${fmt(b.value)} ${a.unit}): the device is not symmetric (e.g. a different barrier at each electrode)`,
      );
    }
  }
  for (const f of failures) notes.push(`not analysed: ${f}`);
  if (!branches.length && mech.bias === 'magnitude') notes.push('no branch of bias carries signal');
  const reportedInputs: Record<string, { value: number; assumed: boolean }> = {};
  for (const k of [...mech.requires, ...mech.uses] as InputName[]) {
    const v = inputs[k];
    if (v !== undefined) reportedInputs[k] = { value: v, assumed: inputs.assumed.includes(k) };
  }
  const L = primary.line;
  const reasons = primary.reasons;
  const excluded = Object.values(reasons).reduce((a, b) => a + b, 0);
  const report: FitReport = {
    model: mech.id,
    title: mech.title,
    points: { used: primary.used.x.length, excluded, reasons },
    window: { ...rawRange(primary.used), mode },
    line: {
      slope: L.slope,
      slopeStdErr: L.slopeStdErr,
      intercept: L.intercept,
      interceptStdErr: L.interceptStdErr,
      covariance: L.covariance,
      r2: L.r2,
      residualStdDev: L.residualStdDev,
      chi2Reduced: L.chi2Reduced,
      n: L.n,
    },
    axes: mech.axes(inputs, request.columns),
    parameters: primary.parameters,
    warnings,
    notes,
    plausible: primary.plausible && odd.length === 0,
    failed: [...odd, ...primary.failed],
    inputs: reportedInputs,
    regimes: request.regimes === false ? [] : findRegimes(primary.all),
    noise: {
      floor: primary.noise.floor,
      floorLevel: floorLevel(primary.noise),
      floorSource: primary.noise.floorSource,
      floorReadings: primary.noise.floorReadings,
      relative: primary.noise.relative,
      relativeSource: primary.noise.relativeSource,
    },
    branch: polarity(primary),
    branches: summaries,
  };
  return { report, mechanism: mech, inputs, fit: primary, classes, failed: [...odd, ...primary.failed] };
}

function missingCustom(): never {
  throw new AnalysisError('MISSING_INPUT', "model 'custom' needs --x-expr and --y-expr", 'x-expr');
}

export function describeReasons(reasons: Record<string, number>): string {
  return describe(reasons);
}
