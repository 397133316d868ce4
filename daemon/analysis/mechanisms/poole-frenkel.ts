/**
 * `poole-frenkel`: field-assisted emission from traps (Frenkel 1938; Chiu, Adv. Mater. Sci. Eng.
 * 2014, 578168):  J = C·E·exp(−q(φ_T − √(qE/(π ε₀ ε_r)))/(kT)).
 * ln(J/E) against √E has slope (q/kT)·√(q/(π ε₀ ε_r)), so ε_r = q³/(π ε₀ (kT)² slope²): the dynamic
 * (optical) permittivity, which should be near n². The lowering is twice the Schottky one, so the
 * same data read as Schottky give an ε_r four times smaller.
 */
import { BOLTZMANN_J_PER_K, ELEMENTARY_CHARGE_C as Q, VACUUM_PERMITTIVITY_F_PER_M as EPS0 } from '../constants.js';
import { currentUnit, field, fmt, inRange, param, setWith, type Extraction, type Mechanism } from '../mechanism.js';

/** Coefficient of √E in the exponent for a lowering √(qE/(γ π ε₀ ε_r)): γ = 1 PF, γ = 4 Schottky. */
export function rootFieldSlope(permittivity: number, temperature: number, gamma: 1 | 4): number {
  return (Q / (BOLTZMANN_J_PER_K * temperature)) * Math.sqrt(Q / (gamma * Math.PI * EPS0 * permittivity));
}

/** Inverse of rootFieldSlope: ε_r from a √E slope, with its standard error (δε/ε = 2δm/m). */
export function permittivityFromRootFieldSlope(slope: number, slopeStdErr: number, temperature: number, gamma: 1 | 4) {
  const kt = BOLTZMANN_J_PER_K * temperature;
  const eps = (Q * Q * Q) / (gamma * Math.PI * EPS0 * kt * kt * slope * slope);
  return { value: eps, stdErr: 2 * eps * Math.abs(slopeStdErr / slope) };
}

/**
 * The dynamic permittivity a √E line gives (γ = 1 Poole–Frenkel, γ = 4 Schottky) with its checks:
 * within 1–30, and against n² (checkAgainstIndex, `other` the reading of the same slope by the other
 * emission). Warnings, notes and failed checks go to the lists given; returns ε_r and whether it passed.
 */
export function rootFieldPermittivity(
  line: { slope: number; slopeStdErr: number },
  inputs: { temperature: number; refractiveIndex?: number; permittivity?: number },
  gamma: 1 | 4,
  other: { name: string; factor: number },
  lists: { warnings: string[]; notes: string[]; failed: string[] },
): { eps: { value: number; stdErr: number }; plausible: boolean } {
  const eps = permittivityFromRootFieldSlope(line.slope, line.slopeStdErr, inputs.temperature, gamma);
  const inside = inRange(lists.warnings, 'dynamic permittivity', eps.value, 1, 30, '', lists.failed);
  const agrees = checkAgainstIndex(eps.value, eps.stdErr, inputs.refractiveIndex, inputs.permittivity, lists.warnings, lists.notes, other, lists.failed);
  return { eps, plausible: inside && agrees };
}

/**
 * Compares a dynamic permittivity (with its standard error) with n². The value agrees when it lies
 * within 15 % of n² or within two of its standard errors of it: the dynamic permittivity of the
 * emission is the optical one, n² (Chiu 2014; Sze & Ng 2007), and ε_r is the quantity quoted to
 * ±10 % in practice. A value between n² and the static permittivity (when given) is reported as
 * such; anything else fails the check, with a hint when the other reading of the same slope (PF as
 * Schottky: ε_r 4× smaller; Schottky as PF: 4× larger) would agree.
 */
