/**
 * Mechanism ranking for one I–V dataset, on the whole sweep as recorded. Each ranked mechanism is
 * fitted on its own admissible window (its automatic window, with leakage and series terms where they
 * matter; or the user's window), and all of them are then judged on a common footing: the same
 * points — every reading of the branch above the noise floor and below compliance (or inside the
 * user's window) — and the same noise model, by the noise-weighted residuals of ln I of each
 * mechanism's fitted model at those points. The criterion is the small-sample quasi-likelihood
 * Akaike criterion QAICc = χ²/ĉ + 2k + 2k(k+1)/(n−k−1), with ĉ = max(1, smallest χ²/(n−k)) the
 * overdispersion of the best model (Burnham & Anderson, Model Selection and Multimodel Inference,
 * 2002, §2.4 and §6.2). Akaike weights over every fitted mechanism sum to 1. Mechanisms whose
 * parameters fail a physical check are listed after the plausible ones, with their weight and
 * reasons; when such a mechanism holds most of the weight, the ranking says so.
 */
import type { AccuracySpec } from './accuracy.js';
import { analyzeDetailed, pick, type DetailedFit, type IVData, type WindowRequest } from './analyze.js';
import type { Inputs, ParameterValue } from './mechanism.js';
import { fmt } from './mechanism.js';
import { MECHANISMS } from './mechanisms/index.js';
import { floorLevel, lnSigma, MIN_RELATIVE } from './noise-floor.js';
import { chooseBranches, classifySweep, REASONS, sweepLegs } from './sweep-points.js';

export interface RankEntry {
  readonly model: string;
  readonly title: string;
  /** Akaike weight, 0–1; the weights of all ranked mechanisms sum to 1. */
  readonly score: number;
  readonly aicc: number;
  readonly deltaAicc: number;
  /** Root-mean-square residual of ln I over the common points (0.01 ≈ 1 % scatter). */
  readonly rmsLnResidual: number;
  /** Number of fitted parameters (2 for the line, plus leakage or series terms). */
  readonly parameterCount: number;
  readonly plausible: boolean;
  /** The physical checks that failed (their warnings), the deciding one first; empty when plausible. */
  readonly failed: readonly string[];
  readonly parameters: Record<string, ParameterValue>;
  /** Why `parameters` is empty, when it is (a line whose slope has the wrong sign for the mechanism gives none). */
  readonly noParameters?: string;
  /** The mechanism's own window (data's x). */
  readonly window: { from: number; to: number };
  readonly reasons: string[];
}

export interface Ranking {
  readonly ranking: RankEntry[];
  readonly skipped: { model: string; reason: string }[];
  readonly points: { used: number; excluded: number; reasons: Record<string, number> };
  readonly warnings: string[];
  /** What the sweep-wide classification found (compliance detected, how the floor was estimated). */
  readonly notes: string[];
  /** The branch ranked, and the noise model the residuals are weighed with. */
  readonly branch: 'positive' | 'negative';
  readonly noise: { floor: number; relative: number };
}

export interface RankRequest {
  readonly inputs?: Inputs;
  readonly window?: WindowRequest;
  readonly accuracy?: AccuracySpec;
  readonly complianceLimit?: number;
}

interface Scored {
  model: string;
  title: string;
  chi2: number;
  k: number;
  rms: number;
  fit: DetailedFit;
  lnPred: Float64Array;
}

/** Ranking looks at most at this many readings (every k-th of a longer sweep). */
const RANK_MAX_READINGS = 100000;

