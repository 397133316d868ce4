/**
 * One I–V dataset through one mechanism: points mapped into the mechanism's coordinates (each
 * point that cannot enter is counted by reason), window chosen (manual, automatic or all), line
 * fitted, parameters extracted, regimes found. The result is the report `plumbline fit` prints and
 * the live chain publishes.
 */
import { pointWeight, type AccuracySpec } from './accuracy.js';
import { RICHARDSON_FREE_A_PER_M2_K2 } from './constants.js';
import { AnalysisError } from './errors.js';
import { fitLine, type LineFit } from './line-fit.js';
import type { AxisSpec, FitPoints, Inputs, InputName, Mechanism, ParameterValue, ResolvedInputs } from './mechanism.js';
import { compileCustom, customMechanism, evalNumber, type CustomSpec } from './mechanisms/custom.js';
import { getMechanism } from './mechanisms/index.js';
import { segmentLine } from './segmentation.js';
import { autoWindow } from './window.js';

/** One dataset: the x column (bias in V, or temperature in K), the y column (current, A). */
export interface IVData {
  readonly x: ArrayLike<number>;
  readonly y: ArrayLike<number>;
  /** Non-zero where the instrument reported compliance. */
  readonly compliance?: ArrayLike<number>;
  /** All columns by identifier, for custom expressions. */
  readonly columns?: Record<string, ArrayLike<number>>;
}

export type WindowRequest = { readonly from?: number; readonly to?: number } | 'auto' | 'all';

export interface FitRequest {
  readonly model: string;
  readonly inputs?: Inputs;
  readonly window?: WindowRequest;
  readonly accuracy?: AccuracySpec;
  /** Readings with |I| ≥ 0.99·limit are treated as at compliance (common practice). */
  readonly complianceLimit?: number;
  readonly custom?: CustomSpec;
  /** Search the whole curve for regimes (default true; the live chain's interim fits skip it). */
  readonly regimes?: boolean;
}

export interface Regime {
  /** Range in the data's own x. */
  readonly from: number;
  readonly to: number;
  readonly slope: number;
  readonly intercept: number;
  readonly n: number;
}

export interface FitReport {
  readonly model: string;
  readonly title: string;
  readonly points: { used: number; excluded: number; reasons: Record<string, number> };
  readonly window: { from: number; to: number; mode: 'all' | 'manual' | 'auto' };
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
  readonly inputs: Record<string, { value: number; assumed: boolean }>;
  readonly regimes: Regime[];
}

/** Points excluded for these reasons are counted under these names in every report. */
export const REASONS = {
  notFinite: 'not a finite number',
  compliance: 'at compliance',
  zeroBias: 'zero bias',
  oppositePolarity: 'opposite polarity',
  againstBias: 'current flows against the bias',
  nonPositiveLog: 'non-positive value under a log',
  nonPositiveTemperature: 'non-positive temperature',
  expression: 'expression not a finite number',
  outsideWindow: 'outside the fit window',
} as const;

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
    flatBand: inputs.flatBand ?? 0,
    richardson: pick('richardson', RICHARDSON_FREE_A_PER_M2_K2),
    assumed,
  };
}

function describeInput(k: InputName): string {
  const d: Record<InputName, string> = {
    thickness: 'film thickness (--thickness, e.g. "8 nm")',
    area: 'device area (--area, e.g. "1e-4 cm^2")',
    temperature: 'temperature (--temperature, e.g. "300 K")',
    massRatio: 'effective-mass ratio (--mass-ratio)',
    permittivity: 'relative permittivity (--permittivity)',
    refractiveIndex: 'refractive index (--refractive-index)',
    flatBand: 'flat-band voltage (--flat-band)',
    richardson: 'Richardson constant (--richardson)',
  };
  return d[k];
}

const ASSUMED_TEXT: Partial<Record<InputName, string>> = {
  temperature: 'temperature not given: 300 K assumed',
  massRatio: 'effective-mass ratio not given: m* / m0 = 0.5 assumed (Weinberg 1982 review value for SiO2)',
  richardson: 'Richardson constant not given: the free-electron value 1.2017e6 A/(m^2 K^2) assumed',
};

interface Prepared {
  readonly all: FitPoints;
  readonly reasons: Record<string, number>;
}

/**
 * One reading into the mechanism's coordinates (x, y, and the bias as the mechanism sees it), written
 * into `out`; returns the exclusion reason instead when the point cannot enter. `sign` is the
 * polarity the 'magnitude' mechanisms accept (+1 or −1); `area` divides the current (1 for none).
 * The live chain calls this per point; preparePoints calls it for whole datasets.
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
    if (rawY * sign < 0) return REASONS.againstBias;
    bias = b;
    j = Math.abs(rawY);
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
  } else y = j;
  if (!Number.isFinite(x) || !Number.isFinite(y)) return REASONS.notFinite;
  out.x = x;
  out.y = y;
  out.bias = bias;
  return undefined;
}

/**
 * The current a fitted line predicts at a bias (inverse of transformPoint), in A: for log mechanisms
 * area·exp(a + b·x + lnOffset), for linear ones area·(a + b·x). Magnitude for 'magnitude' mechanisms.
 */
