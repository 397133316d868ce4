/**
 * Mechanism ranking for one I–V dataset. Every applicable mechanism is fitted to the same points
 * (one polarity, non-zero bias and current, not at compliance, inside the window) and judged on the
 * same scale: residuals of ln J against the mechanism's own fitted line, summarised by the
 * small-sample Akaike information criterion AICc = n·ln(RSS/n) + 2k + 2k(k+1)/(n−k−1) with k = 2
 * (Burnham & Anderson, Model Selection and Multimodel Inference, 2002). The score is the Akaike
 * weight. Mechanisms whose parameters fail a physical check (wrong slope sign, a barrier outside a
 * sane range, a dynamic permittivity far from n²) rank after every plausible one.
 */
import type { AccuracySpec } from './accuracy.js';
import { analyzePrepared, findRegimes, type IVData, preparePoints, resolveInputs, REASONS, selectWindow, type WindowRequest } from './analyze.js';
import type { Inputs, ParameterValue } from './mechanism.js';
import { fmt } from './mechanism.js';
import { getMechanism, MECHANISMS } from './mechanisms/index.js';

export interface RankEntry {
  readonly model: string;
  readonly title: string;
  /** Akaike weight, 0–1, among the ranked mechanisms. */
  readonly score: number;
  readonly aicc: number;
  readonly deltaAicc: number;
  /** Root-mean-square residual of ln J (dimensionless: 0.01 ≈ 1 % scatter). */
  readonly rmsLnResidual: number;
  readonly plausible: boolean;
  readonly parameters: Record<string, ParameterValue>;
  readonly reasons: string[];
}

export interface Ranking {
  readonly ranking: RankEntry[];
  readonly skipped: { model: string; reason: string }[];
  readonly points: { used: number; excluded: number; reasons: Record<string, number> };
  /** Caveats about the common point set (e.g. it spans several regimes). */
  readonly warnings: string[];
}

export interface RankRequest {
  readonly inputs?: Inputs;
  readonly window?: WindowRequest;
  readonly accuracy?: AccuracySpec;
  readonly complianceLimit?: number;
}

export function rankMechanisms(data: IVData, request: RankRequest = {}): Ranking {
  // The common point set: what a log–log transform of one polarity accepts, then the window.
  const ref = getMechanism('power-law');
  const refInputs = resolveInputs(ref, request.inputs);
  const prep = preparePoints(ref, data, refInputs, { complianceLimit: request.complianceLimit, accuracy: request.accuracy });
  const { used: common } = selectWindow(prep.all, request.window);
  const reasons = { ...prep.reasons };
  if (prep.all.x.length > common.x.length) reasons[REASONS.outsideWindow] = prep.all.x.length - common.x.length;
  const shared: IVData = { x: common.raw, y: common.current };

  const skipped: { model: string; reason: string }[] = [];
  const raw: Omit<RankEntry, 'score' | 'deltaAicc'>[] = [];
  const rssByModel = new Map<string, number>();
  for (const mech of MECHANISMS.filter((m) => m.ranked)) {
    const missing = mech.requires.filter((k) => request.inputs?.[k] === undefined);
    if (missing.length) {
      skipped.push({ model: mech.id, reason: `needs ${missing.join(', ')}` });
      continue;
    }
    try {
      const inputs = resolveInputs(mech, request.inputs);
      const { all } = preparePoints(mech, shared, inputs, { accuracy: request.accuracy });
      const report = analyzePrepared(mech, inputs, all, all, { regimes: false });
      const n = all.x.length;
      // Residuals of ln J on the common points.
      let rss = 0;
      let sw = 0;
      for (let k = 0; k < n; k++) {
        const wk = all.w ? all.w[k] : 1;
        let r: number;
        if (mech.yKind === 'log') {
          r = all.y[k] - (report.line.intercept + report.line.slope * all.x[k]);
        } else {
          const pred = report.line.intercept + report.line.slope * all.x[k];
          r = pred > 0 ? Math.log(Math.abs(all.y[k])) - Math.log(pred) : 10;
        }
        rss += wk * r * r;
        sw += wk;
      }
      const kpar = 2;
      const aicc = n * Math.log(Math.max(rss, 1e-300) / n) + 2 * kpar + (2 * kpar * (kpar + 1)) / Math.max(1, n - kpar - 1);
      rssByModel.set(mech.id, rss);
      raw.push({
        model: mech.id,
        title: mech.title,
        aicc,
        rmsLnResidual: Math.sqrt(rss / sw),
        plausible: report.plausible,
        parameters: report.parameters,
        reasons: [...report.notes, ...report.warnings],
      });
    } catch (e) {
      skipped.push({ model: mech.id, reason: (e as Error).message });
    }
  }
  const minAicc = Math.min(...raw.map((r) => r.aicc));
  const rel = raw.map((r) => Math.exp(-0.5 * (r.aicc - minAicc)));
  const total = rel.reduce((a, b) => a + b, 0) || 1;
  const entries: RankEntry[] = raw.map((r, k) => {
    const reasonsOut = [`RMS residual of ln J ${fmt(r.rmsLnResidual)} over ${common.x.length} points (ΔAICc ${(r.aicc - minAicc).toFixed(1)})`];
    for (const [other, rss] of rssByModel) {
      const mine = rssByModel.get(r.model) as number;
      if (other !== r.model && Math.abs(rss - mine) <= 1e-9 * Math.max(rss, mine, 1e-300)) {
        reasonsOut.push(`same straight line as '${other}': only the physical checks tell them apart`);
      }
    }
    if (!r.plausible) reasonsOut.push('ranked after the plausible mechanisms: a physical check failed');
    return { ...r, score: rel[k] / total, deltaAicc: r.aicc - minAicc, reasons: [...reasonsOut, ...r.reasons] };
  });
  entries.sort((a, b) => (a.plausible === b.plausible ? a.aicc - b.aicc : a.plausible ? -1 : 1));
  const excluded = Object.values(reasons).reduce((a, b) => a + b, 0);
  const warnings: string[] = [];
  const regimes = findRegimes(common);
  if (regimes.length > 1) {
    const spans = regimes.map((g) => `${fmt(g.from)}–${fmt(g.to)}`).join(', ');
    warnings.push(`the points span ${regimes.length} regimes on the log–log plot (x column ${spans}); rank within one with --from/--to`);
  }
  return { ranking: entries, skipped, points: { used: common.x.length, excluded, reasons }, warnings };
}
