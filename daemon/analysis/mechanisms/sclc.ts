/**
 * `sclc`: space-charge-limited current with its ohmic background, the two limits added
 * (Mott & Gurney 1940; Lampert & Mark 1970):
 *   J = σ·V/d + (9/8)·ε₀ε_r·μ·V²/d³.
 * Divided by V it is a straight line, J/V = σ/d + (9/8)·ε₀ε_r·μ·V/d³: the intercept c gives the
 * conductivity σ = c·d, the slope s the mobility μ = 8·s·d³/(9·ε₀ε_r), and the two terms are equal
 * at the transition voltage V_tr = c/s = 8σd²/(9ε₀ε_rμ) (Lampert & Mark's crossover with θ = 1),
 * on a linear sweep as on a logarithmic one. The V² law itself is checked on the points where the
 * Mott–Gurney term carries most of the current: the log–log slope of J − σV/d there must be 2
 * within its own standard error (traps filling, a field-dependent mobility or an injection barrier
 * bend it away).
 */
import { VACUUM_PERMITTIVITY_F_PER_M } from '../constants.js';
import { fitLine } from '../line-fit.js';
import { currentUnit, fmt, param, setWith, type Extraction, type Mechanism, type ParameterValue } from '../mechanism.js';

/** Mott–Gurney current density, A/m², for bias V (V), mobility μ (m²/(V·s)), ε_r and d (m). */
export function mottGurney(v: number, mobility: number, permittivity: number, thickness: number): number {
  return ((9 / 8) * VACUUM_PERMITTIVITY_F_PER_M * permittivity * mobility * (v * v)) / thickness ** 3;
}

export const sclc: Mechanism = {
  id: 'sclc',
  title: 'Space-charge-limited current with an ohmic background, J/V against V',
  yKind: 'linear',
  bias: 'magnitude',
  requires: [],
  uses: ['area', 'thickness', 'permittivity'],
  usesArea: true,
  ranked: true,
  current: true,
  slopeSign: 1,
  axes: (inp) => ({
    x: { label: '|V|', unit: 'V', kind: 'linear' },
    y: { label: 'J/V', unit: `${currentUnit(inp)}/V`, kind: 'linear' },
  }),
  x: (v) => v,
  linearScale: (v) => v,
  extract: ({ line, used, inputs }): Extraction => {
    const warnings: string[] = [];
    const notes: string[] = [];
    const parameters: Record<string, ParameterValue> = {};
    const s = line.slope;
    const c = line.intercept;
    if (!(s > 0)) {
      warnings.push('J/V does not rise with V (slope ≤ 0): no space-charge-limited term');
      return { parameters, warnings, plausible: false, notes, failed: [...warnings] };
    }
    const failed: string[] = [];
    const fail = (text: string) => {
      warnings.push(text);
      failed.push(text);
    };
    if (s < 2 * line.slopeStdErr) {
      fail(`the V² term is not resolved (J/V slope ${fmt(s)} ± ${fmt(line.slopeStdErr)}): the current is ohmic, not space-charge-limited`);
    }
    const { area, thickness, permittivity } = inputs;
    if (area !== undefined && thickness !== undefined && permittivity !== undefined) {
      const k = (8 * thickness ** 3) / (9 * VACUUM_PERMITTIVITY_F_PER_M * permittivity);
      parameters.mobility = param(k * s, k * line.slopeStdErr, 'm^2/(V*s)');
    } else {
      const missing = [
        area === undefined ? 'area' : '',
        thickness === undefined ? 'thickness' : '',
        permittivity === undefined ? `permittivity (${setWith('--permittivity')})` : '',
      ].filter(Boolean);
      warnings.push(`mobility needs the ${missing.join(', ')} as well`);
    }
    if (area !== undefined && thickness !== undefined) {
      parameters.conductivity = param(c * thickness, line.interceptStdErr * thickness, 'S/m');
    }
    if (c > 0) {
      // V_tr = c/s; its variance from the covariance of (c, s).
      const v = c / s;
      const g1 = 1 / s;
      const g2 = -c / (s * s);
      const var_ = g1 * g1 * line.interceptStdErr ** 2 + g2 * g2 * line.slopeStdErr ** 2 + 2 * g1 * g2 * line.covariance;
      parameters.transitionVoltage = param(v, Math.sqrt(Math.max(0, var_)), 'V');
      notes.push(`ohmic to space-charge-limited at V_tr = ${fmt(v)} V (where the two terms are equal)`);
    } else if (c + 2 * line.interceptStdErr < 0) {
      fail(`the ohmic term is negative (J/V intercept ${fmt(c)} ± ${fmt(line.interceptStdErr)}): not an ohmic background`);
    }
    // The V² law: log–log slope of the Mott–Gurney part where it carries at least 70 % of the current.
    const xs: number[] = [];
    const ys: number[] = [];
    const ws: number[] = [];
    for (let k = 0; k < used.x.length; k++) {
      const v = used.v[k];
      const j = used.y[k] * v; // J
      const mg = j - c * v;
      if (mg > 0 && mg >= 0.7 * j && s * v * v >= 0.7 * (s * v * v + Math.max(c, 0) * v)) {
        xs.push(Math.log(v));
        ys.push(Math.log(mg));
        // σ(ln mg) = σ_J/mg = σ_y·V/mg, σ_y = 1/√w.
        const w = used.w ? used.w[k] : 1;
        ws.push(w > 0 ? ((mg * mg) / (v * v)) * w : 0);
      }
    }
    if (xs.length >= 4) {
      try {
        const f = fitLine(xs, ys, { weights: ws });
        parameters.exponent = param(f.slope, f.slopeStdErr, '1');
        if (Math.abs(f.slope - 2) > 3 * f.slopeStdErr + 0.05) {
          fail(
            `the log–log slope of the space-charge-limited part is ${fmt(f.slope)} ± ${fmt(f.slopeStdErr)}, not 2: not trap-free Mott–Gurney (traps filling, a field-dependent mobility or an injection barrier)`,
          );
        } else {
          notes.push(`log–log slope of the space-charge-limited part ${fmt(f.slope)} ± ${fmt(f.slopeStdErr)}: consistent with 2`);
        }
      } catch {
        /* degenerate: no exponent */
      }
    } else {
      notes.push('too few points where the V² term dominates to test the log–log slope of 2');
    }
    return { parameters, warnings, plausible: failed.length === 0, notes, failed };
  },
  forward: (v, p, inputs) => {
    const j = mottGurney(v, p.mobility, inputs.permittivity as number, inputs.thickness as number);
    return p.ohmicConductivity !== undefined ? j + (p.ohmicConductivity * v) / (inputs.thickness as number) : j;
  },
};
