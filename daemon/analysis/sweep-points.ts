/**
 * A whole sweep as the instrument recorded it, sorted into what can be analysed: readings that are
 * not numbers, showing breakdown (flagged), at compliance (flagged, at ≥ 99 % of a given limit, or detected as a current pinned
 * at the top of a branch), at zero bias (they belong to neither branch), and the two branches of
 * bias, each ordered by |bias|. The noise model (floor and relative part) is estimated here, once
 * per sweep, and every reason is counted.
 */
import type { AccuracySpec } from './accuracy.js';
import { AnalysisError } from './errors.js';
import { estimateFloor, floorLevel, MIN_RELATIVE, noiseFromAccuracy, type NoiseModel } from './noise-floor.js';
import { medianInPlace } from './select.js';

/** Points excluded for these reasons are counted under these names in every report. */
export const REASONS = {
  notFinite: 'not a finite number',
  compliance: 'at compliance',
  breakdown: 'showed breakdown (the device was no longer intact)',
  zeroBias: 'zero bias',
  oppositePolarity: 'opposite polarity',
  otherBranch: 'other polarity (analysed as its own branch)',
  floor: 'at the noise floor',
  againstBias: 'current flows against the bias',
  nonPositiveLog: 'non-positive value under a log',
  nonPositiveTemperature: 'non-positive temperature',
  expression: 'expression not a finite number',
  outsideWindow: 'outside the fit window',
  wayBack: 'on the way back of an out-and-back sweep (fitted apart)',
} as const;

/** Codes of the sweep-wide exclusions in SweepClasses.excluded. */
export const EXCLUDED = { none: 0, notFinite: 1, breakdown: 2, compliance: 3, zeroBias: 4 } as const;
/** The reason counted for each code of EXCLUDED. */
export const EXCLUSION_REASONS: readonly string[] = ['', REASONS.notFinite, REASONS.breakdown, REASONS.compliance, REASONS.zeroBias];

export interface SweepData {
  readonly x: ArrayLike<number>;
  readonly y: ArrayLike<number>;
  readonly compliance?: ArrayLike<number>;
  /** Non-zero at a reading that showed a confirmed breakdown. */
  readonly breakdown?: ArrayLike<number>;
}

export interface Branch {
  /** +1: positive bias (relative to the flat-band voltage), −1: negative. */
  readonly sign: 1 | -1;
  /** Reading indices in order of increasing |bias|. */
  readonly index: Int32Array;
  /** Readings with current along the bias and above the noise floor. */
  readonly signal: number;
  /** Largest |I| among them, A. */
  readonly maxCurrent: number;
}

export interface SweepClasses {
  readonly noise: NoiseModel;
  /** Notes on the floor estimate or detected compliance, for the report. */
  readonly notes: string[];
  /** Of those notes, the ones on a current found pinned at compliance (a fit that uses no floor reports these alone). */
  readonly pinnedNotes: string[];
  /** Per reading: 0 (EXCLUDED.none) usable, else the code of an exclusion that holds for every mechanism (its text: EXCLUSION_REASONS[code]). */
  readonly excluded: Uint8Array;
  readonly reasons: Record<string, number>;
  readonly positive: Branch;
  readonly negative: Branch;
  /** |bias| at or below this counts as zero bias, V. */
  readonly zeroTol: number;
}

export interface ClassifyOptions {
  readonly flatBand?: number;
  readonly complianceLimit?: number;
  readonly accuracy?: AccuracySpec;
  /** Relative noise when known from elsewhere (otherwise estimated later per mechanism). */
  readonly relative?: number;
  /**
   * Look for a current pinned at compliance that no flag marks (default true: the y column is a
   * current), on both branches or on the one named (an illuminated cell's reverse branch is its
   * photocurrent, flat by nature, and no sign of a limit).
   */
  readonly detectCompliance?: boolean | 'positive' | 'negative';
  /** The floor earlier sweeps of the same run measured (σ, A, from `readings` null readings); see FitRequest. */
  readonly knownFloor?: { readonly sigma: number; readonly readings: number };
}

