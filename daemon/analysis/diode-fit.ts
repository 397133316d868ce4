/**
 * Diode and solar-cell analysis of one I–V curve: points in the chosen sign convention, compliance
 * and non-finite readings excluded, starting values from the curve itself (short-circuit current,
 * shunt slope, open-circuit voltage, semilog slope, Cheung–Cheung series resistance), then the
 * single-diode fit and — seeded from it — the double-diode fit; Cheung–Cheung on its own; solar
 * figures of merit. All currents in A, voltages in V, resistances in Ω, temperatures in K.
 */
import { invertSmall } from './small-matrix.js';
import { REASONS, describeReasons, type IVData } from './analyze.js';
import { MIN_RELATIVE, relativeFromScatter, runningMedian } from './noise-floor.js';
import { classifySweep, EXCLUDED, EXCLUSION_REASONS } from './sweep-points.js';
import { RICHARDSON_FREE_A_PER_M2_K2, thermalVoltage } from './constants.js';
import { fitDiodeModel, diodeCurrent, modelRmse, type DiodeModel, type DiodeStart, type FittedParameter } from './diode-models.js';
import { AnalysisError } from './errors.js';
import { idealityVerdict } from './mechanisms/diode.js';
import { fitLine } from './line-fit.js';
import { setWith } from './mechanism.js';

export type Convention = 'load' | 'generator';

export interface DiodeRequest {
  readonly temperature?: number;
  readonly illuminated?: boolean;
  /** How the file's current is signed: 'load' (SMU: current into the device positive, default) or 'generator'. */
  readonly convention?: Convention;
  readonly complianceLimit?: number;
  /** Device area, m² (Cheung barrier height, solar efficiency). */
  readonly area?: number;
  /** Effective Richardson constant A**, A m⁻² K⁻² (Cheung barrier height). */
  readonly richardson?: number;
  /** Fit objective (see DiodeFitOptions): 'current' (default) or 'implicit'. */
  readonly objective?: 'current' | 'implicit';
  /** Only the readings with bias in this range (V) are fitted; the rest are counted as outside the window. */
  readonly window?: { readonly from?: number; readonly to?: number };
}

export interface DiodeReport {
  readonly model: string;
  readonly title: string;
  readonly parameters: Record<string, FittedParameter>;
  /** True-current RMSE, A (model current at each measured V against the measured current). */
  readonly rmse: number | null;
  /** Implicit-residual RMSE at the same parameters, A (the figure much of the literature quotes). */
  readonly rmseImplicit?: number;
  readonly objective?: 'current' | 'implicit';
  readonly rmseDefinition: string;
  readonly points: { used: number; excluded: number; reasons: Record<string, number> };
  readonly temperature: { value: number; assumed: boolean };
  readonly convention: Convention;
  readonly illuminated: boolean;
  readonly warnings: string[];
  readonly notes: string[];
  /** False when a check on the fit failed (each failure is a warning). */
  readonly plausible: boolean;
}

interface Points {
  v: number[];
  /** Current in the generator convention. */
  i: number[];
  reasons: Record<string, number>;
  /** What the sorting of the readings found (compliance detected in the readings themselves). */
  notes: string[];
}

/**
 * The readings to fit, in the generator convention and in order of bias. What is excluded for
 * every analysis — not a number, showing breakdown, at compliance (flagged, at a given limit, or
 * pinned at the top of a branch) — is decided by the whole-sweep classification (sweep-points.ts),
 * the same rule the linearized models use. An illuminated cell is checked for a pinned current on
 * its forward branch only: its reverse branch is the photocurrent, flat by nature.
 */
function points(data: IVData, req: DiodeRequest, illuminated: boolean): Points {
  const reasons: Record<string, number> = {};
  const count = (r: string) => (reasons[r] = (reasons[r] ?? 0) + 1);
  const sign = (req.convention ?? 'load') === 'load' ? -1 : 1;
  const lo = Math.min(req.window?.from ?? -Infinity, req.window?.to ?? Infinity);
  const hi = Math.max(req.window?.from ?? -Infinity, req.window?.to ?? Infinity);
  const classes = classifySweep(data, { complianceLimit: req.complianceLimit, detectCompliance: illuminated ? 'positive' : true });
  const idx: number[] = [];
  for (let k = 0; k < data.x.length; k++) {
    const code = classes.excluded[k];
    if (code !== EXCLUDED.none && code !== EXCLUDED.zeroBias) {
      count(EXCLUSION_REASONS[code]);
      continue;
    }
    const v = data.x[k];
    if (v < lo || v > hi) {
      count(REASONS.outsideWindow);
      continue;
    }
    idx.push(k);
  }
  // Sweeps usually arrive in order of bias: sorted only when they do not.
  let sorted = true;
  for (let j = 1; j < idx.length && sorted; j++) if (data.x[idx[j]] < data.x[idx[j - 1]]) sorted = false;
  if (!sorted) idx.sort((a, b) => data.x[a] - data.x[b]);
  const v = new Array<number>(idx.length);
  const i = new Array<number>(idx.length);
  for (let j = 0; j < idx.length; j++) {
    v[j] = data.x[idx[j]];
    i[j] = sign * data.y[idx[j]];
  }
  return { v, i, reasons, notes: classes.pinnedNotes };
}

/**
 * Weights 1/σ_I of a dark curve's readings from the sweep's noise model σ_I² = σ_floor² + (g·I)²
 * (noise-floor.ts): the floor from the readings at zero bias and against the bias, g from the
 * point-to-point scatter of ln|I| above the floor. Relative residuals alone would give the readings
 * at the floor the weight of the best ones.
 */
