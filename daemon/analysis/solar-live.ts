/**
 * An illuminated solar cell's sweep, as the live chain, the page and the report show it: the
 * figures of merit with uncertainties (I_sc, J_sc, V_oc, P_max at V_mp and I_mp, FF, η) from local
 * fits of the measured curve, and the single-diode model fitted to the whole curve, with the model
 * curve to draw. Currents in the generator convention (delivered current positive), SI units.
 */
import type { IVData } from './analyze.js';
import { fitDiode, modelCurve, solarFiguresWithUncertainty, type Convention } from './diode-fit.js';

export interface SolarFigure {
  readonly value: number;
  readonly stdErr: number;
  readonly unit: string;
}

export interface SolarSummary {
  /** How the instrument signed the current (the figures and the curve are in the generator convention). */
  readonly convention: Convention;
  /** Irradiance for η, W/m² (1000 unless given). */
  readonly irradiance: number;
  /** Device area, m² (J_sc and η need it). */
  readonly area: number | null;
  readonly temperature: { readonly value: number; readonly assumed: boolean };
  /** isc, jsc, voc, pmax, vmp, imp, fillFactor, efficiency (jsc and efficiency only with an area). */
  readonly figures: Record<string, SolarFigure>;
  /** The single-diode fit: photocurrent, saturationCurrent, idealityFactor, seriesResistance, shuntResistance. */
  readonly model: { readonly parameters: Record<string, SolarFigure>; readonly rmse: number | null } | null;
  /** The fitted model's current (generator convention) across the measured bias range, for plots. */
  readonly curve: { readonly v: number[]; readonly i: number[] } | null;
  readonly warnings: string[];
  /** Why there are no figures (the curve never crosses zero, too few points …). */
  readonly error?: string;
}

export interface SolarRequest {
  readonly temperature?: number;
  readonly area?: number;
  readonly irradiance?: number;
  readonly complianceLimit?: number;
  readonly convention?: Convention;
}

/** Points of the drawn model curve. */
const CURVE_POINTS = 120;

export function solarSummary(data: IVData, req: SolarRequest = {}): SolarSummary {
  const base = {
    convention: req.convention ?? 'load',
    irradiance: req.irradiance ?? 1000,
    area: req.area ?? null,
    temperature: { value: req.temperature ?? 300, assumed: req.temperature === undefined },
  } as const;
  const warnings: string[] = [];
  const figures: Record<string, SolarFigure> = {};
  let error: string | undefined;
  try {
    const r = solarFiguresWithUncertainty(data, {
      area: req.area,
      irradiance: req.irradiance,
      complianceLimit: req.complianceLimit,
      convention: req.convention,
    });
    const f = r.figures;
    figures.isc = f.isc;
    if (r.jsc) figures.jsc = r.jsc;
    figures.voc = f.voc;
    figures.pmax = f.pmax;
    figures.vmp = f.vmp;
    figures.imp = f.imp;
    figures.fillFactor = f.fillFactor;
    if (f.efficiency) figures.efficiency = f.efficiency;
    warnings.push(...r.warnings);
  } catch (e) {
    error = (e as Error).message;
  }
  let model: SolarSummary['model'] = null;
  let curve: SolarSummary['curve'] = null;
  try {
    const d = fitDiode(data, 'single-diode', {
      temperature: req.temperature,
      illuminated: true,
      convention: req.convention,
      complianceLimit: req.complianceLimit,
    });
    model = { parameters: d.parameters, rmse: d.rmse };
    warnings.push(...d.warnings.map((w) => `single-diode fit: ${w}`));
    let lo = Infinity;
    let hi = -Infinity;
    for (let k = 0; k < data.x.length; k++) {
      const v = data.x[k];
      if (Number.isFinite(v)) {
        lo = Math.min(lo, v);
        hi = Math.max(hi, v);
      }
    }
    if (hi > lo) {
      const v = Array.from({ length: CURVE_POINTS }, (_x, k) => lo + ((hi - lo) * k) / (CURVE_POINTS - 1));
      curve = { v, i: modelCurve(d, v) };
    }
  } catch (e) {
    warnings.push(`single-diode fit: ${(e as Error).message}`);
  }
  return { ...base, figures, model, curve, warnings, ...(error !== undefined ? { error } : {}) };
}