/**
 * Index permutation sorting keys ascending, stable: natural merge sort over the runs already in
 * the data (a sweep is one run, out-and-back two), so sorted or reversed input costs O(n).
 */
export function sortedOrder(keys: ArrayLike<number>, idx: Int32Array): Int32Array {
  return idx.length < 2 ? idx : sortInPlace(keys, Int32Array.from(idx));
}

/** As sortedOrder, rearranging `a` itself (the result is `a` or a buffer of the same length). */
function sortInPlace(keys: ArrayLike<number>, input: Int32Array): Int32Array {
  let a: Int32Array = input;
  const n = a.length;
  if (n < 2) return a;
  // Find runs; reverse strictly descending ones.
  const starts: number[] = [0];
  let k = 0;
  while (k < n - 1) {
    let j = k;
    if (keys[a[j + 1]] < keys[a[j]]) {
      while (j < n - 1 && keys[a[j + 1]] < keys[a[j]]) j++;
      for (let lo = k, hi = j; lo < hi; lo++, hi--) {
        const t = a[lo];
        a[lo] = a[hi];
        a[hi] = t;
      }
    } else {
      while (j < n - 1 && keys[a[j + 1]] >= keys[a[j]]) j++;
    }
    k = j + 1;
    if (k < n) starts.push(k);
  }
  if (starts.length === 1) return a;
  let runs = starts.concat([n]);
  let b: Int32Array = new Int32Array(n);
  while (runs.length > 2) {
    const next: number[] = [0];
    for (let r = 0; r + 1 < runs.length; r += 2) {
      const lo = runs[r];
      const mid = runs[r + 1];
      const hi = r + 2 < runs.length ? runs[r + 2] : mid;
      let i = lo;
      let j = mid;
      let o = lo;
      while (i < mid && j < hi) b[o++] = keys[a[j]] < keys[a[i]] ? a[j++] : a[i++];
      while (i < mid) b[o++] = a[i++];
      while (j < hi) b[o++] = a[j++];
      next.push(hi);
    }
    const t = a;
    a = b;
    b = t;
    runs = next;
  }
  return a;
}

