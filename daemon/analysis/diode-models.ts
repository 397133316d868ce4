/**
 * Single- and double-diode models of diodes and solar cells with series and shunt resistance, in
 * the generator convention (current delivered positive, as the solar-cell literature writes it; Jain & Kapoor 2004):
 *   I = I_ph − Σₖ I₀ₖ·(exp((V + I·R_s)/(nₖ·V_t)) − 1) − (V + I·R_s)/R_sh.
 * The single-diode current is explicit through the Lambert W function (Jain & Kapoor 2004), in the
 * log form that does not overflow; the double-diode current is solved by a bracketed Newton
 * iteration on the junction voltage. Fits are Levenberg–Marquardt on the true current (model
 * current at the measured V minus the measured current), with the Jacobian from implicit
 * differentiation of the model equation:
 *   ∂I/∂p = −(∂f/∂p)/(∂f/∂I).
 * Only n·T is identifiable from one curve: the ideality factors belong to the temperature given.
 */
import { thermalVoltage } from './constants.js';
import { AnalysisError } from './errors.js';
import { lambertWExp } from './lambert-w.js';
import { levenbergMarquardt } from './levenberg-marquardt.js';

export interface DiodeCircuit {
  readonly photocurrent: number;
  /** One or two diodes: saturation current (A) and ideality factor. */
  readonly diodes: readonly { readonly i0: number; readonly n: number }[];
  readonly seriesResistance: number;
  readonly shuntResistance: number;
  /** Thermal voltage kT/q at the cell temperature, V. */
  readonly vt: number;
}

const EXP_CAP = 700;

/** Single-diode current at v, explicit via Lambert W (generator convention). */
export function singleDiodeExplicit(v: number, c: DiodeCircuit): number {
  const { i0, n } = c.diodes[0];
  const iph = c.photocurrent;
  const rs = c.seriesResistance;
  const rsh = c.shuntResistance;
  const nvt = n * c.vt;
  if (rs <= 0) {
    return iph - i0 * (Math.exp(Math.min(v / nvt, EXP_CAP)) - 1) - v / rsh;
  }
  const lnTheta = Math.log((rs * rsh * i0) / (nvt * (rs + rsh))) + (rsh * (rs * iph + rs * i0 + v)) / (nvt * (rs + rsh));
  return (rsh * (iph + i0) - v) / (rs + rsh) - (nvt / rs) * lambertWExp(lnTheta);
}

/** f(I) of the model equation and ∂f/∂I at current i, written to `out` (no allocation); ex gets each diode's exponential. */
function residualAt(v: number, i: number, c: DiodeCircuit, ex: Float64Array, out: { f: number; df: number }): void {
  const rs = c.seriesResistance;
  const u = v + i * rs;
  let f = c.photocurrent - u / c.shuntResistance - i;
  let df = -rs / c.shuntResistance - 1;
  const ds = c.diodes;
  for (let k = 0; k < ds.length; k++) {
    const d = ds[k];
    const a = u / (d.n * c.vt);
    const e = Math.exp(Math.min(a, EXP_CAP));
    ex[k] = e;
    f -= d.i0 * (e - 1);
    df -= (d.i0 * e * rs) / (d.n * c.vt);
  }
  out.f = f;
  out.df = df;
}

/** Per-circuit constants of the solver, kept for the last circuit (a fit solves one circuit at every point). */
let prepared: DiodeCircuit | undefined;
let lnI0 = new Float64Array(4);
let invNvt = new Float64Array(4);
let sumI0 = 0;
let nvtMin = 0;

function prepare(c: DiodeCircuit): void {
  if (prepared === c) return;
  const nd = c.diodes.length;
  if (lnI0.length < nd) {
    lnI0 = new Float64Array(nd);
    invNvt = new Float64Array(nd);
  }
  sumI0 = 0;
  nvtMin = Infinity;
  for (let k = 0; k < nd; k++) {
    const d = c.diodes[k];
    sumI0 += d.i0;
    lnI0[k] = Math.log(d.i0);
    invNvt[k] = 1 / (d.n * c.vt);
    nvtMin = Math.min(nvtMin, d.n * c.vt);
  }
  prepared = c;
}