function darkWeights(p: Points): { w: number[]; floor: number; relative: number } {
  const classes = classifySweep({ x: p.v, y: p.i.map((x) => -x) }, { detectCompliance: false });
  const floor = classes.noise.floor;
  const xs: number[] = [];
  const ys: number[] = [];
  const qs: number[] = [];
  for (let k = 0; k < p.v.length; k++) {
    const a = Math.abs(p.i[k]);
    if (a > 5 * floor && a > 0) {
      xs.push(p.v[k]);
      ys.push(Math.log(a));
      qs.push(floor / a);
    }
  }
  const g = Math.max(MIN_RELATIVE, relativeFromScatter(xs, ys, qs) ?? 0.01);
  // A floor no reading reached lies below the smallest current read: a fifth of it keeps a reading
  // near zero current from weighing as if it were known to its relative noise alone.
  let least = Infinity;
  for (const x of p.i) if (x !== 0) least = Math.min(least, Math.abs(x));
  const f = floor > 0 ? floor : Number.isFinite(least) ? 0.01 * least : 0;
  const ref = runningMedian(p.i.map(Math.abs));
  return { w: Array.from(ref, (x) => 1 / Math.sqrt(f * f + g * g * x * x || Number.MIN_VALUE)), floor, relative: g };
}

/** Smallest and largest of an array, by a loop (a spread into Math.min/max overflows the stack past ~1e5). */
function extent(a: ArrayLike<number>): { lo: number; hi: number } {
  let lo = Infinity;
  let hi = -Infinity;
  for (let k = 0; k < a.length; k++) {
    if (a[k] < lo) lo = a[k];
    if (a[k] > hi) hi = a[k];
  }
  return { lo, hi };
}

/** Linear interpolation of y at x = x0 over (xs, ys) sorted by x; undefined outside the range. */
function interpolateAt(xs: number[], ys: number[], x0: number): number | undefined {
  for (let k = 0; k + 1 < xs.length; k++) {
    if ((xs[k] - x0) * (xs[k + 1] - x0) <= 0 && xs[k + 1] !== xs[k]) return ys[k] + ((ys[k + 1] - ys[k]) * (x0 - xs[k])) / (xs[k + 1] - xs[k]);
  }
  return undefined;
}

/** First voltage where the current (generator convention) crosses zero going up in V. */
function crossing(v: number[], i: number[]): number | undefined {
  for (let k = 0; k + 1 < v.length; k++) {
    if (i[k] > 0 && i[k + 1] <= 0) return v[k] + ((v[k + 1] - v[k]) * i[k]) / (i[k] - i[k + 1]);
  }
  return undefined;
}

/** Starting values for an illuminated cell (generator convention). */
function illuminatedStart(p: Points, vt: number): DiodeStart {
  const { v, i } = p;
  const isc = interpolateAt(v, i, 0) ?? extent(i).hi;
  const voc = crossing(v, i) ?? v[v.length - 1];
  // Shunt: slope of the flat part (V below half of V_oc).
  const fx: number[] = [];
  const fy: number[] = [];
  for (let k = 0; k < v.length; k++) {
    if (v[k] < 0.5 * voc) {
      fx.push(v[k]);
      fy.push(i[k]);
    }
  }
  let rsh = 1e4 * (voc / Math.max(isc, 1e-30));
  if (fx.length >= 3) {
    const f = fitLine(fx, fy);
    if (f.slope < 0) rsh = -1 / f.slope;
  }
  // Series: the slope at V_oc is dV/dI = −(R_s + n·V_t/I_sc) approximately; taken from a line
  // through the points within V_t of V_oc (a pair of neighbours is too noisy on a dense curve).
  const nx: number[] = [];
  const ny: number[] = [];
  for (let k = 0; k < v.length; k++) {
    if (Math.abs(v[k] - voc) <= vt) {
      nx.push(i[k]);
      ny.push(v[k]);
    }
  }
  let dvdi = Number.NaN;
  if (nx.length >= 3) dvdi = -fitLine(nx, ny).slope;
  else {
    for (let k = 0; k + 1 < v.length; k++) if (i[k] > 0 && i[k + 1] <= 0) dvdi = -(v[k + 1] - v[k]) / (i[k + 1] - i[k]);
  }
  const seriesFor = (n: number) => (dvdi > 0 ? Math.max(1e-4 * dvdi, dvdi - (n * vt) / Math.max(isc, 1e-30)) : 1e-3);
  // Ideality and saturation current from the semilog of the diode current near V_oc; R_s and n
  // depend on each other, so twice: with n = 1.5 for R_s first, then with the n found.
  const semilog = (rs: number) => {
    const xs: number[] = [];
    const ys: number[] = [];
    for (let k = 0; k < v.length; k++) {
      const id = isc - i[k] - (v[k] + i[k] * rs) / rsh;
      if (v[k] > 0.6 * voc && v[k] < voc * 1.02 && id > 0) {
        xs.push(v[k] + i[k] * rs);
        ys.push(Math.log(id));
      }
    }
    if (xs.length < 3) return undefined;
    const f = fitLine(xs, ys);
    return f.slope > 0 ? { n: Math.min(5, Math.max(0.8, 1 / (f.slope * vt))), i0: Math.exp(f.intercept) } : undefined;
  };
  let rs = seriesFor(1.5);
  let d = semilog(rs);
  if (d) {
    rs = seriesFor(d.n);
    d = semilog(rs) ?? d;
  }
  const diode = d ?? { n: 1.5, i0: isc / Math.exp(voc / (1.5 * vt)) };
  return { photocurrent: isc, diodes: [diode], seriesResistance: rs, shuntResistance: rsh };
}

