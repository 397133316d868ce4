/**
 * Realistic whole sweeps for tests: what a source-measure unit records from zero bias up, with a
 * noise floor of either sign, relative noise, a parallel leakage, compliance clipping, series and
 * shunt resistance, both polarities, ohmic → space-charge-limited.
 *
 * The forward models are written out here again from the published equations, on purpose not
 * imported from daemon/analysis, so the fits are checked against an implementation outside the code
 * under test (constants CODATA 2018):
 *  - Fowler–Nordheim: J = q³/(8πhφ m_r)·E²·exp(−8π√(2m₀m_r)(qφ)^{3/2}/(3qhE))
 *    (Fowler & Nordheim 1928; Lenzlinger & Snow, J. Appl. Phys. 40, 278, 1969).
 *  - Poole–Frenkel: J = C·E·exp(−q(φ_t − √(qE/(πε₀ε_r)))/kT) (Frenkel, Phys. Rev. 54, 647, 1938).
 *  - Schottky emission: J = A*T²·exp(−q(φ_B − √(qE/(4πε₀ε_r)))/kT) (Sze & Ng 2007, ch. 3).
 *  - Trap-assisted tunnelling: J = J₀·exp(−8π√(2m₀m_r)(qφ_t)^{3/2}/(3qhE)) (Chiu 2014 review).
 *  - Hopping: J = J₀·exp(qaE/kT) (Mott & Davis 1979; Chiu 2014 review).
 *  - Space-charge-limited with an ohmic background: J = σV/d + (9/8)ε₀ε_rμV²/d³ (Mott & Gurney 1940;
 *    Lampert & Mark 1970).
 *  - Diode: I = I₀(exp((V − IR_s)/(nkT/q)) − 1) + (V − IR_s)/R_sh, solved for I (Shockley 1949;
 *    Sze & Ng 2007).
 * The device parameters in the tests are textbook-typical values of our own choosing.
 */

const Q = 1.602176634e-19;
const H = 6.62607015e-34;
const KB = 1.380649e-23;
const M0 = 9.1093837015e-31;
const EPS0 = 8.8541878128e-12;

export type Device =
  | { kind: 'fowler-nordheim'; barrier: number; massRatio: number }
  | { kind: 'poole-frenkel'; prefactor: number; trapDepth: number; permittivity: number }
  | { kind: 'schottky'; barrier: number; permittivity: number; richardson: number }
  | { kind: 'trap-assisted-tunneling'; prefactor: number; trapEnergy: number; massRatio: number }
  | { kind: 'hopping'; prefactor: number; distance: number }
  | { kind: 'sclc'; mobility: number; permittivity: number; conductivity: number }
  | { kind: 'diode'; saturationCurrent: number; ideality: number; series: number; shunt: number };

export interface SweepSpec {
  readonly device: Device;
  /** Film thickness, m (films only). */
  readonly thickness?: number;
  /** Area, m² (films only; diodes are given in A). */
  readonly area?: number;
  readonly temperature?: number;
  /** Parallel ohmic leakage, Ω. */
  readonly leakage?: number;
  /** Bias points, V, in the order measured. */
  readonly bias: ArrayLike<number>;
  /** Relative noise σ (fraction of reading). */
  readonly relative: number;
  /** Additive noise σ at zero current (the floor), A. */
  readonly floor: number;
  /** Compliance limit, A: the reading is clipped to ±limit. */
  readonly compliance?: number;
  /** Scale of the negative branch's current relative to the positive one (an asymmetric film). */
  readonly negativeScale?: number;
  /** Device parameters for the negative branch, when they differ (e.g. another electrode barrier). */
  readonly negativeDevice?: Device;
  readonly seed: number;
}

export interface Sweep {
  readonly v: Float64Array;
  readonly i: Float64Array;
  /** 1 where the reading is clipped at compliance. */
  readonly compliance: Float64Array;
  /** The noise-free current at each bias, A. */
  readonly truth: Float64Array;
}

/** A small seeded generator (xorshift32) and Box–Muller normals; independent of daemon/analysis/random.ts. */
export function normals(seed: number): () => number {
  let s = (seed * 2654435761) >>> 0 || 1;
  const u = () => {
    s ^= s << 13;
    s >>>= 0;
    s ^= s >>> 17;
    s ^= s << 5;
    s >>>= 0;
    return (s + 0.5) / 4294967296;
  };
  return () => Math.sqrt(-2 * Math.log(u())) * Math.cos(2 * Math.PI * u());
}