/**
 * Model current at v for any number of diodes, by Newton's method on the junction voltage
 * u = V + I·R_s inside a bracket. The model equation is A(u) = B(u) with
 *   A(u) = I_ph + ΣI₀ₖ − u/R_sh − (u − V)/R_s   (a falling straight line) and
 *   B(u) = ΣI₀ₖ·exp(u/(nₖ·V_t))                  (rising, convex),
 * so F = A − B is concave and falling: from the right of the root Newton never overshoots, from the
 * left its step lands right of the root. Deep on the exponential (B > 2A) Newton on F would creep
 * down by about n·V_t a step; there it works on φ = ln A − ln B instead, nearly straight wherever
 * one exponential dominates. Bracket: at u_lo = min(0, (I_ph + V/R_s)/(1/R_s + 1/R_sh)) the diodes
 * carry at most ΣI₀ₖ while A − ΣI₀ₖ ≥ 0, so F ≥ 0; B(u) ≤ A(u_lo) above it bounds u by
 * nₖV_t·ln(A(u_lo)/I₀ₖ) for every k, and A > 0 by the zero of A. A step that leaves the bracket is
 * replaced by bisection. The current comes from the model equation at u (accurate for any R_s,
 * which (u − V)/R_s is not when R_s is tiny). `guess`: a current near the answer (the previous
 * evaluation's at this point).
 */
export function diodeCurrentNewton(v: number, c: DiodeCircuit, guess?: number): number {
  prepare(c);
  const ds = c.diodes;
  const nd = ds.length;
  const rs = c.seriesResistance;
  const rsh = c.shuntResistance;
  const iph = c.photocurrent;
  // Outside the physical domain (a trial point beyond the bounds) the equation has no single root.
  if (!(nvtMin > 0 && rsh > 0 && sumI0 >= 0 && sumI0 < Infinity)) return Number.NaN;
  if (!(rs > 0)) {
    let i = iph - v / rsh;
    for (let k = 0; k < nd; k++) i -= ds[k].i0 * (Math.exp(Math.min(v * invNvt[k], EXP_CAP)) - 1);
    return i;
  }
  if (!(sumI0 > 0)) return (iph - v / rsh) / (1 + rs / rsh);
  const g = 1 / rsh + 1 / rs;
  let lo = Math.min(0, (iph + v / rs) / g);
  let hi = (iph + sumI0 + v / rs) / g;
  const lnALo = Math.log(iph + sumI0 - lo / rsh - (lo - v) / rs);
  for (let k = 0; k < nd; k++) {
    const bound = (lnALo - lnI0[k]) / invNvt[k];
    if (bound > lo && bound < hi) hi = bound;
  }
  let u = guess === undefined ? Number.NaN : v + guess * rs;
  if (!(u > lo && u <= hi)) u = hi;
  // Newton converges quadratically here (the error after a step is about (F''/2F')·step², with
  // F''/F' at most 1/(n·V_t)): a step below 1e-8·n·V_t leaves an error far below the last digit.
  const done = 1e-8 * nvtMin;
  for (let it = 0; it < 100 && hi - lo > 1e-6 * done; it++) {
    const a = iph + sumI0 - u / rsh - (u - v) / rs;
    if (!(a > 0)) {
      hi = u;
      u = 0.5 * (lo + hi);
      continue;
    }
    let b = 0;
    let db = 0;
    for (let k = 0; k < nd; k++) {
      const e = Math.exp(lnI0[k] + u * invNvt[k]);
      b += e;
      db += e * invNvt[k];
    }
    const f = a - b;
    if (f > 0) lo = u;
    else hi = u;
    let step = f / (g + db);
    // Deep on the exponential, right of the root: both Newton steps (on F and on φ) fall short of
    // it, so the longer one is taken (a short φ step near A = 0, where φ is steep, says nothing).
    if (b > 2 * a && Number.isFinite(b)) step = Math.min(step, (Math.log(a) - Math.log(b)) / (g / a + db / b));
    else if (!Number.isFinite(b)) {
      // B overflows: ln B and its slope by log-sum-exp.
      let top = -Infinity;
      for (let k = 0; k < nd; k++) top = Math.max(top, lnI0[k] + u * invNvt[k]);
      let sum = 0;
      let slope = 0;
      for (let k = 0; k < nd; k++) {
        const e = Math.exp(lnI0[k] + u * invNvt[k] - top);
        sum += e;
        slope += e * invNvt[k];
      }
      step = (Math.log(a) - top - Math.log(sum)) / (g / a + slope / sum);
    }
    if (Math.abs(step) <= done && Number.isFinite(b)) {
      // The current at u from the model equation, carried to u + step along its slope (the
      // second-order term is below the last digit at this step).
      return iph + sumI0 - b - u / rsh - (db + 1 / rsh) * step;
    }
    const next = u + step;
    u = next > lo && next < hi ? next : 0.5 * (lo + hi);
  }
  let i = iph - u / rsh;
  for (let k = 0; k < nd; k++) i -= ds[k].i0 * (Math.exp(Math.min(u * invNvt[k], EXP_CAP)) - 1);
  return i;
}