/** Starting values for a dark curve (generator convention: forward current negative). */
function darkStart(p: Points, vt: number): DiodeStart {
  const n0 = p.v.length;
  let forward = 0;
  for (let k = 0; k < n0; k++) if (p.v[k] > 3 * vt && p.i[k] < 0) forward++;
  if (forward < 3)
    throw new AnalysisError(
      'TOO_FEW_POINTS',
      'a dark diode fit needs forward-bias points (V > 3kT/q with forward current); is the sign convention right? (--convention)',
    );
  // Shunt: slope near zero bias, or in reverse.
  const lowV: number[] = [];
  const lowI: number[] = [];
  for (let k = 0; k < n0; k++) {
    if (Math.abs(p.v[k]) < 2 * vt || p.v[k] < 0) {
      lowV.push(p.v[k]);
      lowI.push(-p.i[k]);
    }
  }
  // A forward-only sweep may hold only one or two readings there: the shunt then starts high and
  // the fit finds what the curve says of it (often only a bound).
  let rsh = 1e12;
  if (lowV.length >= 3) {
    const g = fitLine(lowV, lowI);
    if (g.slope > 0) rsh = Math.max(1 / g.slope, 1);
  }
  // The diode's own current: the forward current less the shunt's, where the diode carries most
  // of it (elsewhere the semilog slope would be the shunt's).
  const fv: number[] = [];
  const lnId: number[] = [];
  for (let k = 0; k < n0; k++) {
    const id = -p.i[k] - p.v[k] / rsh;
    if (p.v[k] > 3 * vt && p.i[k] < 0 && id > 0.5 * -p.i[k]) {
      fv.push(p.v[k]);
      lnId.push(Math.log(id));
    }
  }
  if (fv.length < 3) {
    fv.length = 0;
    lnId.length = 0;
    for (let k = 0; k < n0; k++) {
      if (p.v[k] > 3 * vt && p.i[k] < 0) {
        fv.push(p.v[k]);
        lnId.push(Math.log(-p.i[k]));
      }
    }
  }
  // Semilog slope over the lower part of the diode current (before R_s bends it).
  const { lo, hi } = extent(lnId);
  const xs: number[] = [];
  const ys: number[] = [];
  for (let j = 0; j < fv.length; j++) {
    if (lnId[j] <= lo + 0.6 * (hi - lo)) {
      xs.push(fv[j]);
      ys.push(lnId[j]);
    }
  }
  const f = xs.length >= 3 ? fitLine(xs, ys) : fitLine(fv, lnId);
  const n = f.slope > 0 ? Math.min(5, Math.max(0.8, 1 / (f.slope * vt))) : 1.5;
  const i0 = Math.exp(f.intercept);
  // Series resistance: voltage in excess of the ideal diode at the highest current.
  let rs = 1e-3;
  let top = -1;
  for (let k = 0; k < n0; k++) if (p.v[k] > 3 * vt && p.i[k] < 0 && (top < 0 || p.v[k] > p.v[top])) top = k;
  const itop = -p.i[top] - p.v[top] / rsh;
  if (itop > 0) {
    const excess = p.v[top] - n * vt * Math.log(itop / i0 + 1);
    if (excess > 0) rs = excess / -p.i[top];
  }
  return { photocurrent: 0, diodes: [{ i0, n }], seriesResistance: Math.max(rs, 1e-6), shuntResistance: rsh };
}

/** Every k-th point (about `target` of them, the last one always in), for the long curves' first fits. */
function subsample(p: Points, w: number[], target: number): { v: number[]; i: number[]; w: number[] } {
  const n = p.v.length;
  const step = Math.floor(n / target);
  const v: number[] = [];
  const i: number[] = [];
  const ws: number[] = [];
  for (let k = 0; k < n; k += step) {
    v.push(p.v[k]);
    i.push(p.i[k]);
    ws.push(w[k]);
  }
  if ((n - 1) % step !== 0) {
    v.push(p.v[n - 1]);
    i.push(p.i[n - 1]);
    ws.push(w[n - 1]);
  }
  return { v, i, w: ws };
}

/** The circuit of a fit as a start for another. */
function startFrom(f: ReturnType<typeof fitDiodeModel>): DiodeStart {
  const c = f.circuit;
  return { photocurrent: c.photocurrent, diodes: c.diodes, seriesResistance: c.seriesResistance, shuntResistance: c.shuntResistance };
}

/**
 * A two-diode start from the curve itself: with the single-diode R_s and R_sh, the diode current
 * I_d = I_ph − I − V_j/R_sh at the junction voltage V_j = V + I·R_s is split into its lower and upper
 * thirds (in ln I_d); a semilog line through each gives the recombination (n₂, I₀₂) and the
 * diffusion (n₁, I₀₁) diode. Empty when the curve does not allow it.
 */
function twoRegionStart(p: Points, s: { photocurrent: number; seriesResistance: number; shuntResistance: number }, vt: number): DiodeStart[] {
  const vj: number[] = [];
  const ln: number[] = [];
  for (let k = 0; k < p.v.length; k++) {
    const j = p.v[k] + p.i[k] * s.seriesResistance;
    const id = s.photocurrent - p.i[k] - j / s.shuntResistance;
    if (j > 3 * vt && id > 0) {
      vj.push(j);
      ln.push(Math.log(id));
    }
  }
  if (vj.length < 9) return [];
  const { lo, hi } = extent(ln);
  if (!(hi - lo > 2)) return [];
  const pick = (a: number, b: number) => {
    const xs: number[] = [];
    const ys: number[] = [];
    for (let k = 0; k < vj.length; k++) {
      if (ln[k] >= lo + a * (hi - lo) && ln[k] <= lo + b * (hi - lo)) {
        xs.push(vj[k]);
        ys.push(ln[k]);
      }
    }
    if (xs.length < 3) return undefined;
    const f = fitLine(xs, ys);
    return f.slope > 0 ? { n: 1 / (f.slope * vt), i0: Math.exp(f.intercept) } : undefined;
  };
  const low = pick(0, 1 / 3);
  const high = pick(2 / 3, 1);
  if (!low || !high) return [];
  const clamp = (n: number) => Math.min(1.95, Math.max(1.05, n));
  return [
    {
      ...s,
      diodes: [
        { i0: high.i0, n: clamp(high.n) },
        { i0: low.i0, n: clamp(low.n) },
      ],
    },
  ];
}

const TITLES: Record<DiodeModel, string> = {
  'single-diode': 'single-diode model (I_ph, I₀, n, R_s, R_sh), Lambert-W explicit',
  'double-diode': 'double-diode model (I_ph, I₀₁, n₁, I₀₂, n₂, R_s, R_sh)',
};

