/**
 * The automatic fit window: among the contiguous runs of a linearized curve (x ascending, weights
 * 1/σ² from the noise model), the one that measures the slope best — the largest Σw(x − x̄)² (a
 * criterion that does not look at the slope itself, so the choice does not favour runs whose noise
 * steepened or flattened them) — while a straight line still describes it within the noise:
 *  1. χ² about the line below the 99.9 % point of χ² with n − 2 degrees of freedom, or twice the
 *     degrees of freedom (the relative noise is itself estimated from the sweep, to some ±20 %, so
 *     this only catches gross misfit: jumps, outliers, another regime);
 *  2. no curvature: the quadratic term of a weighted quadratic fit within 3.29 of its standard error
 *     (two-sided 0.1 %), the standard error scaled by the run's own scatter about the quadratic
 *     when that exceeds the noise model (a t test, so an underestimated noise does not cut runs
 *     short), and — on very long runs — a bend of at least 5 % of one reading's σ;
 *  3. the slope has the sign the mechanism needs (e.g. negative for Fowler–Nordheim), and the run
 *     passes the mechanism's own admissibility test when it has one (e.g. a current that rises
 *     faster than an ohmic leakage).
 * Runs are tried between at most ~100 grid boundaries (O(1) each from prefix sums), then the two
 * ends are refined point by point within one grid cell: O(n) in all, whatever n is.
 */
import { AnalysisError } from './errors.js';
import type { Numbers } from './line-fit.js';
import { WindowMoments } from './window-moments.js';

export interface WindowTest {
  readonly passed: boolean;
  readonly n: number;
  readonly chi2: number;
  readonly dof: number;
  readonly chi2Limit: number;
  /** Quadratic coefficient over its standard error. */
  readonly curvatureZ: number;
  /** Largest bend of the quadratic away from the line, y units. */
  readonly sag: number;
  /** Typical σ of one point, √(n/Σw), y units. */
  readonly sigmaTypical: number;
  readonly slopeOk: boolean;
  /** Why it failed, in words (undefined when it passed). */
  readonly failure?: string;
  readonly sxx: number;
  /** Σw(x − x̄)²: what the window search maximises. */
  readonly score: number;
}

export interface SearchOptions {
  readonly minPoints?: number;
  /** The sign the slope must have (+1 or −1); any when absent. */
  readonly slopeSign?: 1 | -1;
  /** Further test of a run's line (intercept, slope over start..end); failing runs are not admissible. */
  readonly admissible?: Admissible;
  /** Only runs that include this end of the points ('start': index 0, 'end': the last). */
  readonly anchor?: 'start' | 'end';
}

export interface AutoWindow {
  /** Inclusive index range into the points. */
  readonly start: number;
  readonly end: number;
  readonly passed: boolean;
  readonly test: WindowTest;
}

/** A mechanism's own test of a run's line: `ok` is cheap (called for every candidate), `why` words a failure. */
export interface Admissible {
  ok(start: number, end: number, intercept: number, slope: number): boolean;
  why(start: number, end: number, intercept: number, slope: number): string;
}

export const MIN_WINDOW_POINTS = 5;
const Z_CURVATURE = 3.2905267314919255;

/** Upper point of χ² with ν degrees of freedom for a normal quantile z (Wilson–Hilferty 1931). */
export function chiSquareUpper(nu: number, z: number): number {
  const c = 2 / (9 * nu);
  const t = 1 - c + z * Math.sqrt(c);
  return nu * t * t * t;
}

/** Straightness test of points start..end; `explain` words the failure (the search skips that). */
export function testRun(m: WindowMoments, start: number, end: number, slopeSign?: 1 | -1, admissible?: Admissible, explain = true): WindowTest {
  const line = m.line(start, end);
  const n = m.count(start, end);
  if (!line || n < 3) {
    return {
      passed: false,
      n,
      chi2: Infinity,
      dof: Math.max(0, n - 2),
      chi2Limit: 0,
      curvatureZ: 0,
      sag: 0,
      sigmaTypical: Infinity,
      slopeOk: false,
      failure: 'too few distinct points',
      sxx: 0,
      score: 0,
    };
  }
  const dof = n - 2;
  const chi2Limit = Math.max(chiSquareUpper(Math.max(1, dof), 3.090232306167813), 2 * dof);
  const sigmaTypical = Math.sqrt(n / line.sumW);
  const mk = (passed: boolean, curvatureZ: number, sag: number, slopeOk: boolean, failure: string | undefined): WindowTest => ({
    passed,
    n,
    chi2: line.chi2,
    dof,
    chi2Limit,
    curvatureZ,
    sag,
    sigmaTypical,
    slopeOk,
    failure,
    sxx: line.sxx,
    score: line.sxx,
  });
  const slopeOk = slopeSign === undefined || Math.sign(line.slope) === slopeSign;
  if (!slopeOk) return mk(false, 0, 0, false, 'the slope has the wrong sign for this mechanism');
  if (admissible && !admissible.ok(start, end, line.intercept, line.slope)) {
    return mk(false, 0, 0, false, explain ? admissible.why(start, end, line.intercept, line.slope) : 'inadmissible');
  }
  if (line.chi2 > chi2Limit) {
    return mk(
      false,
      0,
      0,
      true,
      explain ? `χ² ${line.chi2.toFixed(1)} for ${dof} degrees of freedom: the points scatter more than the noise allows` : 'scatter',
    );
  }
  const curv = m.curvature(start, end);
  const s2 = curv && n > 3 ? Math.max(1, curv.chi2 / (n - 3)) : 1;
  const curvatureZ = curv && curv.c2StdErr > 0 ? Math.abs(curv.c2) / (curv.c2StdErr * Math.sqrt(s2)) : 0;
  const sag = curv ? curv.sag : 0;
  const bends = curvatureZ > Z_CURVATURE && sag > 0.05 * sigmaTypical;
  return mk(
    !bends,
    curvatureZ,
    sag,
    true,
    bends ? (explain ? `the points bend away from a straight line (curvature ${curvatureZ.toFixed(1)} standard errors)` : 'bends') : undefined,
  );
}