export function rankMechanisms(input: IVData, request: RankRequest = {}): Ranking {
  // A very long sweep is ranked on every k-th reading: the comparison of mechanisms does not need
  // more, and the cost stays near linear.
  const total = input.x.length;
  const stride = Math.max(1, Math.ceil(total / RANK_MAX_READINGS));
  const strided: IVData =
    stride === 1
      ? input
      : {
          x: pickEvery(input.x, stride),
          y: pickEvery(input.y, stride),
          compliance: input.compliance ? pickEvery(input.compliance, stride) : undefined,
        };
  // An out-and-back sweep is ranked on its first pass, as it is fitted (analyze.ts): the way back
  // may be another curve (hysteresis).
  const legs = sweepLegs(strided.x);
  const data = legs ? pick(strided, legs.out) : strided;
  const flatBand = request.inputs?.flatBand ?? 0;
  const classes = classifySweep(data, { flatBand, complianceLimit: request.complianceLimit, accuracy: request.accuracy });
  const branch = chooseBranches(classes, false)[0];
  const level = floorLevel(classes.noise);
  // The common points: the branch's readings above the floor with current along the bias.
  const manual = typeof request.window === 'object' ? request.window : undefined;
  const lo = manual ? Math.min(manual.from ?? -Infinity, manual.to ?? Infinity) : -Infinity;
  const hi = manual ? Math.max(manual.from ?? -Infinity, manual.to ?? Infinity) : Infinity;
  const reasons: Record<string, number> = { ...classes.reasons };
  const count = (r: string) => (reasons[r] = (reasons[r] ?? 0) + 1);
  const other = branch.sign > 0 ? classes.negative : classes.positive;
  if (other.index.length) reasons[REASONS.oppositePolarity] = other.index.length;
  const common: number[] = [];
  for (const k of branch.index) {
    const s = data.y[k] * branch.sign;
    if (Math.abs(data.y[k]) < level) count(REASONS.floor);
    else if (s <= 0) count(REASONS.againstBias);
    else if (data.x[k] < lo || data.x[k] > hi) count(REASONS.outsideWindow);
    else common.push(k);
  }
  const n = common.length;
  const skipped: { model: string; reason: string }[] = [];
  const scored: Scored[] = [];
  let relative = Infinity;
  for (const mech of MECHANISMS.filter((m) => m.ranked)) {
    const missing = mech.requires.filter((k) => request.inputs?.[k] === undefined);
    if (missing.length) {
      skipped.push({ model: mech.id, reason: `needs ${missing.join(', ')}` });
      continue;
    }
    try {
      const fit = analyzeDetailed(data, {
        model: mech.id,
        inputs: request.inputs,
        window: request.window ?? 'auto',
        accuracy: request.accuracy,
        complianceLimit: request.complianceLimit,
        polarity: branch.sign,
        eachBranch: false,
        regimes: false,
        classes,
      });
      relative = Math.min(relative, fit.fit.noise.relative);
      scored.push({
        model: mech.id,
        title: mech.title,
        chi2: 0,
        k: 2 + (fit.fit.terms.leakage ? 1 : 0) + (fit.fit.terms.series ? 1 : 0),
        rms: 0,
        fit,
        lnPred: predictLn(fit, data, common, branch.sign),
      });
    } catch (e) {
      skipped.push({ model: mech.id, reason: (e as Error).message });
    }
  }
  const noise = {
    floor: classes.noise.floor,
    relative: request.accuracy ? Math.max(request.accuracy.gain, MIN_RELATIVE) : Number.isFinite(relative) ? relative : 0.01,
  };
  for (const s of scored) {
    let chi2 = 0;
    let ss = 0;
    for (let q = 0; q < n; q++) {
      const k = common[q];
      const obs = Math.log(Math.abs(data.y[k]));
      const pred = s.lnPred[q];
      const d = Number.isFinite(pred) ? Math.max(-10, Math.min(10, obs - pred)) : 10;
      const sg = lnSigma(noise, data.y[k]);
      chi2 += (d * d) / (sg * sg);
      ss += d * d;
    }
    s.chi2 = chi2;
    s.rms = n ? Math.sqrt(ss / n) : 0;
  }
  let chat = Infinity;
  for (const s of scored) if (n > s.k) chat = Math.min(chat, s.chi2 / (n - s.k));
  chat = Number.isFinite(chat) ? Math.max(1, chat) : 1;
  const aicc = (s: Scored) => s.chi2 / chat + 2 * s.k + (2 * s.k * (s.k + 1)) / Math.max(1, n - s.k - 1);
  const values = scored.map(aicc);
  const minA = Math.min(...values);
  const rel = values.map((a) => Math.exp(-0.5 * (a - minA)));
  const weightSum = rel.reduce((a, b) => a + b, 0) || 1;
  const entries: RankEntry[] = scored.map((s, q) => {
    const r = s.fit.report;
    const why: string[] = [
      `noise-weighted χ² ${fmt(s.chi2)} over the ${n} common points (${fmt(s.chi2 / Math.max(1, n - s.k))} per degree of freedom; RMS residual of ln I ${fmt(s.rms)}), ${s.k} parameters, own window ${fmt(r.window.from)} to ${fmt(r.window.to)} V`,
    ];
    if (!r.plausible) why.push('ranked after the plausible mechanisms: a physical check failed');
    const slopeSign = s.fit.mechanism.slopeSign;
    const noParameters =
      Object.keys(r.parameters).length > 0
        ? undefined
        : slopeSign !== undefined && !(Math.sign(s.fit.fit.line.slope) === slopeSign)
          ? 'none: the slope has the wrong sign for this mechanism, so no parameter follows from it'
          : `none: ${s.fit.fit.extraction.failed?.[0] ?? 'the mechanism gives none from this fit'}`;
    return {
      model: s.model,
      title: s.title,
      score: rel[q] / weightSum,
      aicc: values[q],
      deltaAicc: values[q] - minA,
      rmsLnResidual: s.rms,
      parameterCount: s.k,
      plausible: r.plausible,
      failed: r.plausible ? [] : [...s.fit.failed],
      parameters: r.parameters,
      ...(noParameters ? { noParameters } : {}),
      window: { from: r.window.from, to: r.window.to },
      reasons: [...why, ...r.notes.filter((t) => !classes.notes.includes(t)), ...r.warnings.filter((t) => !classes.notes.includes(t))],
    };
  });
  // Ties: the same straight line (hopping and diode are both ln J against V), or within 2 of each other.
  for (const a of entries) {
    for (const b of entries) {
      if (a === b) continue;
      const d = Math.abs(a.aicc - b.aicc);
      if (d > 2) continue;
      const same = Math.abs(a.aicc - b.aicc) <= 1e-6 * Math.max(1, Math.abs(a.aicc));
      const told =
        a.plausible !== b.plausible
          ? `told apart by the physical checks (${a.plausible ? a.model : b.model} passes them, ${a.plausible ? b.model : a.model} does not)`
          : a.plausible
            ? 'both pass the physical checks: a tie these data cannot resolve'
            : 'neither passes the physical checks';
      a.reasons.splice(1, 0, same ? `same straight line as '${b.model}': ${told}` : `within ${d.toFixed(1)} of '${b.model}' in AICc: ${told}`);
    }
  }
  entries.sort((a, b) => (a.plausible === b.plausible ? a.aicc - b.aicc : a.plausible ? -1 : 1));
  const warnings: string[] = [...classes.notes.filter((t) => /too large to be noise/.test(t))];
  if (stride > 1) warnings.push(`the sweep's ${total} readings were ranked on every ${stride}th (${data.x.length} readings)`);
  const best = entries.reduce<RankEntry | undefined>((m, e) => (!m || e.score > m.score ? e : m), undefined);
  if (best && !best.plausible && best.score > 0.5) {
    const plausible = entries.find((e) => e.plausible);
    warnings.push(
      `'${best.model}' fits best (weight ${fmt(best.score)}) but fails a physical check (${best.failed[0] ?? 'see its reasons'})${plausible ? `; the best plausible mechanism is '${plausible.model}' (weight ${fmt(plausible.score)})` : '; no mechanism passes the physical checks'}`,
    );
  }
  const top = scored.find((s) => s.model === entries[0]?.model);
  if (top && n > top.k && top.chi2 / (n - top.k) > 4) {
    warnings.push(
      `no mechanism describes every common point within the noise (best χ²/dof ${fmt(top.chi2 / (n - top.k))}): the sweep may hold more than one regime; rank within one: give a window (--from/--to, or the window on the page)`,
    );
  }
  const excluded = Object.values(reasons).reduce((a, b) => a + b, 0);
  return {
    ranking: entries,
    skipped,
    points: { used: n, excluded, reasons },
    warnings,
    notes: [
      ...classes.notes.filter((t) => !/too large to be noise/.test(t)),
      ...(legs
        ? [`an out-and-back sweep: ranked on the ${legs.out.length} readings of the first pass (the ${legs.back.length} on the way back left out)`]
        : []),
    ],
    branch: branch.sign > 0 ? 'positive' : 'negative',
    noise,
  };
}