export function fitDiode(data: IVData, model: DiodeModel, req: DiodeRequest = {}): DiodeReport {
  const temperature = req.temperature ?? 300;
  const illuminated = req.illuminated ?? false;
  const vt = thermalVoltage(temperature);
  const p = points(data, req, illuminated);
  if (!illuminated) {
    // In the dark the model current at zero bias is zero whatever the parameters: a reading there
    // is noise only (it says nothing and would be weighed against nothing).
    for (let k = p.v.length - 1; k >= 0; k--) {
      if (p.v[k] === 0) {
        p.v.splice(k, 1);
        p.i.splice(k, 1);
        p.reasons[REASONS.zeroBias] = (p.reasons[REASONS.zeroBias] ?? 0) + 1;
      }
    }
  }
  const excluded = Object.values(p.reasons).reduce((a, b) => a + b, 0);
  if (p.v.length < 6)
    throw new AnalysisError('TOO_FEW_POINTS', `${p.v.length} usable point${p.v.length === 1 ? '' : 's'}; excluded: ${describeReasons(p.reasons)}`);
  const start = illuminated ? illuminatedStart(p, vt) : darkStart(p, vt);
  // Dark curves span decades: each reading weighted by its noise (floor and relative part), so the
  // low-current points count as much as they deserve; illuminated curves are fitted on absolute
  // current (the RMSE users compare).
  const noise = illuminated ? undefined : darkWeights(p);
  const w = noise ? noise.w : p.i.map(() => 1);
  const objective = req.objective ?? 'current';
  // Long curves: each fit is first done on every k-th point (about 250), then refined on the whole
  // curve from there — the two optima lie close, so the refinement is short and the cost stays
  // proportional to the number of points.
  const long = p.v.length >= 600;
  const sub = long ? subsample(p, w, 250) : { v: p.v, i: p.i, w };
  const sdmOpts = { model: 'single-diode' as const, temperature, illuminated, objective };
  const sdm = long
    ? fitDiodeModel(p.v, p.i, w, sdmOpts, [startFrom(fitDiodeModel(sub.v, sub.i, sub.w, sdmOpts, [start]))])
    : fitDiodeModel(p.v, p.i, w, sdmOpts, [start]);
  let fit = sdm;
  if (model === 'double-diode') {
    const s = sdm.circuit;
    const d = s.diodes[0];
    const base = { photocurrent: s.photocurrent, seriesResistance: s.seriesResistance, shuntResistance: s.shuntResistance };
    // Several starts (common practice for this ill-conditioned model): splits of the single-diode
    // current, and diffusion + recombination diodes (n ≈ 1 and 2). The first start is run to
    // convergence; the others only when it ends on a bound or no better than one diode. The last
    // one is the one-diode fit itself with a vanishing second diode.
    const starts: DiodeStart[] = [
      ...twoRegionStart(p, s, vt),
      {
        ...base,
        diodes: [
          { i0: d.i0 * 0.5, n: d.n },
          { i0: d.i0 * 0.5, n: Math.min(d.n * 1.5, 4) },
        ],
      },
      {
        ...base,
        diodes: [
          { i0: d.i0 * 0.9, n: d.n },
          { i0: d.i0 * 0.1, n: 2 },
        ],
      },
      {
        ...base,
        diodes: [
          { i0: d.i0 * Math.exp(-Math.max(0, d.n - 1) * 10), n: 1 },
          { i0: d.i0, n: 2 },
        ],
      },
      {
        ...base,
        diodes: [
          { i0: d.i0, n: d.n },
          { i0: d.i0 * 1e-6, n: 2 },
        ],
      },
    ];
    // Ideality factors bounded to [1, 2] (diffusion and recombination; common practice for this
    // ill-conditioned model) unless the one-diode n already lies outside.
    const idealityBounds: [number, number] = [Math.min(1, d.n), Math.max(2, d.n)];
    const opts = { model: 'double-diode' as const, temperature, illuminated, objective, idealityBounds };
    const score = (f: { rmse: number; rmseImplicit: number }) => (objective === 'implicit' ? f.rmseImplicit : f.rmse);
    // Long curves: the starts are tried, and the crawl along the two-diode valley done, on the
    // subsample; the best is refined on the whole curve, where it stops once the gains fall far
    // below the noise (what is left there is a crawl along the valley floor).
    const base1 = long ? modelRmse(sub.v, sub.i, sdm.circuit) : sdm;
    let bestFit: typeof sdm | undefined;
    for (const st of starts) {
      let f: typeof sdm;
      try {
        f = fitDiodeModel(sub.v, sub.i, sub.w, opts, [st]);
      } catch (e) {
        if (e instanceof AnalysisError) continue;
        throw e;
      }
      if (!bestFit || score(f) < score(bestFit)) bestFit = f;
      const good = bestFit.converged && bestFit.atBound.length === 0 && score(bestFit) < score(base1) * (1 - 1e-6);
      if (good) break;
    }
    const refine = (st: DiodeStart) => {
      try {
        return fitDiodeModel(p.v, p.i, w, { ...opts, stall: true }, [st]);
      } catch (e) {
        if (!(e instanceof AnalysisError)) throw e;
        return undefined;
      }
    };
    if (bestFit && long) bestFit = refine(startFrom(bestFit));
    // Never worse than one diode: the one-diode fit with a vanishing second diode is a two-diode
    // circuit as good as it; refined from there when the search ended above it.
    if (long && (!bestFit || score(bestFit) > score(sdm) * (1 + 1e-6))) {
      const f = refine(starts[starts.length - 1]);
      if (f && (!bestFit || score(f) < score(bestFit))) bestFit = f;
    }
    if (!bestFit) throw new AnalysisError('BAD_INPUT', 'the double-diode model could not be fitted from any start');
    fit = bestFit;
  }
  const warnings: string[] = [];
  if (req.temperature === undefined)
    warnings.push('temperature not given: 300 K assumed; the ideality factors are valid only with the temperature used (only n·T is measured)');
  const verdict = judgeDiodeFit(fit, noise !== undefined, p.v.length, temperature);
  warnings.push(...verdict.warnings);
  if (model === 'double-diode' && !verdict.plausible && verdict.warnings.some((x) => /(idealityFactor|saturationCurrent)[12]/.test(x)))
    warnings.push('one of the two diodes is not determined: the curve shows one exponential (--model single-diode)');
  if (!illuminated) {
    // The diode fits take positive bias as forward: a device wired the other way round conducts at negative bias.
    let pos = 0;
    let neg = 0;
    for (let k = 0; k < p.v.length; k++) {
      if (p.v[k] > 0) pos = Math.max(pos, Math.abs(p.i[k]));
      else neg = Math.max(neg, Math.abs(p.i[k]));
    }
    if (neg > 10 * pos)
      warnings.push('the larger current flows at negative bias: these fits take positive bias as forward (is the device, or the bias, the other way round?)');
  }
  const notes = [...p.notes, `ideality factors at T = ${temperature} K (kT/q = ${(vt * 1000).toFixed(4)} mV)`, ...verdict.notes];
  if (noise)
    notes.push(
      `each reading weighted by its noise: floor ${noise.floor > 0 ? `${noise.floor.toPrecision(3)} A` : 'not reached'}, ${(100 * noise.relative).toPrecision(3)} % of reading`,
    );
  return {
    model,
    title: TITLES[model],
    parameters: fit.parameters,
    rmse: fit.rmse,
    rmseImplicit: fit.rmseImplicit,
    objective,
    rmseDefinition:
      'rmse: true-current RMSE √(mean (I_model(V) − I_measured)²) over the used points, A; rmseImplicit: √(mean f(V, I_measured)²) of the model equation at the same parameters, A',
    points: { used: p.v.length, excluded, reasons: p.reasons },
    temperature: { value: temperature, assumed: req.temperature === undefined },
    convention: req.convention ?? 'load',
    illuminated,
    warnings,
    notes,
    plausible: verdict.plausible,
  };
}