/** True-current and implicit-residual RMSE of a circuit on points (v, i), A. */
export function modelRmse(v: ArrayLike<number>, i: ArrayLike<number>, c: DiodeCircuit): { rmse: number; rmseImplicit: number } {
  const ex = new Float64Array(c.diodes.length);
  const fd = { f: 0, df: 0 };
  let ss = 0;
  let sf = 0;
  for (let k = 0; k < v.length; k++) {
    ss += (diodeCurrent(v[k], c, i[k]) - i[k]) ** 2;
    residualAt(v[k], i[k], c, ex, fd);
    sf += fd.f ** 2;
  }
  return { rmse: Math.sqrt(ss / v.length), rmseImplicit: Math.sqrt(sf / v.length) };
}

/** Model current at v: explicit for one diode, Newton for two. */
export function diodeCurrent(v: number, c: DiodeCircuit, guess?: number): number {
  if (c.diodes.length === 1) {
    const i = singleDiodeExplicit(v, c);
    if (Number.isFinite(i)) return i;
  }
  return diodeCurrentNewton(v, c, guess ?? c.photocurrent);
}

// ---- fitting --------------------------------------------------------------------------------

export type DiodeModel = 'single-diode' | 'double-diode';

export interface DiodeFitOptions {
  readonly model: DiodeModel;
  /** Cell or junction temperature, K (the ideality factors are tied to it). */
  readonly temperature: number;
  /** Fit a photocurrent (illuminated curve); otherwise I_ph = 0 (dark curve). */
  readonly illuminated: boolean;
  /**
   * 'current' (default): minimise the true-current residuals I_model(V) − I_measured.
   * 'implicit': minimise the model equation's residual f(V, I_measured) — the objective much of the
   * solar-cell literature uses; offered to reproduce published fits.
   */
  readonly objective?: 'current' | 'implicit';
  /** Bounds on the ideality factors (default [0.3, 10]; [1, 2] is common for two-diode fits). */
  readonly idealityBounds?: readonly [number, number];
  /**
   * Stop once 5 steps together lower the SSE by less than 1e-2 of the residual variance (for a
   * refinement from a nearby optimum, where what is left is a crawl along a valley the data hardly
   * determine).
   */
  readonly stall?: boolean;
}

export interface FittedParameter {
  readonly value: number;
  readonly stdErr: number;
  readonly unit: string;
}

