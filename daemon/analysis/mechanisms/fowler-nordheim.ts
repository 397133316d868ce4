/**
 * `fowler-nordheim`: tunnelling through a triangular barrier (Lenzlinger & Snow 1969; constants in
 * Forbes' form, Appl. Phys. Lett. 89, 113122, 2006):
 *   J = a/(m_r·φ)·E²·exp(−b·√m_r·φ^{3/2}/E),  a = q³/(8πh), b = (8π/3)√(2m₀)/(qh).
 * ln(J/E²) against 1/E is straight with slope −b√m_r φ^{3/2}, so φ = (−slope/(b√m_r))^{2/3}.
 * The intercept in principle gives m_r·φ but depends on the effective area; it is not used for a
 * parameter. It is used as a check (our own rule, on the prefactor's consistency): with the given
 * area, the intercept implies a prefactor that should be near a/(m_r·φ) for the fitted φ. A wrong
 * thickness moves the two apart — given d too large by k, φ falls by k^(2/3) and the implied
 * prefactor rises about k^(4/3) times over the expected one (k = 10: 21×) — as does a wrong area or
 * another mechanism; the image force and temperature change the prefactor by much less (Lenzlinger
 * & Snow 1969). More than 10× either way is a warning; more than 10⁴ — beyond a thickness ten times
 * off and an area a hundred times off together (about 2,000×) — makes the fit implausible: the
 * current is then not Fowler–Nordheim tunnelling.
 */

/** Ratio between the prefactor an FN line's intercept implies and a/(m_r·φ), beyond which a warning is given. */
const PREFACTOR_RATIO = 10;
/** Beyond this ratio no plausible error in the inputs explains the prefactor: not FN tunnelling. */
const PREFACTOR_IMPLAUSIBLE = 1e4;
import { FN_A_A_EV_PER_V2, FN_B_EV32_V_PER_M } from '../constants.js';
import { currentUnit, field, fmt, inRange, param, type Extraction, type Mechanism } from '../mechanism.js';

/** Fowler–Nordheim current density, A/m², at field E (V/m), barrier φ (eV), mass ratio m_r. */
export function fowlerNordheim(e: number, barrierHeight: number, massRatio: number): number {
  return (FN_A_A_EV_PER_V2 / (massRatio * barrierHeight)) * e * e * Math.exp((-FN_B_EV32_V_PER_M * Math.sqrt(massRatio) * barrierHeight ** 1.5) / e);
}

/** Barrier (eV) from an FN or trap-assisted-tunnelling slope (V/m) and mass ratio, with its error. */
export function barrierFromTunnellingSlope(slope: number, slopeStdErr: number, massRatio: number) {
  const phi = (-slope / (FN_B_EV32_V_PER_M * Math.sqrt(massRatio))) ** (2 / 3);
  return { value: phi, stdErr: (2 / 3) * phi * Math.abs(slopeStdErr / slope) };
}

export const fowlerNordheimMechanism: Mechanism = {
  id: 'fowler-nordheim',
  title: 'Fowler–Nordheim tunnelling, ln(J/E²) against 1/E',
  yKind: 'log',
  bias: 'magnitude',
  requires: ['thickness'],
  uses: ['massRatio', 'area', 'flatBand'],
  usesArea: true,
  ranked: true,
  current: true,
  slopeSign: -1,
  leakage: true,
  superOhmic: true,
  axes: (inp) => ({
    x: { label: '1/E', unit: 'm/V', kind: 'linear' },
    y: { label: 'J/E²', unit: `${currentUnit(inp)}/(V/m)^2`, kind: 'log' },
  }),
  x: (v, inp) => 1 / field(v, inp),
  lnOffset: (v, inp) => 2 * Math.log(field(v, inp)),
  extract: ({ line, inputs }): Extraction => {
    const warnings: string[] = [];
    const notes: string[] = [];
    if (!(line.slope < 0)) {
      warnings.push('ln(J/E²) does not fall with 1/E (slope ≥ 0): not Fowler–Nordheim tunnelling');
      return { parameters: {}, warnings, plausible: false, notes, failed: [...warnings] };
    }
    const failed: string[] = [];
    const b = barrierFromTunnellingSlope(line.slope, line.slopeStdErr, inputs.massRatio);
    let plausible = inRange(warnings, 'barrier height', b.value, 0.3, 6, 'eV', failed);
    notes.push(`barrier ${fmt(b.value)} eV for m* / m0 = ${fmt(inputs.massRatio)}`);
    if (inputs.area !== undefined && plausible) {
      // ln of the prefactor the line implies, against ln a/(m_r φ) (both A/V², J in A/m²).
      const ratio = Math.exp(line.intercept - Math.log(FN_A_A_EV_PER_V2 / (inputs.massRatio * b.value)));
      const said = `the intercept implies a prefactor ${fmt(ratio)} times the Fowler–Nordheim value a/(m* φ) for this barrier and area`;
      if (ratio > PREFACTOR_IMPLAUSIBLE || ratio < 1 / PREFACTOR_IMPLAUSIBLE) {
        const text = `${said}: more than a thickness ten times off (about 21×) and an area a hundred times off (100×) explain together: the current is not Fowler–Nordheim tunnelling, or the area is far from the device's`;
        warnings.push(text);
        failed.push(text);
        plausible = false;
      } else if (ratio > PREFACTOR_RATIO || ratio < 1 / PREFACTOR_RATIO)
        warnings.push(
          `${said}: check the thickness and the area (a thickness ten times too large gives about 21×, ten times too small an implausible barrier), or whether the current is Fowler–Nordheim tunnelling`,
        );
      else notes.push(said);
    }
    return { parameters: { barrierHeight: param(b.value, b.stdErr, 'eV') }, warnings, plausible, notes, failed };
  },
  forward: (v, p, inp) => fowlerNordheim(field(v, inp), p.barrierHeight, inp.massRatio),
};