/** The parameters a diode fit is for: the ideality factors and saturation currents (the rest may be only bounds). */
const MAIN_PARAMETER = /^(idealityFactor|saturationCurrent)/;

/**
 * Whether a single- or double-diode fit can be trusted, each failed check a warning: the fit
 * converged; every ideality factor is one a diode can have (idealityVerdict, shared with the semilog
 * model); the ideality factors and saturation currents are determined (a standard error, and the
 * value at least twice it — the rule every mechanism's main parameter meets) and not on a bound; and,
 * for a dark curve weighted by its noise, the residuals are of the size of that noise (reduced
 * χ² below 4 or within 5 standard deviations of 1: a curve the model does not describe, such as two
 * diodes fitted with one or readings clipped by a limit no one named, leaves residuals larger than
 * its noise, and parameters biased beyond their errors). A series or shunt resistance the curve does
 * not determine is reported as a bound (a note), not a failure: a forward-only sweep of a good
 * diode rarely shows its shunt.
 */
function judgeDiodeFit(fit: ReturnType<typeof fitDiodeModel>, weighted: boolean, used: number, temperature: number) {
  const warnings: string[] = [];
  const notes: string[] = [];
  let plausible = true;
  const fail = (w: string) => {
    warnings.push(w);
    plausible = false;
  };
  if (!fit.converged) fail('the fit did not converge to the tolerances; treat the parameters with care');
  for (const [k, v] of Object.entries(fit.parameters)) {
    const main = MAIN_PARAMETER.test(k);
    const onBound = fit.atBound.includes(k);
    if (onBound) {
      if (main) fail(`${k} ended on its bound: the data do not determine it`);
      else
        notes.push(`${k} ended on its bound (${v.value.toPrecision(3)} ${v.unit}): the curve does not determine it; the value is a bound, not a measurement`);
      continue;
    }
    const undetermined = !Number.isFinite(v.stdErr)
      ? 'no standard error (the parameters are not independently determined)'
      : v.stdErr > 0.5 * Math.abs(v.value)
        ? `standard error ${v.stdErr.toPrecision(2)}${v.unit ? ` ${v.unit}` : ''} is more than half the value`
        : '';
    if (!undetermined) continue;
    if (main) fail(`${k}: ${undetermined}`);
    else notes.push(`${k}: ${undetermined}: the curve hardly determines it`);
  }
  for (const [k, v] of Object.entries(fit.parameters)) {
    if (!k.startsWith('idealityFactor')) continue;
    const verdict = idealityVerdict(v.value, temperature, k);
    if (verdict.warning) warnings.push(verdict.warning);
    if (!verdict.plausible) plausible = false;
  }
  if (weighted) {
    const dof = used - Object.keys(fit.parameters).length;
    const reduced = dof > 0 ? fit.chi2 / dof : Number.NaN;
    if (dof > 0 && reduced > 4 && reduced > 1 + 5 * Math.sqrt(2 / dof))
      fail(
        `the residuals are ${Math.sqrt(reduced).toPrecision(2)}× the noise the readings show (reduced χ² ${reduced.toPrecision(3)} on ${dof} degrees of freedom): the model does not describe this curve (another diode, a limit, a breakdown?), and the parameters may be off by more than their errors`,
      );
    else if (dof > 0) notes.push(`reduced χ² ${reduced.toPrecision(3)} on ${dof} degrees of freedom against the noise model`);
  }
  return { warnings, notes, plausible };
}

/**
 * Cheung–Cheung series resistance (Cheung & Cheung, Appl. Phys. Lett. 49, 85, 1986; Schroder 2006): in the bend-over
 * region V = I·R_s + n(kT/q)·ln(I/(A·A**·T²)) + n·φ_B, so
 *   dV/d(ln I) = I·R_s + n·kT/q       (slope R_s, intercept n·kT/q),
 *   H(I) = V − n(kT/q)·ln(I/(A·A**·T²)) = I·R_s + n·φ_B   (slope R_s, intercept n·φ_B).
 * The derivative is the slope of a local straight line through five neighbours (smoothing).
 */