export interface DiodeFit {
  readonly parameters: Record<string, FittedParameter>;
  /** √(mean (I_model(V) − I_measured)²), A: the true-current RMSE. */
  readonly rmse: number;
  /** √(mean f(V, I_measured)²), A: the implicit-residual RMSE at the same parameters. */
  readonly rmseImplicit: number;
  /** Σ ((I_model(V) − I_measured)·w)² over the fitted points: with weights 1/σ_I, a χ² of n − p degrees of freedom when the model holds. */
  readonly chi2: number;
  readonly iterations: number;
  readonly converged: boolean;
  readonly atBound: string[];
  readonly circuit: DiodeCircuit;
}

interface Layout {
  names: string[];
  units: string[];
  /** Which entries are fitted as logarithms (positivity). */
  log: boolean[];
}

function layout(model: DiodeModel, illuminated: boolean): Layout {
  const names: string[] = [];
  const units: string[] = [];
  const log: boolean[] = [];
  const add = (n: string, u: string, l: boolean) => {
    names.push(n);
    units.push(u);
    log.push(l);
  };
  if (illuminated) add('photocurrent', 'A', false);
  if (model === 'single-diode') {
    add('saturationCurrent', 'A', true);
    add('idealityFactor', '', false);
  } else {
    add('saturationCurrent1', 'A', true);
    add('idealityFactor1', '', false);
    add('saturationCurrent2', 'A', true);
    add('idealityFactor2', '', false);
  }
  add('seriesResistance', 'Ω', true);
  add('shuntResistance', 'Ω', true);
  return { names, units, log };
}

/**
 * Parameter vector → circuit. A diode's saturation current is carried as a = ln I₀ + V_ref/(n·V_t),
 * the log of its current at a reference bias: I₀ and n are strongly correlated (ln I₀ moves by
 * −V/(nV_t) when n moves), and this pair is nearly independent, so LM converges in far fewer steps.
 */
function circuitFrom(q: ArrayLike<number>, lay: Layout, vt: number, illuminated: boolean, vrefs: readonly number[]): DiodeCircuit {
  const val = (k: number) => (lay.log[k] ? Math.exp(q[k]) : q[k]);
  let k = 0;
  const iph = illuminated ? val(k++) : 0;
  const diodes: { i0: number; n: number }[] = [];
  const nd = lay.names.length - (illuminated ? 1 : 0) - 2;
  for (let d = 0; d < nd / 2; d++) {
    const a = q[k++];
    const n = q[k++];
    diodes.push({ i0: Math.exp(a - vrefs[d] / (n * vt)), n });
  }
  const rs = val(k++);
  const rsh = val(k++);
  return { photocurrent: iph, diodes, seriesResistance: rs, shuntResistance: rsh, vt };
}

export interface DiodeStart {
  readonly photocurrent: number;
  readonly diodes: readonly { i0: number; n: number }[];
  readonly seriesResistance: number;
  readonly shuntResistance: number;
}

/**
 * Fits the model to points (v, i) in the generator convention, with weights w (residual scale:
 * 1 for absolute current residuals, 1/|I| for relative ones), from one or more starting points;
 * the best (smallest weighted SSE) wins.
 */