const scratchLine = { n: 0, slope: 0, intercept: 0, chi2: 0, sxx: 0, sumW: 0, meanX: 0 };
const scratchCurv = { c2: 0, c2StdErr: 0, chi2: 0, sag: 0 };

/** testRun's verdict without allocating: the score (Σw(x − x̄)²) when the run passes, −1 otherwise. */
function passScore(m: WindowMoments, start: number, end: number, slopeSign?: 1 | -1, admissible?: Admissible): number {
  const line = scratchLine;
  if (!m.lineInto(start, end, line) || line.n < 3) return -1;
  if (slopeSign !== undefined && Math.sign(line.slope) !== slopeSign) return -1;
  if (admissible && !admissible.ok(start, end, line.intercept, line.slope)) return -1;
  const dof = line.n - 2;
  if (line.chi2 > Math.max(chiSquareUpper(Math.max(1, dof), 3.090232306167813), 2 * dof)) return -1;
  const curv = scratchCurv;
  if (m.curvatureInto(start, end, curv)) {
    const s2 = line.n > 3 ? Math.max(1, curv.chi2 / (line.n - 3)) : 1;
    const z = curv.c2StdErr > 0 ? Math.abs(curv.c2) / (curv.c2StdErr * Math.sqrt(s2)) : 0;
    if (z > Z_CURVATURE && curv.sag > 0.05 * Math.sqrt(line.n / line.sumW)) return -1;
  }
  return line.sxx;
}

/**
 * The best admissible window over points sorted by x. When no run passes, the run of at least
 * `minPoints` with the smallest χ² per degree of freedom comes back with passed = false.
 */
export function searchWindow(x: Numbers, y: Numbers, w: Numbers, options: SearchOptions = {}): AutoWindow {
  const n = x.length;
  const minPoints = Math.max(3, options.minPoints ?? MIN_WINDOW_POINTS);
  if (n < 3) throw new AnalysisError('TOO_FEW_POINTS', `an automatic window needs at least 3 points, got ${n}`);
  const m = new WindowMoments(x, y, w);
  const minP = Math.min(minPoints, n);
  const M = Math.min(n, 100);
  const grid: number[] = [];
  for (let j = 0; j <= M; j++) grid.push(Math.round((j * n) / M));
  let best: { s: number; e: number; score: number } | undefined;
  let fallback: { s: number; e: number; q: number } | undefined;
  for (let i = 0; i < M; i++) {
    if (options.anchor === 'start' && i > 0) break;
    for (let j = options.anchor === 'end' ? M : i + 1; j <= M; j++) {
      const s = grid[i];
      const e = grid[j] - 1;
      if (e - s + 1 < minP) continue;
      const score = passScore(m, s, e, options.slopeSign, options.admissible);
      if (score >= 0) {
        if (!best || score > best.score) best = { s, e, score };
      }
    }
  }
  if (!best) {
    // Nothing passes: the least bad run for the report (χ² per degree of freedom, curvature).
    for (let i = 0; i < M; i++) {
      for (let j = i + 1; j <= M; j++) {
        const s = grid[i];
        const e = grid[j] - 1;
        if (e - s + 1 < minP) continue;
        if ((options.anchor === 'start' && s !== 0) || (options.anchor === 'end' && e !== n - 1)) continue;
        const t = testRun(m, s, e, options.slopeSign, options.admissible, false);
        if (t.slopeOk && t.dof > 0) {
          const q = t.chi2 / t.dof + (t.curvatureZ > Z_CURVATURE ? t.curvatureZ : 0);
          if (!fallback || q < fallback.q) fallback = { s, e, q };
        }
      }
    }
  }
  if (!best) {
    const f = fallback ?? { s: 0, e: n - 1 };
    return { start: f.s, end: f.e, passed: false, test: testRun(m, f.s, f.e, options.slopeSign, options.admissible) };
  }
  // Refine the two ends point by point within one grid cell (coordinate ascent on the score).
  const cell = Math.ceil(n / M);
  let { s, e } = best;
  let bestScore = best.score;
  for (let pass = 0; pass < 2 && cell > 1; pass++) {
    let moved = false;
    for (let s2 = Math.max(0, s - cell); s2 <= Math.min(e - minP + 1, s + cell); s2++) {
      if (s2 === s || options.anchor === 'start') continue;
      const score = passScore(m, s2, e, options.slopeSign, options.admissible);
      if (score > bestScore) {
        bestScore = score;
        s = s2;
        moved = true;
      }
    }
    for (let e2 = Math.max(s + minP - 1, e - cell); e2 <= Math.min(n - 1, e + cell); e2++) {
      if (e2 === e || options.anchor === 'end') continue;
      const score = passScore(m, s, e2, options.slopeSign, options.admissible);
      if (score > bestScore) {
        bestScore = score;
        e = e2;
        moved = true;
      }
    }
    if (!moved) break;
  }
  return { start: s, end: e, passed: true, test: testRun(m, s, e, options.slopeSign, options.admissible) };
}