/** Magnitude of the device current (A) at bias magnitude b > 0 (films: through the area). */
export function deviceCurrent(dev: Device, b: number, spec: Pick<SweepSpec, 'thickness' | 'area' | 'temperature'>): number {
  const T = spec.temperature ?? 300;
  const kT = KB * T;
  if (dev.kind === 'diode') return diodeCurrent(dev, b, T);
  const d = spec.thickness as number;
  const A = spec.area ?? 1;
  const E = b / d;
  let j: number;
  switch (dev.kind) {
    case 'fowler-nordheim': {
      const phi = dev.barrier * Q;
      const pre = (Q * Q * Q) / (8 * Math.PI * H * phi * dev.massRatio);
      j = pre * E * E * Math.exp((-8 * Math.PI * Math.sqrt(2 * M0 * dev.massRatio) * phi ** 1.5) / (3 * Q * H * E));
      break;
    }
    case 'poole-frenkel':
      j = dev.prefactor * E * Math.exp((-Q * (dev.trapDepth - Math.sqrt((Q * E) / (Math.PI * EPS0 * dev.permittivity)))) / kT);
      break;
    case 'schottky':
      j = dev.richardson * T * T * Math.exp((-Q * (dev.barrier - Math.sqrt((Q * E) / (4 * Math.PI * EPS0 * dev.permittivity)))) / kT);
      break;
    case 'trap-assisted-tunneling': {
      const phi = dev.trapEnergy * Q;
      j = dev.prefactor * Math.exp((-8 * Math.PI * Math.sqrt(2 * M0 * dev.massRatio) * phi ** 1.5) / (3 * Q * H * E));
      break;
    }
    case 'hopping':
      j = dev.prefactor * Math.exp((Q * dev.distance * E) / kT);
      break;
    case 'sclc':
      j = (dev.conductivity * b) / d + ((9 / 8) * EPS0 * dev.permittivity * dev.mobility * (b * b)) / d ** 3;
      break;
  }
  return j * A;
}

/** Forward diode current at bias v (either sign), solved from the implicit equation by bisection. */
function diodeCurrent(dev: Extract<Device, { kind: 'diode' }>, v: number, T: number): number {
  const vt = (KB * T) / Q;
  const f = (i: number) => dev.saturationCurrent * Math.expm1((v - i * dev.series) / (dev.ideality * vt)) + (v - i * dev.series) / dev.shunt - i;
  // f is decreasing in i; bracket the root.
  let lo = -dev.saturationCurrent - Math.abs(v) / dev.shunt - 1e-30;
  let hi = Math.max(0, v / Math.max(dev.series, 1e-12)) + dev.saturationCurrent + Math.abs(v) / dev.shunt + 1e-30;
  for (let k = 0; k < 200; k++) {
    const mid = 0.5 * (lo + hi);
    if (f(mid) > 0) lo = mid;
    else hi = mid;
  }
  return 0.5 * (lo + hi);
}

/** One whole sweep as an SMU would record it (load convention: current into the device positive). */
export function wholeSweep(spec: SweepSpec): Sweep {
  const n = spec.bias.length;
  const normal = normals(spec.seed);
  const v = new Float64Array(n);
  const i = new Float64Array(n);
  const c = new Float64Array(n);
  const truth = new Float64Array(n);
  for (let k = 0; k < n; k++) {
    const b = spec.bias[k];
    let cur = 0;
    if (spec.device.kind === 'diode') cur = deviceCurrent(spec.device, b, spec);
    else if (b !== 0) {
      const dev = b < 0 && spec.negativeDevice ? spec.negativeDevice : spec.device;
      cur = Math.sign(b) * deviceCurrent(dev, Math.abs(b), spec) * (b < 0 ? (spec.negativeScale ?? 1) : 1);
    }
    if (spec.leakage) cur += b / spec.leakage;
    truth[k] = cur;
    let meas = cur * (1 + spec.relative * normal()) + spec.floor * normal();
    if (spec.compliance !== undefined && Math.abs(cur) >= spec.compliance) {
      meas = Math.sign(cur) * spec.compliance;
      c[k] = 1;
    }
    v[k] = b;
    i[k] = meas;
  }
  return { v, i, compliance: c, truth };
}

/** Evenly spaced bias from `from` to `to`, n points. */
export function linearBias(from: number, to: number, n: number): Float64Array {
  return Float64Array.from({ length: n }, (_, k) => from + ((to - from) * k) / (n - 1));
}

/**
 * A whole sweep of a 7 nm oxide, both polarities (−10 → 10 V), as the command-line tests read it:
 * Fowler–Nordheim tunnelling over a 3.1 eV barrier (effective mass 0.42 m₀), a 1e13 Ω leakage, 2 % noise,
 * a 1e-13 A floor and a 1 mA compliance. Add a seed.
 */
export const FN_OXIDE_BOTH_POLARITIES: Omit<SweepSpec, 'seed'> = {
  device: { kind: 'fowler-nordheim', barrier: 3.1, massRatio: 0.42 },
  thickness: 7e-9,
  area: 1e-8,
  leakage: 1e13,
  bias: linearBias(-10, 10, 201),
  relative: 0.02,
  floor: 1e-13,
  compliance: 1e-3,
};

/** Sweep data as a CSV text (header V,I), compliance column optional. */
export function toCsv(s: Sweep, withCompliance = false): string {
  const rows = Array.from(s.v, (x, k) => (withCompliance ? `${x},${s.i[k]},${s.compliance[k]}` : `${x},${s.i[k]}`));
  return `${withCompliance ? 'V,I,compliance' : 'V,I'}\n${rows.join('\n')}\n`;
}

/** The exact dynamic permittivity behind a Poole–Frenkel or Schottky slope, for checks. */
export const PHYSICAL = { Q, H, KB, M0, EPS0 };