/** Sorts the readings of a sweep into branches and estimates its noise floor. */
export function classifySweep(data: SweepData, options: ClassifyOptions = {}): SweepClasses {
  const n = data.x.length;
  if (data.y.length !== n) throw new AnalysisError('BAD_INPUT', `x and y columns differ in length (${n}, ${data.y.length})`);
  const x = data.x;
  const y = data.y;
  const vfb = options.flatBand ?? 0;
  const limit = options.complianceLimit;
  const excluded = new Uint8Array(n);
  const absBias = new Float64Array(n);
  const maxBias = biasMagnitudes(x, vfb, absBias);
  const zeroTol = 1e-4 * maxBias;
  const complianceAt = limit === undefined ? Infinity : 0.99 * limit;
  const notes: string[] = [];
  const pinnedNotes: string[] = [];
  // Exclusions that hold for every mechanism, and branch membership by the sign of the bias: the
  // positive branch fills `members` from the front, the negative one from the back.
  const members = new Int32Array(n);
  const split = sortReadings(x, y, vfb, zeroTol, complianceAt, data.compliance, data.breakdown, absBias, excluded, members);
  const np = split[0];
  const nn = split[1];
  const negMembers = members.subarray(n - nn).reverse();
  const posIdx = sortInPlace(absBias, members.subarray(0, np));
  const negIdx = sortInPlace(absBias, negMembers);
  // Compliance that no flag or limit told us about: a current pinned at its largest value over the
  // highest biases of a branch (an SMU at its limit reads the limit while the bias it is asked for rises).
  for (const [idx, name] of [
    [posIdx, 'positive'],
    [negIdx, 'negative'],
  ] as const) {
    if (options.detectCompliance === false) break;
    if (options.detectCompliance !== undefined && options.detectCompliance !== true && options.detectCompliance !== name) continue;
    const pinned = detectPinned(data, idx, absBias);
    if (pinned.length) {
      for (const k of pinned) excluded[k] = EXCLUDED.compliance;
      const level = Math.abs(y[pinned[0]]);
      pinnedNotes.push(
        `${pinned.length} reading${pinned.length > 1 ? 's' : ''} at the top of the ${name} branch ${pinned.length > 1 ? 'are' : 'is'} pinned at ${level.toPrecision(4)} A (the branch's largest current, held while the bias rises or read as a round value): taken as compliance (the readings carry no compliance flag and no compliance limit was given)`,
      );
    }
  }
  notes.push(...pinnedNotes);
  // Counted by reason, the reasons in the order they first occur in the sweep. Noise floor from the
  // null readings: zero bias, and each branch from zero bias up to its last reading against the
  // bias (while at least a fifth of the readings so far are against it).
  const counts = new Int32Array(EXCLUSION_REASONS.length);
  const firstAt = new Int32Array(EXCLUSION_REASONS.length).fill(-1);
  const zero: number[] = [];
  const low: number[] = [];
  const signal = tally(excluded, y, counts, firstAt, zero);
  const reasons: Record<string, number> = {};
  const codes = [...counts.keys()].filter((c) => counts[c] > 0).sort((a, b) => firstAt[a] - firstAt[b]);
  for (const c of codes) reasons[EXCLUSION_REASONS[c]] = counts[c];
  for (const [idx, sign] of [
    [posIdx, 1],
    [negIdx, -1],
  ] as const) {
    let against = 0;
    let last = -1;
    let seen = 0;
    const all: number[] = [];
    for (let j = 0; j < idx.length; j++) {
      const k = idx[j];
      if (excluded[k] !== EXCLUDED.none) continue;
      seen++;
      if (y[k] * sign < 0) {
        against++;
        all.push(y[k]);
        if (against >= 0.1 * seen) last = j;
      }
    }
    const before = low.length;
    for (let j = 0; j <= last; j++) if (excluded[idx[j]] === EXCLUDED.none) low.push(y[idx[j]]);
    // Too few in the run from zero bias: the readings against the bias alone.
    if (low.length - before < 3 && all.length >= 3) {
      // No spread into splice: a long noisy floor holds more readings than a call has arguments.
      low.length = before;
      for (const v of all) low.push(v);
    }
  }
  let est = estimateFloor(zero, low, signal);
  if (est?.note) notes.push(est.note);
  const known = options.knownFloor;
  let earlier = false;
  if (!est && known && known.sigma > 0 && known.readings >= 3) {
    // A sweep that starts where the current already flows (a later sweep of an adaptive plan) reads
    // no null readings of its own; the instrument's floor is the one its earlier sweeps measured.
    est = { sigma: known.sigma, n: known.readings };
    earlier = true;
    notes.push(
      `this sweep reads no current at zero bias or against it: the noise floor (${known.sigma.toPrecision(3)} A) is the one earlier sweeps of the run measured`,
    );
  }
  if (!est) {
    // Too few readings against the bias or at zero bias: the scatter of the lowest-bias readings
    // about the straight interpolation of their neighbours (a leakage there is nearly linear in V).
    const r: number[] = [];
    const lowest: number[] = [];
    for (const idx of [posIdx, negIdx]) {
      // The low plateau: the first readings of the branch whose |I| stays within 30× the smallest
      // of its first eight usable readings.
      const first: number[] = [];
      for (let j = 0; j < idx.length && first.length < 8; j++) if (excluded[idx[j]] === EXCLUDED.none) first.push(idx[j]);
      let min = Infinity;
      for (const k of first) min = Math.min(min, Math.abs(y[k]) || Infinity);
      const ks: number[] = [];
      for (const k of first) {
        if (!(Math.abs(y[k]) <= 30 * min)) break;
        ks.push(k);
      }
      lowest.push(...ks);
      for (let j = 1; j + 1 < ks.length; j++) {
        const [a, b, c] = [ks[j - 1], ks[j], ks[j + 1]];
        const span = x[c] - x[a];
        if (!(span !== 0)) continue;
        const f = (x[b] - x[a]) / span;
        const interp = y[a] + f * (y[c] - y[a]);
        r.push((y[b] - interp) / Math.sqrt(1 + f * f + (1 - f) * (1 - f)));
      }
    }
    if (r.length >= 3) {
      const med = medianInPlace(Float64Array.from(r, (e) => e * e));
      const sigma = Math.sqrt(med / 0.454936423119572);
      // A scatter of a few percent of the currents themselves is their relative noise, not a floor;
      // residuals all of one sign are the bend of a smooth curve, not noise.
      const cur = lowest.map((k) => Math.abs(y[k])).sort((a, b) => a - b);
      let plus = 0;
      for (const e of r) if (e > 0) plus++;
      const mixed = Math.min(plus, r.length - plus) >= 0.25 * r.length;
      if (mixed && sigma >= 0.1 * cur[cur.length >> 1]) {
        est = { sigma, n: r.length + 2 };
        notes.push(
          `few readings lie at zero bias or against the bias: the noise floor (${sigma.toPrecision(3)} A) comes from the scatter of the lowest-bias readings`,
        );
      } else {
        notes.push(`no reading reaches the noise floor: even the lowest-bias readings (${cur[0].toPrecision(3)} A and up) follow a smooth curve`);
      }
    }
  }
  let noise: NoiseModel;
  if (options.accuracy) noise = noiseFromAccuracy(options.accuracy, est && est.sigma > 0 ? est.sigma : undefined, est?.n ?? 0);
  else {
    noise = {
      floor: est?.sigma ?? 0,
      relative: options.relative ?? MIN_RELATIVE,
      floorSource: est && est.sigma > 0 ? (earlier ? 'earlier sweeps' : 'readings') : 'not reached',
      floorReadings: est?.n ?? 0,
      relativeSource: 'scatter',
    };
  }
  const level = floorLevel(noise);
  return {
    noise,
    notes,
    pinnedNotes,
    excluded,
    reasons,
    positive: branchOf(1, posIdx, excluded, y, level),
    negative: branchOf(-1, negIdx, excluded, y, level),
    zeroTol,
  };
}