export function cheung(data: IVData, req: DiodeRequest = {}): DiodeReport {
  const temperature = req.temperature ?? 300;
  const vt = thermalVoltage(temperature);
  const p = points(data, req, false);
  // Forward points, current as a positive number, sorted by V.
  const idx = p.v.map((_, k) => k).filter((k) => p.v[k] > 3 * vt && -p.i[k] > 0);
  const v = idx.map((k) => p.v[k]);
  const cur = idx.map((k) => -p.i[k]);
  const excluded = Object.values(p.reasons).reduce((a, b) => a + b, 0) + (p.v.length - idx.length);
  if (v.length < 8)
    throw new AnalysisError(
      'TOO_FEW_POINTS',
      `Cheung–Cheung needs at least 8 forward-bias points above 3kT/q; ${v.length} usable (is the sign convention right? --convention)`,
    );
  // Bend-over region: the upper half of the forward current range (in decades).
  const ln = cur.map(Math.log);
  const { lo: lnMin, hi: lnMax } = extent(ln);
  const xs: number[] = [];
  const d1: number[] = [];
  const vs: number[] = [];
  const half = 2;
  for (let k = half; k < v.length - half; k++) {
    if (ln[k] < lnMin + 0.5 * (lnMax - lnMin)) continue;
    const f = fitLine(ln.slice(k - half, k + half + 1), v.slice(k - half, k + half + 1));
    xs.push(cur[k]);
    d1.push(f.slope);
    vs.push(v[k]);
  }
  if (xs.length < 3) throw new AnalysisError('TOO_FEW_POINTS', 'too few points in the bend-over region for the Cheung–Cheung functions');
  const f1 = fitLine(xs, d1);
  const n = f1.intercept / vt;
  const nSe = f1.interceptStdErr / vt;
  const parameters: Record<string, FittedParameter> = {
    seriesResistance: { value: f1.slope, stdErr: f1.slopeStdErr, unit: 'Ω' },
    idealityFactor: { value: n, stdErr: nSe, unit: '' },
  };
  const warnings: string[] = [];
  let plausible = true;
  const xr = extent(xs);
  const notes: string[] = [...p.notes, `function 1 (dV/d ln I against I) on ${xs.length} points from ${xr.lo.toExponential(2)} to ${xr.hi.toExponential(2)} A`];
  if (req.temperature === undefined) warnings.push('temperature not given: 300 K assumed; n is valid only with the temperature used');
  if (req.area !== undefined) {
    const aStar = req.richardson ?? RICHARDSON_FREE_A_PER_M2_K2;
    const h = xs.map((x, k) => vs[k] - n * vt * Math.log(x / ((req.area as number) * aStar * temperature * temperature)));
    const f2 = fitLine(xs, h);
    const phi = f2.intercept / n;
    const phiSe = Math.abs(phi) * Math.hypot(f2.interceptStdErr / f2.intercept, nSe / n);
    parameters.barrierHeight = { value: phi, stdErr: phiSe, unit: 'eV' };
    parameters.seriesResistanceH = { value: f2.slope, stdErr: f2.slopeStdErr, unit: 'Ω' };
    notes.push(
      `function 2 (H(I) against I) gives R_s = ${f2.slope.toPrecision(4)} Ω as a consistency check; A** = ${aStar} A m⁻² K⁻²${req.richardson === undefined ? ' (free-electron value assumed)' : ''}`,
    );
    if (Math.abs(f2.slope - f1.slope) > 0.2 * Math.abs(f1.slope)) {
      warnings.push('the two Cheung functions disagree on R_s by more than 20 %: the bend-over region may hold another effect');
      plausible = false;
    }
  } else warnings.push(`barrier height needs the device area and A** (${setWith('--area, --richardson')})`);
  if (f1.slope <= 0) {
    warnings.push('negative series resistance: the curve shows no series-resistance bend in the region used');
    plausible = false;
  }
  const nVerdict = idealityVerdict(n, temperature);
  if (nVerdict.warning) warnings.push(nVerdict.warning);
  if (!nVerdict.plausible) plausible = false;
  return {
    model: 'cheung',
    title: 'Cheung–Cheung functions (dV/d ln I and H(I) against I)',
    parameters,
    rmse: null,
    rmseDefinition: "not applicable (straight-line fits; see the parameters' standard errors)",
    points: { used: xs.length, excluded: Math.max(0, excluded + (v.length - xs.length)), reasons: p.reasons },
    temperature: { value: temperature, assumed: req.temperature === undefined },
    convention: req.convention ?? 'load',
    illuminated: false,
    warnings,
    notes,
    plausible,
  };
}

export interface SolarFigures {
  /** Short-circuit current, A (generator convention). */
  readonly isc: FittedParameter;
  readonly voc: FittedParameter;
  readonly pmax: FittedParameter;
  readonly vmp: FittedParameter;
  readonly imp: FittedParameter;
  readonly fillFactor: FittedParameter;
  readonly efficiency: FittedParameter | null;
}

export interface SolarReport {
  readonly figures: SolarFigures;
  readonly irradiance: number;
  readonly area: number | null;
  readonly points: { used: number; excluded: number; reasons: Record<string, number> };
  readonly convention: Convention;
  readonly warnings: string[];
}

/**
 * Solar figures of merit from the measured curve: I_sc and V_oc by linear interpolation, P_max at
 * the vertex of the parabola through the three points around the largest measured V·I, FF, and
 * η = P_max/(G·A) (G default 1000 W/m², the standard test condition of IEC 60904-3 / IEC 60904-1).
 * Uncertainties are not propagated here (stdErr 0): they come from the fitted model instead.
 */