export function predictCurrent(mech: Mechanism, inputs: ResolvedInputs, slope: number, intercept: number, bias: number, area: number): number {
  const x = mech.x(bias, inputs);
  const y = intercept + slope * x;
  if (mech.yKind === 'log') return area * Math.exp(y + (mech.lnOffset ? mech.lnOffset(bias, inputs) : 0));
  return area * y;
}

/**
 * Maps every reading into the mechanism's coordinates. Points that cannot enter are counted under
 * a reason; the survivors come back sorted by x.
 */
export function preparePoints(
  mech: Mechanism,
  data: IVData,
  inputs: ResolvedInputs,
  options: { accuracy?: AccuracySpec; complianceLimit?: number; custom?: CustomSpec } = {},
): Prepared {
  const n = data.x.length;
  if (data.y.length !== n) throw new AnalysisError('BAD_INPUT', `x and y columns differ in length (${n}, ${data.y.length})`);
  const reasons: Record<string, number> = {};
  const count = (r: string) => (reasons[r] = (reasons[r] ?? 0) + 1);
  const xs: number[] = [];
  const ys: number[] = [];
  const ws: number[] = [];
  const vs: number[] = [];
  const raws: number[] = [];
  const cur: number[] = [];

  // Polarity for the 'magnitude' mechanisms: the sign most of the biased points share.
  let pos = 0;
  let neg = 0;
  if (mech.bias === 'magnitude') {
    for (let i = 0; i < n; i++) {
      const b = data.x[i] - inputs.flatBand;
      if (b > 0) pos++;
      else if (b < 0) neg++;
    }
  }
  const sign = neg > pos ? -1 : 1;
  const compiled = options.custom ? compileCustom(options.custom) : undefined;
  const cols = data.columns ?? {};
  const area = mech.usesArea && inputs.area !== undefined ? inputs.area : 1;
  const limit = options.complianceLimit;
  const out = { x: 0, y: 0, bias: 0 };

  for (let i = 0; i < n; i++) {
    const rawX = data.x[i];
    const rawY = data.y[i];
    if (!Number.isFinite(rawX) || !Number.isFinite(rawY)) {
      count(REASONS.notFinite);
      continue;
    }
    if ((data.compliance?.[i]) || (limit !== undefined && Math.abs(rawY) >= 0.99 * limit)) {
      count(REASONS.compliance);
      continue;
    }
    let x: number;
    let y: number;
    let bias = rawX;
    if (compiled) {
      const scope: Record<string, number> = {};
      for (const k of Object.keys(cols)) scope[k] = cols[k][i];
      const cx = evalNumber(compiled.x, scope);
      const cy = evalNumber(compiled.y, scope);
      if (cx === undefined || cy === undefined) {
        count(REASONS.expression);
        continue;
      }
      x = cx;
      if (mech.yKind === 'log') {
        if (!(cy > 0)) {
          count(REASONS.nonPositiveLog);
          continue;
        }
        y = Math.log(cy);
      } else y = cy;
    } else {
      const reason = transformPoint(mech, inputs, rawX, rawY, sign, area, out);
      if (reason !== undefined) {
        count(reason);
        continue;
      }
      x = out.x;
      y = out.y;
      bias = out.bias;
    }
    xs.push(x);
    ys.push(y);
    ws.push(options.accuracy ? pointWeight(options.accuracy, rawY, mech.yKind) : 1);
    vs.push(bias);
    raws.push(rawX);
    cur.push(rawY);
  }
  const order = Array.from(xs.keys()).sort((a, b) => xs[a] - xs[b]);
  // Plain loops: Float64Array.from with a mapping function is several times slower in V8.
  const take = (src: number[]) => {
    const out = new Float64Array(order.length);
    for (let k = 0; k < order.length; k++) out[k] = src[order[k]];
    return out;
  };
  return {
    all: {
      x: take(xs),
      y: take(ys),
      w: options.accuracy ? take(ws) : undefined,
      v: take(vs),
      raw: take(raws),
      current: take(cur),
    },
    reasons,
  };
}