// The passes over every reading are small functions of their own: V8 optimises a small function
// quickly, where a long loop inside a large one runs unoptimised (allocating a heap number per
// arithmetic result) until the whole function has been compiled for that loop.

/** |bias| of every reading into `out`; returns the largest finite one. */
function biasMagnitudes(x: ArrayLike<number>, vfb: number, out: Float64Array): number {
  let maxBias = 0;
  for (let k = 0; k < out.length; k++) {
    const b = Math.abs(x[k] - vfb);
    out[k] = b;
    if (b > maxBias && Number.isFinite(b)) maxBias = b;
  }
  return maxBias;
}

/**
 * The exclusion code of every reading into `excluded`; the usable ones into `members`, positive
 * bias from the front, negative from the back (returns the two counts).
 */
function sortReadings(
  x: ArrayLike<number>,
  y: ArrayLike<number>,
  vfb: number,
  zeroTol: number,
  complianceAt: number,
  flagged: ArrayLike<number> | undefined,
  broken: ArrayLike<number> | undefined,
  absBias: Float64Array,
  excluded: Uint8Array,
  members: Int32Array,
): [number, number] {
  const n = excluded.length;
  let np = 0;
  let nn = 0;
  for (let k = 0; k < n; k++) {
    const v = x[k];
    const i = y[k];
    let code: number = EXCLUDED.none;
    if (!Number.isFinite(v) || !Number.isFinite(i)) code = EXCLUDED.notFinite;
    else if (broken?.[k]) code = EXCLUDED.breakdown;
    else if (flagged?.[k] || Math.abs(i) >= complianceAt) code = EXCLUDED.compliance;
    else if (absBias[k] <= zeroTol) code = EXCLUDED.zeroBias;
    if (code !== EXCLUDED.none) excluded[k] = code;
    else if (v - vfb > 0) members[np++] = k;
    else members[n - 1 - nn++] = k;
  }
  return [np, nn];
}