export function fitDiodeModel(
  v: ArrayLike<number>,
  i: ArrayLike<number>,
  w: ArrayLike<number>,
  options: DiodeFitOptions,
  starts: readonly DiodeStart[],
): DiodeFit {
  const n = v.length;
  const lay = layout(options.model, options.illuminated);
  const m = lay.names.length;
  if (n < m + 1)
    throw new AnalysisError('TOO_FEW_POINTS', `${n} usable point${n === 1 ? '' : 's'} cannot determine the ${m} parameters of the ${options.model} model`);
  const vt = thermalVoltage(options.temperature);
  let vmax = 0;
  for (let k = 0; k < n; k++) vmax = Math.max(vmax, v[k]);
  // Reference biases: high for the first diode, lower for the second (recombination) one.
  const vrefs = [0.9 * vmax, 0.9 * vmax];
  const lastI = Float64Array.from(i);
  const ex = new Float64Array(2);
  const fd = { f: 0, df: 0 };
  const modelI = new Float64Array(n);
  // The Jacobian is always asked for at the point whose residuals were just computed: remember it.
  const lastQ = new Float64Array(m).fill(Number.NaN);
  let lastC: DiodeCircuit | undefined;
  const evaluate = (q: ArrayLike<number>) => {
    let same = lastC !== undefined;
    for (let k = 0; k < m && same; k++) if (q[k] !== lastQ[k]) same = false;
    if (same) return lastC as DiodeCircuit;
    const c = circuitFrom(q, lay, vt, options.illuminated, vrefs);
    for (let k = 0; k < m; k++) lastQ[k] = q[k];
    lastC = c;
    for (let k = 0; k < n; k++) {
      const x = diodeCurrent(v[k], c, lastI[k]);
      modelI[k] = x;
      if (Number.isFinite(x)) lastI[k] = x;
    }
    return c;
  };
  let smallestCurrent = Infinity;
  for (let k = 0; k < n; k++) if (i[k] !== 0) smallestCurrent = Math.min(smallestCurrent, Math.abs(i[k]));
  if (!Number.isFinite(smallestCurrent)) smallestCurrent = 1e-300;
  const nBounds = options.idealityBounds ?? [0.3, 10];
  const implicit = options.objective === 'implicit';
  const lower: number[] = [];
  const upper: number[] = [];
  lay.names.forEach((name, k) => {
    if (name.startsWith('idealityFactor')) {
      lower.push(nBounds[0]);
      upper.push(nBounds[1]);
    } else if (name === 'photocurrent') {
      lower.push(-Infinity);
      upper.push(Infinity);
    } else if (name.startsWith('saturation')) {
      // A diode whose current at V_ref (its largest in the range, give or take a factor 15) is
      // below a millionth of the smallest measured current is invisible everywhere: the floor keeps
      // a vanishing second diode on a bound (reported) instead of sliding to I₀ = 0, where its
      // Jacobian columns underflow and the fit stalls.
      lower.push(Math.log(1e-6 * smallestCurrent));
      upper.push(Infinity);
    } else if (lay.log[k]) {
      lower.push(Math.log(name === 'seriesResistance' ? 1e-9 : 1e-6));
      upper.push(Math.log(1e18));
    }
  });
  let best: ReturnType<typeof levenbergMarquardt> | undefined;
  // Several starts: a short run from each, then the best one is run to convergence.
  const short = starts.length > 1 ? 60 : 300;
  const tolerances = { xtol: 1e-8, ftol: 1e-11 };
  const runFrom = (p0: number[], maxIterations: number): ReturnType<typeof levenbergMarquardt> | undefined => {
    lastI.set(Array.from(i));
    lastC = undefined;
    try {
      return levenbergMarquardt(
        {
          n,
          p0,
          lower,
          upper,
          typical: p0.map((x, k) => (lay.log[k] ? 1 : Math.max(Math.abs(x), 1e-3))),
          residuals: (q, out) => {
            if (implicit) {
              const c = circuitFrom(q, lay, vt, options.illuminated, vrefs);
              for (let k = 0; k < n; k++) {
                residualAt(v[k], i[k], c, ex, fd);
                out[k] = fd.f * w[k];
              }
              return;
            }
            evaluate(q);
            for (let k = 0; k < n; k++) out[k] = (modelI[k] - i[k]) * w[k];
          },
          jacobian: (q, J, out) => {
            const c = implicit ? circuitFrom(q, lay, vt, options.illuminated, vrefs) : evaluate(q);
            void out;
            const nd = c.diodes.length;
            const rsh = c.shuntResistance;
            for (let k = 0; k < n; k++) {
              const ik = implicit ? i[k] : modelI[k];
              // True current: ∂I/∂p = −(∂f/∂p)/(∂f/∂I). Implicit residual: ∂f/∂p itself.
              residualAt(v[k], ik, c, ex, fd);
              const df = implicit ? -1 : fd.df;
              const u = v[k] + ik * c.seriesResistance;
              const row = k * m;
              // J = −(∂f/∂p)/(∂f/∂I)·(scale for log parameters)·weight, written column by column.
              const sc = -w[k] / df;
              let col = row;
              if (options.illuminated) J[col++] = sc;
              let dRs = -ik / rsh;
              for (let d = 0; d < nd; d++) {
                const dd = c.diodes[d];
                const e = ex[d];
                const dA = -(e - 1) * dd.i0; // ∂f/∂a = ∂f/∂I₀ · I₀
                J[col++] = sc * dA;
                // ∂f/∂n at fixed a: the explicit n dependence plus I₀'s through a.
                J[col++] = sc * ((dd.i0 * e * u) / (dd.n * dd.n * vt) + (dA * vrefs[d]) / (dd.n * dd.n * vt));
                dRs -= (dd.i0 * e * ik) / (dd.n * vt);
              }
              J[col++] = sc * dRs * c.seriesResistance;
              J[col] = (sc * u) / rsh; // ∂f/∂R_sh · R_sh = u/R_sh
            }
          },
        },
        { maxIterations, ...tolerances, ...(options.stall ? { stall: { iterations: 5, fraction: 1e-2 } } : {}) },
      );
    } catch (e) {
      if (e instanceof AnalysisError) return undefined;
      throw e;
    }
  };
  for (const s of starts) {
    const p0: number[] = [];
    if (options.illuminated) p0.push(s.photocurrent);
    s.diodes.forEach((d, j) => {
      const nn = Math.min(nBounds[1], Math.max(nBounds[0], d.n));
      p0.push(Math.log(Math.max(d.i0, 1e-300)) + vrefs[j] / (nn * vt), nn);
    });
    p0.push(Math.log(Math.max(s.seriesResistance, 1e-8)), Math.log(Math.max(s.shuntResistance, 1e-5)));
    const r = runFrom(p0, short);
    if (r && (!best || r.sse < best.sse)) best = r;
  }
  if (!best) throw new AnalysisError('BAD_INPUT', `the ${options.model} model could not be evaluated at any starting point`);
  if (!best.converged) {
    lastC = undefined;
    const more = runFrom(best.p, 300);
    if (more && more.sse <= best.sse) best = { ...more, iterations: more.iterations + best.iterations };
  }
  lastC = undefined;
  const c = evaluate(best.p);
  let ss = 0;
  let sf = 0;
  let chi2 = 0;
  for (let k = 0; k < n; k++) {
    ss += (modelI[k] - i[k]) ** 2;
    chi2 += ((modelI[k] - i[k]) * w[k]) ** 2;
    residualAt(v[k], i[k], c, ex, fd);
    sf += fd.f ** 2;
  }
  const parameters: Record<string, FittedParameter> = {};
  const cov = (a: number, b: number) => best.covariance[a * m + b];
  lay.names.forEach((name, k) => {
    if (name.startsWith('saturation')) {
      // ln I₀ = a − V_ref/(n·V_t): propagate through (a, n) with their covariance.
      const nn = best.p[k + 1];
      const vref = vrefs[name === 'saturationCurrent2' ? 1 : 0];
      const g = vref / (nn * nn * vt);
      const value = Math.exp(best.p[k] - vref / (nn * vt));
      const varLn = cov(k, k) + g * g * cov(k + 1, k + 1) + 2 * g * cov(k, k + 1);
      parameters[name] = { value, stdErr: value * Math.sqrt(Math.max(varLn, 0)), unit: lay.units[k] };
      return;
    }
    const value = lay.log[k] ? Math.exp(best.p[k]) : best.p[k];
    // Standard error of a log parameter: δp = p·δ(ln p).
    const se = lay.log[k] ? value * best.stdErr[k] : best.stdErr[k];
    parameters[name] = { value, stdErr: se, unit: lay.units[k] };
  });
  return {
    parameters,
    rmse: Math.sqrt(ss / n),
    rmseImplicit: Math.sqrt(sf / n),
    chi2,
    iterations: best.iterations,
    converged: best.converged,
    atBound: best.atBound.map((k) => lay.names[k]),
    circuit: c,
  };
}