export function solarFigures(data: IVData, req: DiodeRequest & { irradiance?: number } = {}): SolarReport {
  const p = points(data, req, true);
  const { v, i } = p;
  const warnings: string[] = [];
  if (v.length < 3) throw new AnalysisError('TOO_FEW_POINTS', `${v.length} usable point${v.length === 1 ? '' : 's'}`);
  const isc = interpolateAt(v, i, 0);
  const voc = crossing(v, i);
  if (isc === undefined) throw new AnalysisError('BAD_INPUT', 'the curve does not span V = 0: no short-circuit current');
  if (voc === undefined)
    throw new AnalysisError(
      'BAD_INPUT',
      `the current never crosses zero: no open-circuit voltage (is the cell illuminated, and the convention right? the file was read as ${req.convention ?? 'load'} convention)`,
    );
  if (isc <= 0) warnings.push('the short-circuit current is not positive in the generator convention: check --convention');
  let kBest = -1;
  let pBest = -Infinity;
  for (let k = 0; k < v.length; k++) {
    const pw = v[k] * i[k];
    if (v[k] >= 0 && i[k] >= 0 && pw > pBest) {
      pBest = pw;
      kBest = k;
    }
  }
  if (kBest < 0) throw new AnalysisError('BAD_INPUT', 'no point delivers power (V ≥ 0 and I ≥ 0 in the generator convention)');
  let vmp = v[kBest];
  let pmax = pBest;
  if (kBest > 0 && kBest < v.length - 1) {
    // Vertex of the parabola through the three points around the maximum of P(V).
    const [x0, x1, x2] = [v[kBest - 1], v[kBest], v[kBest + 1]];
    const [y0, y1, y2] = [x0 * i[kBest - 1], pBest, x2 * i[kBest + 1]];
    const den = (x0 - x1) * (x0 - x2) * (x1 - x2);
    const a = (x2 * (y1 - y0) + x1 * (y0 - y2) + x0 * (y2 - y1)) / den;
    const b = (x2 * x2 * (y0 - y1) + x1 * x1 * (y2 - y0) + x0 * x0 * (y1 - y2)) / den;
    const c = (x1 * x2 * (x1 - x2) * y0 + x2 * x0 * (x2 - x0) * y1 + x0 * x1 * (x0 - x1) * y2) / den;
    if (a < 0) {
      const xv = -b / (2 * a);
      if (xv > x0 && xv < x2) {
        vmp = xv;
        pmax = c - (b * b) / (4 * a);
      }
    }
  }
  const imp = pmax / vmp;
  const g = req.irradiance ?? 1000;
  const f = (value: number, unit: string): FittedParameter => ({ value, stdErr: 0, unit });
  return {
    figures: {
      isc: f(isc, 'A'),
      voc: f(voc, 'V'),
      pmax: f(pmax, 'W'),
      vmp: f(vmp, 'V'),
      imp: f(imp, 'A'),
      fillFactor: f(pmax / (isc * voc), ''),
      efficiency: req.area !== undefined ? f(pmax / (g * req.area), '') : null,
    },
    irradiance: g,
    area: req.area ?? null,
    points: { used: v.length, excluded: Object.values(p.reasons).reduce((a, b) => a + b, 0), reasons: p.reasons },
    convention: req.convention ?? 'load',
    warnings: req.area === undefined ? [...warnings, `efficiency needs the cell area (${setWith('--area')})`] : warnings,
  };
}

/** Model current (generator convention) of a fitted report at each v, for plots and checks. */
export function modelCurve(report: DiodeReport, v: number[]): number[] {
  const P = report.parameters;
  const vt = thermalVoltage(report.temperature.value);
  const diodes =
    report.model === 'single-diode'
      ? [{ i0: P.saturationCurrent.value, n: P.idealityFactor.value }]
      : [
          { i0: P.saturationCurrent1.value, n: P.idealityFactor1.value },
          { i0: P.saturationCurrent2.value, n: P.idealityFactor2.value },
        ];
  const c = { photocurrent: P.photocurrent?.value ?? 0, diodes, seriesResistance: P.seriesResistance.value, shuntResistance: P.shuntResistance.value, vt };
  return v.map((x) => diodeCurrent(x, c));
}

/**
 * A polynomial (degree 1 to 3) fitted by least squares to the `k` points nearest x0, in
 * x − x0 for conditioning; coefficients, their covariance (scaled by the residual variance, so the
 * noise is taken from the points themselves) and the degrees of freedom.
 */
function localPolynomial(v: number[], i: number[], x0: number, k: number, degree: number): { c: number[]; cov: number[][]; dof: number } | undefined {
  const order = v
    .map((_x, j) => j)
    .sort((a, b) => Math.abs(v[a] - x0) - Math.abs(v[b] - x0))
    .slice(0, k);
  const m = degree + 1;
  if (order.length < m + 2) return undefined;
  // Normal equations AᵀA c = Aᵀy with rows [1, u, u², …], u = v − x0.
  const ata = Array.from({ length: m }, () => new Array<number>(m).fill(0));
  const aty = new Array<number>(m).fill(0);
  for (const j of order) {
    const u = v[j] - x0;
    const row = Array.from({ length: m }, (_x, e) => u ** e);
    for (let a = 0; a < m; a++) {
      aty[a] += row[a] * i[j];
      for (let b = 0; b < m; b++) ata[a][b] += row[a] * row[b];
    }
  }
  const inv = invertSmall(ata);
  if (!inv) return undefined;
  const c = inv.map((r) => r.reduce((s, x, b) => s + x * aty[b], 0));
  let ss = 0;
  for (const j of order) {
    const u = v[j] - x0;
    const r = i[j] - poly(c, u);
    ss += r * r;
  }
  const dof = order.length - m;
  const s2 = ss / dof;
  return { c, cov: inv.map((r) => r.map((x) => x * s2)), dof };
}

/** Σ c_j u^j. */
function poly(c: number[], u: number): number {
  let s = 0;
  for (let j = c.length - 1; j >= 0; j--) s = s * u + c[j];
  return s;
}

/** d/du Σ c_j u^j. */
function dpoly(c: number[], u: number): number {
  let s = 0;
  for (let j = c.length - 1; j >= 1; j--) s = s * u + j * c[j];
  return s;
}