/** Counts each exclusion code and where it first occurs, collects the zero-bias currents; returns the largest usable |I|. */
function tally(excluded: Uint8Array, y: ArrayLike<number>, counts: Int32Array, firstAt: Int32Array, zero: number[]): number {
  let signal = 0;
  for (let k = 0; k < excluded.length; k++) {
    const code = excluded[k];
    if (code === EXCLUDED.none) {
      const a = Math.abs(y[k]);
      if (a > signal) signal = a;
      continue;
    }
    if (counts[code]++ === 0) firstAt[code] = k;
    if (code === EXCLUDED.zeroBias) zero.push(y[k]);
  }
  return signal;
}

/** A branch from its readings in |bias| order: the usable ones (compacted in `idx` itself, then copied), and its signal. */
function branchOf(sign: 1 | -1, idx: Int32Array, excluded: Uint8Array, y: ArrayLike<number>, level: number): Branch {
  let signal = 0;
  let maxCurrent = 0;
  let m = 0;
  for (let j = 0; j < idx.length; j++) {
    const k = idx[j];
    if (excluded[k] !== EXCLUDED.none) continue;
    idx[m++] = k;
    const s = y[k] * sign;
    if (s > level && s > 0) {
      signal++;
      if (s > maxCurrent) maxCurrent = s;
    }
  }
  // A view when little was dropped (the usual case), else a copy that lets the rest go.
  return { sign, index: m > 0.9 * idx.length ? idx.subarray(0, m) : idx.slice(0, m), signal, maxCurrent };
}

function detectPinned(data: SweepData, idx: Int32Array, absBias: Float64Array): number[] {
  const m = idx.length;
  if (m < 3) return [];
  const y = data.y;
  let top = 0;
  for (let j = 0; j < m; j++) top = Math.max(top, Math.abs(y[idx[j]]));
  if (!(top > 0)) return [];
  const tol = 2e-3 * top;
  const near: number[] = [];
  for (let j = 0; j < m; j++) if (top - Math.abs(y[idx[j]]) <= tol) near.push(j);
  // They must be the highest biases of the branch.
  const first = near[0];
  for (let j = first; j < m; j++) if (top - Math.abs(data.y[idx[j]]) > tol) return [];
  const ks = near.map((j) => idx[j]);
  // A run of readings held at the top while the bias asked for rises.
  const bLo = absBias[idx[first]];
  const bHi = absBias[idx[m - 1]];
  if (near.length >= 2 && bHi - bLo > 1e-3 * bHi) return ks;
  // Readings at the top bias that read exactly the same round current (three significant digits
  // or fewer), in a file whose other readings carry more digits: the instrument's limit.
  const round = (a: number) => Number(a.toPrecision(3)) === a;
  const v0 = Math.abs(data.y[ks[0]]);
  if (!round(v0) || ks.some((k) => Math.abs(data.y[k]) !== v0)) return [];
  let fine = 0;
  for (let j = 0; j < m; j++) if (!round(Math.abs(y[idx[j]]))) fine++;
  return fine >= 0.8 * (m - ks.length) ? ks : [];
}

/**
 * The branches to analyse for a mechanism: `forwardOnly` (a diode) takes the branch that carries the
 * larger current; otherwise every branch with at least `minSignal` readings above the floor, first
 * the one that carries ten times the other's current if either does (a forward branch), else the
 * one with more readings above the floor (positive on a near tie).
 */
export function chooseBranches(c: SweepClasses, forwardOnly: boolean, minSignal = 5): Branch[] {
  const p = c.positive;
  const q = c.negative;
  if (forwardOnly) return [q.maxCurrent > p.maxCurrent ? q : p];
  const withSignal = [p, q].filter((b) => b.signal >= minSignal);
  if (withSignal.length === 0) return [p.index.length >= q.index.length ? p : q];
  if (withSignal.length === 1) return withSignal;
  if (q.maxCurrent > 10 * p.maxCurrent) return [q, p];
  if (p.maxCurrent > 10 * q.maxCurrent) return [p, q];
  return q.signal > 1.1 * p.signal ? [q, p] : [p, q];
}

