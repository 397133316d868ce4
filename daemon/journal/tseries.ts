/**
 * `plumbline tseries`: the Arrhenius plot of a fitted quantity across the sweeps of a session taken
 * at several temperatures. Each sweep's temperature comes from `--temperatures` (in sweep order)
 * or from a note on the sweep ("T = 350 K"); each sweep is fitted with the session's analysis (or
 * --model) at its own temperature.
 */
import { analyze, type FitRequest } from '../analysis/analyze.js';
import { AnalysisError } from '../analysis/errors.js';
import { getMechanism } from '../analysis/mechanisms/index.js';
import { arrhenius, seriesPoint, temperatureFromText, type ArrheniusResult, type SeriesPoint } from '../analysis/temperature-series.js';
import { loadSession } from './sessions.js';

export interface SeriesReport {
  readonly session: string;
  readonly model: string;
  readonly quantity: string;
  readonly meaning: string;
  readonly points: { sweep: number; temperature: number; value: number; stdErr: number; y: SeriesPoint }[];
  readonly skipped: { sweep: number; reason: string }[];
  readonly result: ArrheniusResult;
  /** What makes the result doubtful, in words (a negative energy, one indistinguishable from zero …). */
  readonly warnings: string[];
  /** False when the energy cannot be what the quantity means (a negative trap depth or barrier). */
  readonly plausible: boolean;
}

const MEANING: Record<string, string> = {
  'poole-frenkel': 'trap depth φ_t (intercept of ln(J/E) against √E, extrapolated to zero field)',
  schottky: 'barrier height φ_B (Richardson plot: intercept of ln(J/T²) against √E)',
};

export function temperatureSeries(dir: string, o: { model?: string; quantity?: string; temperatures?: number[] }): SeriesReport {
  const s = loadSession(dir);
  const base = (s.analysis ?? {}) as Partial<FitRequest>;
  const model = o.model ?? base.model ?? 'arrhenius';
  const quantity = o.quantity ?? 'intercept';
  getMechanism(model); // an unknown model is refused before any work (UNKNOWN_MODEL)
  const points: SeriesReport['points'] = [];
  const skipped: SeriesReport['skipped'] = [];
  s.sweeps.forEach((sw, k) => {
    let T = o.temperatures?.[k];
    if (T === undefined) for (const a of sw.annotations) T = temperatureFromText(`${a.text} ${a.tags.join(' ')}`) ?? T;
    if (T === undefined) {
      skipped.push({ sweep: sw.sweep, reason: 'no temperature (add a note "T = 350 K" on the sweep, or give --temperatures)' });
      return;
    }
    try {
      const r = analyze(
        { x: sw.v, y: sw.i, compliance: sw.c, breakdown: sw.b },
        {
          model,
          window: o.model !== undefined && o.model !== base.model ? 'auto' : (base.window ?? 'auto'),
          inputs: { ...(base.inputs ?? {}), temperature: T },
          complianceLimit: s.complianceLimit,
        },
      );
      if (quantity === 'intercept') {
        points.push({
          sweep: sw.sweep,
          temperature: T,
          value: r.line.intercept,
          stdErr: r.line.interceptStdErr,
          y: seriesPoint(T, r.line.intercept, r.line.interceptStdErr, true),
        });
      } else {
        const p = r.parameters[quantity];
        if (!p)
          throw new AnalysisError('BAD_INPUT', `model ${model} has no parameter '${quantity}' (it has ${Object.keys(r.parameters).join(', ') || 'none'})`);
        if (!(p.value > 0)) throw new AnalysisError('BAD_INPUT', `${quantity} = ${p.value} is not positive: no logarithm`);
        points.push({ sweep: sw.sweep, temperature: T, value: p.value, stdErr: p.stdErr, y: seriesPoint(T, p.value, p.stdErr, false) });
      }
    } catch (e) {
      if (e instanceof AnalysisError && e.message.includes('has no parameter')) throw e;
      skipped.push({ sweep: sw.sweep, reason: (e as Error).message });
    }
  });
  const result = arrhenius(points.map((p) => p.y));
  const warnings: string[] = [];
  const e = result.activationEnergy;
  let plausible = true;
  if (e.value < 0) {
    plausible = false;
    warnings.push(
      `the activation energy ${e.value.toPrecision(3)} eV is negative: the ${quantity} grows as the temperature falls, so it is not a thermally activated ${quantity === 'intercept' && MEANING[model] ? MEANING[model].split(' (')[0] : 'quantity'}; check the temperatures (notes "T = … K" or --temperatures), the model and the fit window`,
    );
  } else if (e.value < 2 * e.stdErr) {
    warnings.push(`the activation energy ${e.value.toPrecision(3)} ± ${e.stdErr.toPrecision(2)} eV is not distinguishable from zero (less than 2σ)`);
  }
  const temps = points.map((p) => p.temperature);
  if (temps.length && Math.max(...temps) / Math.min(...temps) < 1.1)
    warnings.push(`the temperatures span only ${Math.min(...temps)}–${Math.max(...temps)} K: 1/T changes by less than 10 %, so the slope is poorly determined`);
  if (skipped.length) warnings.push(`${skipped.length} sweep(s) left out (see skipped)`);
  return {
    warnings,
    plausible,
    session: s.id,
    model,
    quantity,
    meaning: quantity === 'intercept' ? (MEANING[model] ?? `activation energy of the ${model} intercept`) : `activation energy of ${quantity}`,
    points,
    skipped,
    result,
  };
}
