/**
 * `sclc`: trap-free space-charge-limited current, Mott–Gurney law J = (9/8)·ε₀ε_r·μ·V²/d³
 * (Mott & Gurney 1940). Linearization ln J against ln V: the slope is the exponent (2 for SCLC,
 * 1 for ohmic). The mobility comes from the intercept of the slope-2 line through the window,
 * μ = 8·K·d³/(9·ε₀ε_r) with J = K·V². Where the whole curve shows an ohmic run (slope ≈ 1) followed
 * by an SCLC run (slope ≈ 2), the transition voltage is where the two lines cross.
 */
import { VACUUM_PERMITTIVITY_F_PER_M } from '../constants.js';
import { currentUnit, fmt, param, type Extraction, type Mechanism, type ParameterValue } from '../mechanism.js';
import { segmentLine } from '../segmentation.js';

/** Mott–Gurney current density, A/m², for bias V (V), mobility μ (m²/(V·s)), ε_r and d (m). */
export function mottGurney(v: number, mobility: number, permittivity: number, thickness: number): number {
  return (9 / 8) * VACUUM_PERMITTIVITY_F_PER_M * permittivity * mobility * (v * v) / (thickness ** 3);
}

export const sclc: Mechanism = {
  id: 'sclc',
  title: 'Space-charge-limited current (Mott–Gurney), log J against log V',
  yKind: 'log',
  bias: 'magnitude',
  requires: [],
  uses: ['area', 'thickness', 'permittivity'],
  usesArea: true,
  ranked: true,
  axes: (inp) => ({
    x: { label: '|V|', unit: 'V', kind: 'log' },
    y: { label: 'J', unit: currentUnit(inp), kind: 'log' },
  }),
  x: (v) => Math.log(v),
  lnOffset: () => 0,
  extract: ({ line, used, all, inputs }): Extraction => {
    const warnings: string[] = [];
    const notes: string[] = [];
    const parameters: Record<string, ParameterValue> = {
      exponent: param(line.slope, line.slopeStdErr, '1'),
    };
    let plausible = true;
    if (Math.abs(line.slope - 2) > 0.3) {
      warnings.push(`log–log slope ${fmt(line.slope)} is not near 2: the window is not trap-free SCLC`);
      plausible = false;
    } else {
      notes.push(`log–log slope ${fmt(line.slope)} ± ${fmt(line.slopeStdErr)} is close to 2`);
    }
    const { area, thickness, permittivity } = inputs;
    if (area !== undefined && thickness !== undefined && permittivity !== undefined) {
      // Intercept of the slope-2 line: mean of (y − 2x), its error from the scatter about it.
      const n = used.x.length;
      let c = 0;
      for (let i = 0; i < n; i++) c += used.y[i] - 2 * used.x[i];
      c /= n;
      let ss = 0;
      for (let i = 0; i < n; i++) ss += (used.y[i] - 2 * used.x[i] - c) ** 2;
      const sc = Math.sqrt(ss / Math.max(1, n - 1) / n);
      const k = (8 * thickness ** 3) / (9 * VACUUM_PERMITTIVITY_F_PER_M * permittivity);
      const mu = k * Math.exp(c);
      parameters.mobility = param(mu, mu * sc, 'm^2/(V*s)');
    } else {
      warnings.push('mobility needs area, thickness and permittivity');
    }
    const vtr = transitionVoltage(all.x, all.y);
    if (vtr) {
      parameters.transitionVoltage = param(vtr.value, vtr.stdErr, 'V');
      notes.push(`ohmic (slope ${fmt(vtr.ohmicSlope)}) to SCLC (slope ${fmt(vtr.sclcSlope)}) at ${fmt(vtr.value)} V`);
    }
    return { parameters, warnings, plausible, notes };
  },
  forward: (v, p, inputs) => {
    const j = mottGurney(v, p.mobility, inputs.permittivity as number, inputs.thickness as number);
    return p.ohmicConductivity !== undefined ? j + (p.ohmicConductivity * v) / (inputs.thickness as number) : j;
  },
};

/**
 * Finds adjacent regimes with log–log slopes near 1 then near 2 and returns the bias where their
 * lines cross, with the standard error propagated from both segment fits.
 */
export function transitionVoltage(
  lnV: Float64Array,
  lnJ: Float64Array,
): { value: number; stdErr: number; ohmicSlope: number; sclcSlope: number } | undefined {
  if (lnV.length < 10) return undefined;
  const { segments } = segmentLine(lnV, lnJ, { minPoints: 5, maxSegments: 4 });
  for (let k = 0; k + 1 < segments.length; k++) {
    const a = segments[k];
    const b = segments[k + 1];
    if (Math.abs(a.slope - 1) < 0.35 && Math.abs(b.slope - 2) < 0.5) {
      const dm = b.slope - a.slope;
      const dc = a.intercept - b.intercept;
      const lnVtr = dc / dm;
      // Gradient of ln V_tr = (c1 − c2)/(m2 − m1) with respect to (c1, m1) and (c2, m2).
      const gc = 1 / dm;
      const gm = dc / (dm * dm);
      const varA = gc * gc * a.interceptStdErr ** 2 + gm * gm * a.slopeStdErr ** 2 + 2 * gc * gm * a.covariance;
      const varB = gc * gc * b.interceptStdErr ** 2 + gm * gm * b.slopeStdErr ** 2 + 2 * gc * gm * b.covariance;
      const value = Math.exp(lnVtr);
      return { value, stdErr: value * Math.sqrt(Math.max(0, varA + varB)), ohmicSlope: a.slope, sclcSlope: b.slope };
    }
  }
  return undefined;
}