/**
 * Whether every reading sits at one bias (a constant-stress interval): no current–voltage curve to
 * fit or draw against the bias. Readings `skip` names (at compliance or at breakdown) do not count:
 * there the source no longer holds its bias, and the collapsed voltage of a breakdown would make a
 * stress interval look like a sweep.
 */
export function atOneBias(v: ArrayLike<number>, skip?: (k: number) => boolean): boolean {
  let lo = Infinity;
  let hi = -Infinity;
  for (let k = 0; k < v.length; k++) {
    if (skip?.(k)) continue;
    if (v[k] < lo) lo = v[k];
    if (v[k] > hi) hi = v[k];
  }
  if (!(hi >= lo)) return true;
  return hi - lo <= 1e-3 * Math.max(1, Math.abs(hi), Math.abs(lo));
}

/** Fewest readings on the way back for a sweep to count as out-and-back. */
const MIN_WAY_BACK = 5;

/**
 * An out-and-back sweep, in the order the readings were taken: the first pass (each reading that
 * takes the bias beyond every level before it; a level read again at once, within 0.1 % of the
 * span, counts with its pass) and the way back (readings over levels already passed). Undefined when there is no
 * way back: fewer than MIN_WAY_BACK readings over at least a fifth of the span, a way back in more
 * than three stretches, or one that turns to and fro (an adaptive sweep returns to levels it chose:
 * that is one curve sampled in its own order, not two legs). A film that traps charge or heats gives two
 * curves, one each way (hysteresis): fitted as one, they make an average whose scatter is the gap
 * between them.
 */
export function sweepLegs(x: ArrayLike<number>): { out: number[]; back: number[] } | undefined {
  let lo = Infinity;
  let hi = -Infinity;
  for (let k = 0; k < x.length; k++) {
    if (!Number.isFinite(x[k])) continue;
    lo = Math.min(lo, x[k]);
    hi = Math.max(hi, x[k]);
  }
  const span = hi - lo;
  if (!(span > 0)) return undefined;
  const tol = 1e-3 * span;
  const out: number[] = [];
  const back: number[] = [];
  let runLo = Infinity;
  let runHi = -Infinity;
  let stretches = 0;
  let backLo = Infinity;
  let backHi = -Infinity;
  for (let k = 0; k < x.length; k++) {
    const v = x[k];
    if (!Number.isFinite(v)) {
      out.push(k);
      continue;
    }
    // Beyond every level before it, or a repeat of the level just read on the first pass.
    const prevOut = out.length > 0 && out[out.length - 1] === k - 1;
    if (v > runHi + tol || v < runLo - tol || (prevOut && (v >= runHi - tol || v <= runLo + tol))) {
      out.push(k);
    } else {
      if (back.length === 0 || back[back.length - 1] !== k - 1) stretches++;
      back.push(k);
      backLo = Math.min(backLo, v);
      backHi = Math.max(backHi, v);
    }
    runLo = Math.min(runLo, v);
    runHi = Math.max(runHi, v);
  }
  if (back.length < MIN_WAY_BACK || backHi - backLo < 0.2 * span || stretches > 3) return undefined;
  // A way back moves steadily back: an adaptive fill after the top also reads below levels passed,
  // but goes to and fro between the levels it chose.
  let turns = 0;
  let dir = 0;
  for (let j = 1; j < back.length; j++) {
    if (back[j] !== back[j - 1] + 1) {
      dir = 0;
      continue;
    }
    const d = x[back[j]] - x[back[j - 1]];
    if (Math.abs(d) <= tol) continue;
    if (dir !== 0 && Math.sign(d) !== dir) turns++;
    dir = Math.sign(d);
  }
  if (turns > 0.1 * back.length) return undefined;
  return { out, back };
}