/** ln of the current each mechanism's fitted model predicts at the common readings, A. */
function predictLn(fit: DetailedFit, data: IVData, common: number[], sign: 1 | -1): Float64Array {
  const { mechanism: mech, inputs } = fit;
  const L = fit.fit.line;
  const area = mech.usesArea && inputs.area !== undefined ? inputs.area : 1;
  const g = fit.fit.terms.leakage?.conductance ?? 0;
  const rs = fit.fit.terms.series?.resistance ?? 0;
  const out = new Float64Array(common.length);
  for (let q = 0; q < common.length; q++) {
    const k = common[q];
    const b = (data.x[k] - inputs.flatBand) * sign;
    const meas = Math.abs(data.y[k]);
    let cur: number;
    if (mech.series) {
      const vp = b - meas * rs;
      cur = Math.exp(L.intercept) * Math.expm1(L.slope * vp) + g * vp;
    } else if (mech.yKind === 'log') {
      const off = mech.lnOffset ? mech.lnOffset(b, inputs) : 0;
      cur = area * Math.exp(L.intercept + L.slope * mech.x(b, inputs) + off) + g * b;
    } else {
      cur = area * (L.intercept + L.slope * mech.x(b, inputs)) * (mech.linearScale ? mech.linearScale(b, inputs) : 1);
    }
    out[q] = cur > 0 ? Math.log(cur) : Number.NaN;
  }
  return out;
}

function pickEvery(a: ArrayLike<number>, k: number): Float64Array {
  const out = new Float64Array(Math.ceil(a.length / k));
  for (let i = 0, j = 0; i < a.length; i += k, j++) out[j] = a[i];
  return out;
}