function slice(p: FitPoints, keep: (k: number) => boolean): FitPoints {
  const idx: number[] = [];
  for (let k = 0; k < p.x.length; k++) if (keep(k)) idx.push(k);
  const pick = (a: Float64Array) => {
    const out = new Float64Array(idx.length);
    for (let k = 0; k < idx.length; k++) out[k] = a[idx[k]];
    return out;
  };
  return { x: pick(p.x), y: pick(p.y), w: p.w ? pick(p.w) : undefined, v: pick(p.v), raw: pick(p.raw), current: pick(p.current) };
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

/** Selects the window's points from all the prepared ones. */
export function selectWindow(all: FitPoints, request: WindowRequest | undefined): { used: FitPoints; mode: 'all' | 'manual' | 'auto' } {
  if (request === undefined || request === 'all') return { used: all, mode: 'all' };
  if (request === 'auto') {
    const w = autoWindow(all.x, all.y);
    return { used: slice(all, (k) => k >= w.start && k <= w.end), mode: 'auto' };
  }
  const lo = Math.min(request.from ?? -Infinity, request.to ?? Infinity);
  const hi = Math.max(request.from ?? -Infinity, request.to ?? Infinity);
  return { used: slice(all, (k) => all.raw[k] >= lo && all.raw[k] <= hi), mode: 'manual' };
}

/** Segments the whole linearized curve into regimes (only where there are enough points). */
export function findRegimes(all: FitPoints): Regime[] {
  if (all.x.length < 12) return [];
  const seg = segmentLine(all.x, all.y, { minPoints: 5, maxSegments: 5 });
  return seg.segments.map((s) => {
    const r = rawRange(slice(all, (k) => k >= s.start && k <= s.end));
    return { from: r.from, to: r.to, slope: s.slope, intercept: s.intercept, n: s.n };
  }).sort((a, b) => a.from - b.from);
}

/** Fits one mechanism to one dataset. Throws AnalysisError with a code on unusable input. */
export function analyze(data: IVData, request: FitRequest): FitReport {
  const mech = request.model === 'custom'
    ? customMechanism(request.custom ?? missingCustom())
    : getMechanism(request.model);
  const inputs = resolveInputs(mech, request.inputs);
  const { all, reasons } = preparePoints(mech, data, inputs, {
    accuracy: request.accuracy,
    complianceLimit: request.complianceLimit,
    custom: request.model === 'custom' ? request.custom : undefined,
  });
  if (all.x.length < 3) {
    throw new AnalysisError(
      'TOO_FEW_POINTS',
      `model '${mech.id}' has ${all.x.length} usable points of ${data.x.length}; excluded: ${describeReasons(reasons)}`,
    );
  }
  const { used, mode } = selectWindow(all, request.window);
  const outside = all.x.length - used.x.length;
  if (outside > 0) reasons[REASONS.outsideWindow] = outside;
  if (used.x.length < 3) {
    throw new AnalysisError('TOO_FEW_POINTS', `the fit window holds ${used.x.length} usable points; a line needs at least 3`, 'window');
  }
  return analyzePrepared(mech, inputs, all, used, { reasons, mode, regimes: request.regimes });
}

/**
 * Fits the window's points and builds the report. `all` is every transformable point (for the
 * regimes and for mechanisms that look beyond the window), `used` the window's points.
 */
export function analyzePrepared(
  mech: Mechanism,
  inputs: ResolvedInputs,
  all: FitPoints,
  used: FitPoints,
  context: { reasons?: Record<string, number>; mode?: 'all' | 'manual' | 'auto'; regimes?: boolean } = {},
): FitReport {
  const reasons = context.reasons ?? {};
  const line: LineFit = fitLine(used.x, used.y, { weights: used.w });
  const ex = mech.extract({ line, used, all, inputs });
  const warnings = [...inputs.assumed.map((k) => ASSUMED_TEXT[k]).filter((s): s is string => !!s), ...ex.warnings];
  if (used.x.length < 5) warnings.push(`only ${used.x.length} points in the window; at least 5 are advised`);
  if (mech.yKind === 'log' && mech.id !== 'custom') {
    let lo = Infinity;
    let hi = -Infinity;
    for (let k = 0; k < used.current.length; k++) {
      const a = Math.abs(used.current[k]);
      lo = Math.min(lo, a);
      hi = Math.max(hi, a);
    }
    if (hi / lo < 10) warnings.push(`the window spans ${Math.log10(hi / lo).toFixed(2)} decades of current; one decade or more is advised`);
  }
  const excluded = Object.values(reasons).reduce((a, b) => a + b, 0);
  const reportedInputs: Record<string, { value: number; assumed: boolean }> = {};
  for (const k of [...mech.requires, ...mech.uses] as InputName[]) {
    const v = inputs[k];
    if (v !== undefined) reportedInputs[k] = { value: v, assumed: inputs.assumed.includes(k) };
  }
  return {
    model: mech.id,
    title: mech.title,
    points: { used: used.x.length, excluded, reasons },
    window: { ...rawRange(used), mode: context.mode ?? 'all' },
    line: {
      slope: line.slope,
      slopeStdErr: line.slopeStdErr,
      intercept: line.intercept,
      interceptStdErr: line.interceptStdErr,
      covariance: line.covariance,
      r2: line.r2,
      residualStdDev: line.residualStdDev,
      chi2Reduced: line.chi2Reduced,
      n: line.n,
    },
    axes: mech.axes(inputs),
    parameters: ex.parameters,
    warnings,
    notes: ex.notes,
    plausible: ex.plausible,
    inputs: reportedInputs,
    regimes: context.regimes === false ? [] : findRegimes(all),
  };
}

function missingCustom(): never {
  throw new AnalysisError('MISSING_INPUT', "model 'custom' needs --x-expr and --y-expr", 'x-expr');
}

export function describeReasons(reasons: Record<string, number>): string {
  const parts = Object.entries(reasons).map(([r, c]) => `${c} ${r}`);
  return parts.length ? parts.join(', ') : 'none';
}