/** gᵀ C g. */
function quadForm(g: number[], cov: number[][]): number {
  let s = 0;
  for (let a = 0; a < g.length; a++) for (let b = 0; b < g.length; b++) s += g[a] * cov[a][b] * g[b];
  return Math.max(0, s);
}

/** Points of the measured curve in each local fit of the figures of merit, and the degree near V_oc and P_max. */
export const SOLAR_LOCAL_POINTS = 9;
export const SOLAR_LOCAL_DEGREE = 4;

/**
 * The solar figures of merit with standard uncertainties, from local least-squares fits of the
 * measured curve (the noise taken from each fit's own residuals; local fits near each point are
 * how IEC 60904-1 has them read off a measured curve): I_sc as the intercept of a line through the
 * points nearest V = 0; V_oc as the root of a quartic I(V) through the points nearest the zero
 * crossing; P_max and V_mp at the maximum of a quartic P(V) = V·I through the points nearest the
 * largest measured power; uncertainties by first-order propagation of each fit's
 * covariance (the delta method), FF and η from those (the three regions share no points, so they
 * are propagated as independent). G and the area are taken as exact. With `area`, J_sc = I_sc/A.
 * Falls back to solarFigures' values (stdErr 0) where a local fit is not possible.
 */
export function solarFiguresWithUncertainty(
  data: IVData,
  req: DiodeRequest & { irradiance?: number } = {},
): SolarReport & { readonly jsc: FittedParameter | null } {
  const base = solarFigures(data, req);
  const { v, i } = points(data, req, true);
  const k = SOLAR_LOCAL_POINTS;
  const f = base.figures;
  const warnings = [...base.warnings];
  let isc = f.isc;
  const a = localPolynomial(v, i, 0, k, 1);
  if (a) isc = { value: a.c[0], stdErr: Math.sqrt(a.cov[0][0]), unit: 'A' };
  else warnings.push('too few points near V = 0 for the uncertainty of I_sc');
  let voc = f.voc;
  // Quartics near V_oc and P_max: over a few kT/q the exponential bends too much for a parabola
  // (on a synthetic cell with 10 mV steps a parabola or cubic leaves a bias of several σ).
  const spacing = (x0: number) => {
    const near = [...v]
      .sort((a2, b2) => Math.abs(a2 - x0) - Math.abs(b2 - x0))
      .slice(0, k)
      .sort((a2, b2) => a2 - b2);
    const steps = near
      .slice(1)
      .map((x, j) => x - near[j])
      .sort((a2, b2) => a2 - b2);
    return steps.length ? steps[steps.length >> 1] : Number.NaN;
  };
  if (spacing(f.voc.value) > 0.015)
    warnings.push(
      `the points near V_oc are about ${(spacing(f.voc.value) * 1000).toFixed(0)} mV apart: the local fit can bias V_oc and P_max beyond their stated uncertainties; sweep in steps of 10 mV or less there`,
    );
  const b = localPolynomial(v, i, f.voc.value, k, SOLAR_LOCAL_DEGREE);
  if (b) {
    const c = b.c;
    const d1 = (u: number) => dpoly(c, u);
    // Root nearest u = 0 (u = V − V_oc as interpolated), by Newton steps.
    let root = -c[0] / c[1];
    for (let it = 0; it < 8; it++) root -= poly(c, root) / d1(root);
    const slope = d1(root);
    const g = c.map((_x, e) => -(root ** e) / slope);
    voc = { value: f.voc.value + root, stdErr: Math.sqrt(quadForm(g, b.cov)), unit: 'V' };
  } else warnings.push('too few points near V_oc for its uncertainty');
  let pmax = f.pmax;
  let vmp = f.vmp;
  const p = localPolynomial(
    v,
    v.map((x, j) => x * i[j]),
    f.vmp.value,
    k,
    SOLAR_LOCAL_DEGREE,
  );
  if (p) {
    const c = p.c;
    const d1 = (u: number) => dpoly(c, u);
    const d2 = (u: number) =>
      dpoly(
        c.slice(1).map((x, e) => x * (e + 1)),
        u,
      );
    let u = 0;
    for (let it = 0; it < 8; it++) u -= d1(u) / d2(u);
    if (d2(u) < 0 && Math.abs(u) < 0.5 * (v[v.length - 1] - v[0])) {
      // P_max = P(u*): ∂P_max/∂c_j = u*^j (P' = 0 there); u* moves by −(∂P'/∂c_j)/P''.
      const pow = c.map((_x, e) => u ** e);
      pmax = { value: poly(c, u), stdErr: Math.sqrt(quadForm(pow, p.cov)), unit: 'W' };
      vmp = {
        value: f.vmp.value + u,
        stdErr: Math.sqrt(
          quadForm(
            c.map((_x, e) => -(e * u ** Math.max(0, e - 1)) / d2(u)),
            p.cov,
          ),
        ),
        unit: 'V',
      };
    } else warnings.push('no maximum of the power in the points near it: P_max without uncertainty');
  } else warnings.push('too few points near the maximum power for its uncertainty');
  const imp = { value: pmax.value / vmp.value, stdErr: (pmax.value / vmp.value) * Math.hypot(pmax.stdErr / pmax.value, vmp.stdErr / vmp.value), unit: 'A' };
  const ffv = pmax.value / (isc.value * voc.value);
  const fillFactor = { value: ffv, stdErr: ffv * Math.hypot(pmax.stdErr / pmax.value, isc.stdErr / isc.value, voc.stdErr / voc.value), unit: '' };
  const g = req.irradiance ?? 1000;
  const efficiency = req.area !== undefined ? { value: pmax.value / (g * req.area), stdErr: pmax.stdErr / (g * req.area), unit: '' } : null;
  const jsc = req.area !== undefined ? { value: isc.value / req.area, stdErr: isc.stdErr / req.area, unit: 'A/m^2' } : null;
  return { ...base, figures: { isc, voc, pmax, vmp, imp, fillFactor, efficiency }, jsc, warnings };
}