export function checkAgainstIndex(
  eps: number,
  epsStdErr: number,
  n: number | undefined,
  staticPermittivity: number | undefined,
  warnings: string[],
  notes: string[],
  other: { name: string; factor: number },
  failed?: string[],
): boolean {
  if (n === undefined) {
    notes.push(
      `ε_r = ${fmt(eps)} ± ${fmt(epsStdErr)} is not checked against n² (no refractive index given: ${setWith('--refractive-index')}): that agreement is the usual test that the current is this emission and not ${other.name} or tunnelling`,
    );
    return true;
  }
  const n2 = n * n;
  const agrees = (e: number, se: number) => Math.abs(e - n2) <= Math.max(0.15 * n2, 2 * se);
  if (agrees(eps, epsStdErr)) {
    notes.push(`ε_r = ${fmt(eps)} ± ${fmt(epsStdErr)} agrees with n² = ${fmt(n2)} (ratio ${fmt(eps / n2)})`);
    return true;
  }
  if (staticPermittivity !== undefined && eps > n2 && eps <= staticPermittivity * 1.1) {
    warnings.push(
      `ε_r = ${fmt(eps)} ± ${fmt(epsStdErr)} lies between n² = ${fmt(n2)} and the static ε_r = ${fmt(staticPermittivity)}: partly relaxed lattice, or a window that is not pure emission`,
    );
    return true;
  }
  const near = Math.abs(eps * other.factor - n2) <= 0.3 * n2;
  const hint = near ? `; read as ${other.name} the same slope gives ${fmt(eps * other.factor)}, near n²` : '';
  const z = Math.abs(eps - n2) / Math.max(epsStdErr, 1e-300);
  const text = `ε_r = ${fmt(eps)} ± ${fmt(epsStdErr)} is far from n² = ${fmt(n2)} (ratio ${fmt(eps / n2)}, ${fmt(z)} standard errors)${hint}`;
  warnings.push(text);
  failed?.push(text);
  return false;
}

export function pooleFrenkel(e: number, prefactor: number, trapDepth: number, permittivity: number, temperature: number): number {
  const kt = (BOLTZMANN_J_PER_K * temperature) / Q; // eV
  return prefactor * e * Math.exp(-trapDepth / kt + rootFieldSlope(permittivity, temperature, 1) * Math.sqrt(e));
}

export const pooleFrenkelMechanism: Mechanism = {
  id: 'poole-frenkel',
  title: 'Poole–Frenkel emission, ln(J/E) against √E',
  yKind: 'log',
  bias: 'magnitude',
  requires: ['thickness'],
  uses: ['temperature', 'refractiveIndex', 'permittivity', 'area', 'flatBand'],
  usesArea: true,
  ranked: true,
  current: true,
  slopeSign: 1,
  leakage: true,
  superOhmic: true,
  axes: (inp) => ({
    x: { label: '√E', unit: '(V/m)^0.5', kind: 'linear' },
    y: { label: 'J/E', unit: `${currentUnit(inp)}/(V/m)`, kind: 'log' },
  }),
  x: (v, inp) => Math.sqrt(field(v, inp)),
  lnOffset: (v, inp) => Math.log(field(v, inp)),
  extract: ({ line, inputs }): Extraction => {
    const warnings: string[] = [];
    const notes: string[] = [];
    if (!(line.slope > 0)) {
      warnings.push('ln(J/E) does not rise with √E (slope ≤ 0): not Poole–Frenkel emission');
      return { parameters: {}, warnings, plausible: false, notes, failed: [...warnings] };
    }
    const failed: string[] = [];
    const { eps, plausible } = rootFieldPermittivity(line, inputs, 1, { name: 'Schottky emission', factor: 0.25 }, { warnings, notes, failed });
    return { parameters: { relativePermittivity: param(eps.value, eps.stdErr, '1') }, warnings, plausible, notes, failed };
  },
  forward: (v, p, inp) => pooleFrenkel(field(v, inp), p.prefactor, p.trapDepth, p.relativePermittivity, inp.temperature),
};
