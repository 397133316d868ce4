/**
 * Adaptive sweeps on the station: each next level comes from daemon/analysis/adaptive-sweep.ts,
 * every level passes the guard exactly as in a fixed plan, the live chain journals and fits every
 * reading as usual (the drift watch sees each sweep's final fit, unchanged), and a sweep stops as
 * soon as the target parameter's standard error is reached. Each sweep's figures — readings, the
 * largest |bias| applied, the charge passed, the parameter with its error, and why it stopped — are
 * journaled as an `adaptive-sweep` event and returned for `run --json`.
 */
import { AdaptiveSweep, STOP_MEANING, type SweepKnowledge } from '../analysis/adaptive-sweep.js';
import type { RunOutcome } from '../../protocols/wire.js';
import { PlanError, type AdaptivePlan } from './plan.js';
import type { RunContext } from './stress.js';

export interface AdaptiveSweepFigures {
  readonly sweep: number;
  readonly readings: number;
  /** V. */
  readonly maxAbsBias: number;
  /** ∫|I|dt through the device during the sweep, C. */
  readonly charge: number;
  readonly parameter: { readonly name: string; readonly value: number; readonly stdErr: number; readonly unit: string } | null;
  readonly stopReason: string;
}

/** Fewest readings in the regime before a fit can stop a sweep: the fewest an automatic window takes (MIN_WINDOW_POINTS). */
const MIN_REGIME_POINTS = 5;

export async function runAdaptive(ctx: RunContext, plan: AdaptivePlan, figures: AdaptiveSweepFigures[]): Promise<{ outcome: RunOutcome; reason: string }> {
  const src = ctx.source;
  const journal = ctx.chain.options.journal;
  let prior: SweepKnowledge | undefined;
  // The planner's information is that of ln|I| against the mechanism's axis: its predicted error
  // means something only for those fits (not for ohmic, space-charge or custom lines).
  const axis = ctx.chain.fitAxis();
  for (let s = 1; s <= plan.repeat; s++) {
    ctx.check();
    const planner = new AdaptiveSweep(
      {
        start: plan.start,
        stop: plan.stop,
        maxPoints: plan.maxPoints,
        currentLimit: plan.currentLimit ?? 0.5 * plan.compliance,
        absoluteFloor: 1e-13,
        ...axis,
      },
      prior,
    );
    let v = planner.first();
    if (Math.abs(v - src.present) > 1e-12) await src.rampTo(v);
    ctx.chain.startSweep(s, plan.maxPoints, `adaptive sweep ${s} of ${plan.repeat}`);
    let readings = 0;
    let maxAbsBias = 0;
    let charge = 0;
    let last = journal.now();
    let parameter: AdaptiveSweepFigures['parameter'] = null;
    try {
      for (;;) {
        ctx.check();
        await src.step(v);
        if (plan.delay > 0) await ctx.sleep(plan.delay);
        ctx.check();
        const m = await src.measure();
        ctx.take(m, v);
        const now = journal.now();
        const hold = (now - last) / 1000;
        last = now;
        readings++;
        maxAbsBias = Math.max(maxAbsBias, Math.abs(v));
        const r = m.reading;
        if (r && Number.isFinite(r.i)) charge += Math.abs(r.i) * hold;
        // The planner steps from the programmed level (the measured one carries the instrument's noise).
        const step = planner.add(v, r && Number.isFinite(r.i) ? r.i : 0, m.compliance);
        if (planner.inRegime && planner.regimePoints >= MIN_REGIME_POINTS) {
          const f = ctx.chain.fitSoFar().fit;
          if (f && Object.keys(f.parameters).length > 0 && !(plan.target.parameter in f.parameters)) {
            // A misspelt or foreign target would otherwise run every sweep to its point budget.
            throw new PlanError(
              `plan: field 'target.parameter': '${plan.target.parameter}' is not a parameter of the ${f.model} fit (it gives ${Object.keys(f.parameters).join(', ')}); the run was stopped`,
            );
          }
          const p = f?.parameters[plan.target.parameter];
          if (f && p && Number.isFinite(p.stdErr)) {
            parameter = { name: plan.target.parameter, value: p.value, stdErr: p.stdErr, unit: p.unit };
            // The fit's error rests on the noise it reads from the sweep's own scatter, which a few
            // readings can make look several times too small: the error the same readings give with
            // a typical instrument's noise (the figures that place the fill) must meet the target too.
            // That check also answers optional stopping (stopping at the first fit whose error came
            // out low by chance, so that stated errors cover the truth less often than they claim):
            // on 40 noise seeds of each simulated insulator, the first fit that meets both covers
            // the device's value within 2σ in 188 of 200 sweeps, as three fits in a row did.
            const slope = planner.predictedSlopeError('leakageResistance' in f.parameters);
            const perSlope = f.line.slopeStdErr > 0 ? (p.statStdErr ?? p.stdErr) / f.line.slopeStdErr : Number.NaN;
            const predicted = axis && slope !== undefined && Number.isFinite(perSlope) ? slope * perSlope : 0;
            if (p.stdErr <= plan.target.stdErr && predicted <= plan.target.stdErr && f.plausible) {
              planner.targetReached();
              break;
            }
          }
        }
        if ('stop' in step) break;
        v = step.next;
      }
    } catch (e) {
      // An abort (drift, breakdown, the operator) cut the sweep: its readings still count in the
      // run's figures. Nothing is written here: the output goes off first.
      figures.push({ sweep: s, readings, maxAbsBias, charge, parameter, stopReason: 'interrupted' });
      throw e;
    }
    const stopReason = planner.stopReason ?? 'point-budget';
    const fig: AdaptiveSweepFigures = { sweep: s, readings, maxAbsBias, charge, parameter, stopReason };
    // In the run's figures before the sweep's end is judged: a drift or breakdown abort there
    // throws, and the sweep's readings must still count.
    figures.push(fig);
    const decision = ctx.endSweep(`stopped: ${STOP_MEANING[stopReason]}`);
    ctx.record({ type: 'adaptive-sweep', ...fig });
    prior = planner.knowledge();
    if (decision === 'stop') return { outcome: 'stopped', reason: `stopped after sweep ${s}` };
    if (s < plan.repeat) {
      await src.rampTo(0);
      if (plan.dwell > 0) await ctx.sleep(plan.dwell);
    }
  }
  const total = figures.reduce((a, f) => a + f.readings, 0);
  return { outcome: 'completed', reason: `all ${plan.repeat} adaptive sweep(s) done in ${total} readings` };
}
