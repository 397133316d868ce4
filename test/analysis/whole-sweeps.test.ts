/**
 * Whole sweeps as an instrument records them (test/helpers/whole-sweep.ts: published forward models
 * written out independently of daemon/analysis, a noise floor of either sign, relative noise, leakage,
 * compliance clipping, series and shunt resistance, both polarities), analysed with no window given.
 * Tolerances are the engineering ones a device engineer quotes: barriers ±0.05 eV, ε_r ±10 %, ideality
 * ±0.05, mobility ±30 % (common practice).
 */
import { describe, expect, it } from 'vitest';
import { analyze, REASONS, type FitReport } from '../../daemon/analysis/analyze.js';
import { sweepLegs } from '../../daemon/analysis/sweep-points.js';
import { linearBias, normals, PHYSICAL, wholeSweep, type Device, type SweepSpec } from '../helpers/whole-sweep.js';

interface Case {
  readonly name: string;
  readonly spec: Omit<SweepSpec, 'seed'>;
  readonly model: string;
  readonly inputs: Record<string, number>;
  readonly key: string;
  readonly truth: number;
  /** Absolute tolerance, or relative when `relative`. */
  readonly tol: number;
  readonly relative?: boolean;
  /** Whether readings near zero bias reach the floor (a leakage or a diode's shunt can hold them above it). */
  readonly floorVisible?: boolean;
}

const fn: Device = { kind: 'fowler-nordheim', barrier: 3.1, massRatio: 0.42 };
/** A 10 nm oxide leaking through 1.2 eV traps (trap-assisted tunnelling), 0 → 9 V in 0.1 V steps. */
const tatOxide = (o: { leakage: number; relative: number; floor: number; compliance?: number; seed: number }) =>
  wholeSweep({
    device: { kind: 'trap-assisted-tunneling', prefactor: 100, trapEnergy: 1.2, massRatio: 0.5 },
    thickness: 1e-8,
    area: 1e-8,
    bias: linearBias(0, 9, 91),
    ...o,
  });
const CASES: Case[] = [
  {
    name: 'Fowler–Nordheim, 7 nm oxide, 0 → 10 V, leakage 1e13 Ω, compliance 1 mA',
    spec: { device: fn, thickness: 7e-9, area: 1e-8, leakage: 1e13, bias: linearBias(0, 10, 101), relative: 0.02, floor: 1e-13, compliance: 1e-3 },
    model: 'fowler-nordheim',
    inputs: { thickness: 7e-9, area: 1e-8, massRatio: 0.42 },
    key: 'barrierHeight',
    truth: 3.1,
    tol: 0.05,
    floorVisible: true,
  },
  {
    name: 'Poole–Frenkel, 20 nm nitride (n = 2), 0 → 15 V',
    spec: {
      device: { kind: 'poole-frenkel', prefactor: 1e-2, trapDepth: 1.0, permittivity: 4 },
      thickness: 20e-9,
      area: 1e-8,
      leakage: 1e15,
      bias: linearBias(0, 15, 101),
      relative: 0.02,
      floor: 1e-13,
      compliance: 1e-3,
    },
    model: 'poole-frenkel',
    inputs: { thickness: 20e-9, area: 1e-8, refractiveIndex: 2 },
    key: 'relativePermittivity',
    truth: 4,
    tol: 0.1,
    relative: true,
    floorVisible: true,
  },
  {
    name: 'Schottky emission, 12 nm high-k at 350 K: barrier from the intercept',
    spec: {
      device: { kind: 'schottky', barrier: 0.9, permittivity: 4, richardson: 1.2017e6 },
      thickness: 12e-9,
      area: 1e-8,
      temperature: 350,
      leakage: 1e14,
      bias: linearBias(0, 5, 51),
      relative: 0.02,
      floor: 1e-13,
      compliance: 1e-3,
    },
    model: 'schottky',
    inputs: { thickness: 12e-9, area: 1e-8, temperature: 350, refractiveIndex: 2 },
    key: 'barrierHeight',
    truth: 0.9,
    tol: 0.05,
  },
  {
    name: 'trap-assisted tunnelling through 1.2 eV traps, strong leakage (1e12 Ω)',
    spec: {
      device: { kind: 'trap-assisted-tunneling', prefactor: 100, trapEnergy: 1.2, massRatio: 0.5 },
      thickness: 10e-9,
      area: 1e-8,
      leakage: 1e12,
      bias: linearBias(0, 9, 91),
      relative: 0.02,
      floor: 1e-13,
      compliance: 1e-3,
    },
    model: 'trap-assisted-tunneling',
    inputs: { thickness: 10e-9, area: 1e-8, massRatio: 0.5 },
    key: 'trapEnergy',
    truth: 1.2,
    tol: 0.05,
    floorVisible: true,
  },
  {
    name: 'hopping over 2 nm, 50 nm film',
    spec: {
      device: { kind: 'hopping', prefactor: 1e-3, distance: 2e-9 },
      thickness: 50e-9,
      area: 1e-8,
      leakage: 1e13,
      bias: linearBias(0, 10, 101),
      relative: 0.02,
      floor: 1e-13,
      compliance: 1e-3,
    },
    model: 'hopping',
    inputs: { thickness: 50e-9, area: 1e-8 },
    key: 'hoppingDistance',
    truth: 2e-9,
    tol: 0.1,
    relative: true,
  },
  {
    name: 'dark diode −1 → 0.8 V with 2 Ω series and 100 MΩ shunt, clipped at 10 mA',
    spec: {
      device: { kind: 'diode', saturationCurrent: 1e-12, ideality: 1.2, series: 2, shunt: 1e8 },
      bias: linearBias(-1, 0.8, 181),
      relative: 0.02,
      floor: 1e-13,
      compliance: 1e-2,
    },
    model: 'diode',
    inputs: { temperature: 300 },
    key: 'idealityFactor',
    truth: 1.2,
    tol: 0.05,
  },
  {
    name: 'ohmic → space-charge-limited, 100 nm organic layer, linear 0 → 10 V sweep',
    // σ = 3e-5 S/m puts the transition at 8σd²/(9ε₀ε_rμ) = 1.0 V, inside the sweep.
    spec: {
      device: { kind: 'sclc', mobility: 1e-8, permittivity: 3, conductivity: 3e-5 },
      thickness: 1e-7,
      area: 1e-8,
      bias: linearBias(0, 10, 101),
      relative: 0.02,
      floor: 1e-13,
      compliance: 1e-2,
    },
    model: 'sclc',
    inputs: { thickness: 1e-7, area: 1e-8, permittivity: 3 },
    key: 'mobility',
    truth: 1e-8,
    tol: 0.3,
    relative: true,
  },
];

function err(c: Case, r: FitReport): number {
  const v = r.parameters[c.key].value;
  return c.relative ? v / c.truth - 1 : v - c.truth;
}

describe('whole sweeps, no window given: every mechanism lands within tolerance and says so', () => {
  for (const c of CASES) {
    it(c.name, () => {
      for (const seed of [1, 2, 3, 4, 5]) {
        const s = wholeSweep({ ...c.spec, seed });
        const r = analyze({ x: s.v, y: s.i }, { model: c.model, inputs: c.inputs });
        const what = `seed ${seed}: ${JSON.stringify(r.parameters[c.key])}; warnings ${r.warnings.join('; ')}`;
        expect(Math.abs(err(c, r)), what).toBeLessThanOrEqual(c.tol);
        expect(r.plausible, what).toBe(true);
        expect(r.window.mode).toBe('auto');
        // The noise floor is found from the readings and reported (or reported as not reached).
        if (c.floorVisible) {
          expect(r.noise.floorSource, what).toBe('readings');
          expect(r.noise.floor / 1e-13, what).toBeGreaterThan(0.3);
          expect(r.noise.floor / 1e-13, what).toBeLessThan(3);
        } else expect(['readings', 'not reached']).toContain(r.noise.floorSource);
      }
    });
  }

  it('the floor is estimated within a factor of two from readings of either sign near zero bias', () => {
    for (const floor of [1e-14, 1e-13, 1e-12]) {
      const s = wholeSweep({ ...CASES[0].spec, floor, seed: 7 });
      const r = analyze({ x: s.v, y: s.i }, { model: 'fowler-nordheim', inputs: CASES[0].inputs });
      expect(r.noise.floorSource).toBe('readings');
      expect(r.noise.floor / floor, `floor ${floor}`).toBeGreaterThan(0.5);
      expect(r.noise.floor / floor, `floor ${floor}`).toBeLessThan(2);
      expect(r.points.reasons['at the noise floor']).toBeGreaterThan(0);
    }
  });
});

describe('a sweep with no null readings of its own (a later sweep of an adaptive plan)', () => {
  it('weighs its readings with the floor earlier sweeps measured: the trap energy five times better pinned, its error still honest', () => {
    // A trap-assisted-tunnelling film (10 nm, 1.2 eV traps; the helper's own forward model) read
    // from 5.3 V up, where the current already flows, the way a later adaptive sweep reads it: a
    // climb, then readings gathered at three levels. Noise: 2e-13 A floor and 0.05 % of reading
    // (the simulated instrument's lowest range). Without a floor, one relative-noise figure has to
    // carry the floor's share at 6 pA too, and the top readings are weighed ~20× too lightly.
    const at = (v: number, n: number) => Array.from({ length: n }, (_, k) => v + 0.1 * (((k + 1) * 0.618034) % 1) - 0.05);
    const bias = [5.3, 5.6, 6.0, 6.6, 7.3, 8.1, 8.9, ...at(5.3, 14), ...at(6.6, 12), ...at(8.9, 12)];
    const device: Device = { kind: 'trap-assisted-tunneling', prefactor: 100, trapEnergy: 1.2, massRatio: 0.5 };
    const inputs = { thickness: 1e-8, area: 1e-8, massRatio: 0.5 };
    const outcome = (knownFloor?: { sigma: number; readings: number }) => {
      let z2 = 0;
      let err = 0;
      const seeds = 40;
      for (let seed = 1; seed <= seeds; seed++) {
        const s = wholeSweep({ device, thickness: 1e-8, area: 1e-8, bias, relative: 5e-4, floor: 2e-13, seed });
        const r = analyze({ x: s.v, y: s.i }, { model: 'trap-assisted-tunneling', inputs, knownFloor });
        expect(r.noise.floorSource).toBe(knownFloor ? 'earlier sweeps' : 'not reached');
        const p = r.parameters.trapEnergy;
        z2 += ((p.value - 1.2) / p.stdErr) ** 2;
        err += p.stdErr;
      }
      return { rmsZ: Math.sqrt(z2 / seeds), meanErr: err / seeds };
    };
    const own = outcome();
    const known = outcome({ sigma: 2e-13, readings: 6 });
    // Measured: mean stated error 2.4e-3 eV without, 4.4e-4 eV with; RMS z 0.97 and 0.82.
    expect(known.meanErr).toBeLessThan(0.3 * own.meanErr);
    expect(known.rmsZ).toBeGreaterThan(0.6);
    expect(known.rmsZ).toBeLessThan(1.3);
  });
});

describe('branches and polarity', () => {
  it('a film with a different barrier at each electrode: each branch analysed and the difference said', () => {
    const s = wholeSweep({
      ...CASES[0].spec,
      bias: linearBias(-10, 10, 201),
      negativeDevice: { kind: 'fowler-nordheim', barrier: 2.8, massRatio: 0.42 },
      seed: 3,
    });
    const r = analyze({ x: s.v, y: s.i }, { model: 'fowler-nordheim', inputs: CASES[0].inputs });
    expect(r.branches.length).toBe(2);
    const pos = r.branches.find((b) => b.polarity === 'positive');
    const neg = r.branches.find((b) => b.polarity === 'negative');
    expect(Math.abs((pos?.parameters.barrierHeight.value ?? 0) - 3.1)).toBeLessThan(0.05);
    expect(Math.abs((neg?.parameters.barrierHeight.value ?? 0) - 2.8)).toBeLessThan(0.05);
    // Both branches are the right mechanism over their whole regime: neither is called implausible.
    expect(pos?.plausible, pos?.warnings.join('; ')).toBe(true);
    expect(neg?.plausible, neg?.warnings.join('; ')).toBe(true);
    expect(r.notes.join(' ')).toMatch(/both polarities carry signal/);
    expect(r.warnings.join(' ')).toMatch(/two branches give different barrierHeight/);
    // The zero-bias reading belongs to neither branch.
    expect(r.points.reasons['zero bias']).toBe(1);
  });

  it('a dark diode swept −1 → 0.8 V is fitted on its forward branch (the physics), not on the reverse one', () => {
    const s = wholeSweep({ ...CASES[5].spec, seed: 2 });
    const r = analyze({ x: s.v, y: s.i }, { model: 'diode', inputs: { temperature: 300 } });
    expect(r.branch).toBe('positive');
    expect(Math.abs(r.parameters.idealityFactor.value - 1.2)).toBeLessThan(0.05);
    expect(r.parameters.saturationCurrent.value / 1e-12).toBeGreaterThan(0.8);
    expect(r.parameters.saturationCurrent.value / 1e-12).toBeLessThan(1.25);
  });

  it('a symmetric ±1 V diode sweep with --from 0.2 --to 0.7 fits the forward points of that window', () => {
    const s = wholeSweep({ ...CASES[5].spec, bias: linearBias(-1, 1, 201), seed: 4 });
    const r = analyze({ x: s.v, y: s.i }, { model: 'diode', inputs: { temperature: 300 }, window: { from: 0.2, to: 0.7 } });
    expect(r.branch).toBe('positive');
    expect(r.window.from).toBeGreaterThanOrEqual(0.2);
    expect(r.window.to).toBeLessThanOrEqual(0.7);
    expect(Math.abs(r.parameters.idealityFactor.value - 1.2)).toBeLessThan(0.05);
  });
});

describe('compliance clipping without a flag', () => {
  it('readings pinned at the limit over the top biases are excluded as compliance, and the note says why', () => {
    const s = wholeSweep({ ...CASES[1].spec, seed: 5 });
    const clipped = Array.from(s.compliance).filter((c) => c).length;
    expect(clipped).toBeGreaterThan(1);
    const r = analyze({ x: s.v, y: s.i }, { model: 'poole-frenkel', inputs: CASES[1].inputs });
    expect(r.points.reasons['at compliance']).toBe(clipped);
    expect(r.notes.join(' ')).toMatch(/pinned at 0.001000 A/);
  });
});

describe('a wrong answer is never silent', () => {
  it('a mechanism that holds over a decade of a curve spanning eight: implausible, naming the decades (Poole–Frenkel and hopping on a Fowler–Nordheim oxide, Fowler–Nordheim on a Poole–Frenkel nitride)', () => {
    // Common practice: a conduction mechanism is believed when its line holds over several decades
    // of current. The right mechanisms hold over 5–9 decades of these sweeps; a wrong one finds a
    // straight piece of about one decade with a reasonable-looking parameter.
    for (const seed of [1, 2, 3]) {
      const oxide = wholeSweep({ ...CASES[0].spec, seed });
      for (const model of ['poole-frenkel', 'hopping']) {
        const r = analyze({ x: oxide.v, y: oxide.i }, { model, inputs: { thickness: 7e-9, area: 1e-8 } });
        const what = `${model}, seed ${seed}: ${r.warnings.join('; ')}`;
        expect(r.plausible, what).toBe(false);
        expect(r.warnings.join(' '), what).toMatch(/line holds over [0-9.]+ decades of current of the [0-9.]+ this branch shows above its noise floor/);
      }
      const nitride = wholeSweep({ ...CASES[1].spec, seed });
      const f = analyze({ x: nitride.v, y: nitride.i }, { model: 'fowler-nordheim', inputs: { thickness: 20e-9, area: 1e-8 } });
      expect(f.plausible, f.warnings.join('; ')).toBe(false);
      // The right mechanisms on the same sweeps stay plausible, with no such warning.
      const right = analyze({ x: oxide.v, y: oxide.i }, { model: 'fowler-nordheim', inputs: CASES[0].inputs });
      expect(right.plausible).toBe(true);
      expect(right.warnings.join(' ')).not.toMatch(/line holds over/);
    }
  });

  it('Poole–Frenkel, hopping, Schottky and trap-assisted-tunnelling lines on a Fowler–Nordheim oxide: implausible in every noise draw, the Fowler–Nordheim line plausible', () => {
    // Twenty draws at an instrument's 0.1 % and at 2 % of reading. A wrong film mechanism finds a
    // nearly straight piece of its bent plot; where that piece is long enough to pass the decades
    // rule, the Fowler–Nordheim line holds the same readings over two decades more. At 2 % the
    // trap-assisted-tunnelling plot (ln J against 1/E, the Fowler–Nordheim one without its E²) is
    // straight within the noise over most of the curve, with a trap energy near the barrier: the
    // data cannot tell the two apart there, and that case is not asserted.
    for (const relative of [1e-3, 0.02]) {
      for (let seed = 1; seed <= 20; seed++) {
        const oxide = wholeSweep({ ...CASES[0].spec, relative, seed });
        const models = relative < 0.01 ? ['poole-frenkel', 'hopping', 'schottky', 'trap-assisted-tunneling'] : ['poole-frenkel', 'hopping', 'schottky'];
        for (const model of models) {
          const r = analyze({ x: oxide.v, y: oxide.i }, { model, inputs: { thickness: 7e-9, area: 1e-8, massRatio: 0.42 } });
          expect(r.plausible, `${model}, ${relative}, seed ${seed}: ${r.warnings.join('; ')}`).toBe(false);
        }
        const right = analyze({ x: oxide.v, y: oxide.i }, { model: 'fowler-nordheim', inputs: CASES[0].inputs });
        expect(right.plausible, `${relative}, seed ${seed}: ${right.warnings.join('; ')}`).toBe(true);
      }
    }
  });

  it('an ohmic line asked of a diode: its automatic window misses its own readings, and says so (it passed in 9 of 10 draws before)', () => {
    for (let seed = 1; seed <= 10; seed++) {
      const s = wholeSweep({
        device: { kind: 'diode', saturationCurrent: 2e-11, ideality: 1.6, series: 3, shunt: 1e12 },
        bias: linearBias(0, 0.7, 60),
        relative: 1e-3,
        floor: 1e-13,
        seed,
      });
      const r = analyze({ x: s.v, y: s.i }, { model: 'ohmic' });
      expect(r.plausible, `seed ${seed}: ${r.warnings.join('; ')}`).toBe(false);
      expect(r.warnings.join(' ')).toMatch(/the automatic window does not follow the mechanism's line within the noise: χ² [\d.]+ for \d+ degrees of freedom/);
    }
  });

  it('the right mechanism on a curve of two regimes is not called implausible when the window search settles on part of one (two-diode silicon junction, n = 2 below n = 1)', () => {
    // Two-diode model (Sah, Noyce & Shockley 1957): recombination current with n = 2 under the
    // diffusion current with n = 1, plus a 1 GΩ shunt; 0.05 % noise and a 1e-13 A floor.
    const { Q, KB } = PHYSICAL;
    const vt = (KB * 300) / Q;
    const noise = normals(11);
    const v = linearBias(0, 0.8, 161);
    const i = v.map((b) => {
      const c = 1e-15 * Math.expm1(b / vt) + 1e-10 * Math.expm1(b / (2 * vt)) + b / 1e9;
      return c + (5e-4 * Math.abs(c) + 1e-13) * noise();
    });
    const r = analyze({ x: v, y: i }, { model: 'diode', inputs: { temperature: 300 } });
    expect(r.warnings.join(' ')).not.toMatch(/line holds over/);
    expect(r.plausible, r.warnings.join('; ')).toBe(true);
    // Whichever regime it reports, its ideality is one of the two.
    const n = r.parameters.idealityFactor.value;
    expect(Math.min(Math.abs(n - 1), Math.abs(n - 2)), `n = ${n}`).toBeLessThan(0.2);
  });

  it('trap-assisted tunnelling asked of a film that only leaks: implausible, with the reason (not 0.1 eV passed as fine), whatever the noise draw', () => {
    // Ohmic films (1e12 and 1e11 Ω) and nothing else, over thirty noise draws each: the fitted line
    // is a small correction to the leakage, or holds over less than a decade, and is never passed.
    for (const leakage of [1e12, 1e11]) {
      for (let seed = 1; seed <= 30; seed++) {
        const s = wholeSweep({
          device: { kind: 'hopping', prefactor: 1e-30, distance: 1e-10 },
          thickness: 10e-9,
          area: 1e-8,
          leakage,
          bias: linearBias(0, 9, 91),
          relative: 0.02,
          floor: 1e-13,
          seed,
        });
        const r = analyze({ x: s.v, y: s.i }, { model: 'trap-assisted-tunneling', inputs: { thickness: 10e-9, area: 1e-8, massRatio: 0.5 } });
        const what = `${leakage} Ω, seed ${seed}: ${r.warnings.join('; ')}`;
        expect(r.plausible, what).toBe(false);
        expect(r.warnings.join(' '), what).toMatch(
          /no faster than an ohmic leakage|carries \d+ % of the current even at the top|spans only [0-9.]+ decades|no range|not determined/,
        );
      }
    }
  });

  it('Schottky, hopping, Poole–Frenkel and power-law lines asked of a trap-assisted-tunnelling film: implausible (each holds under a decade), the right mechanism plausible', () => {
    // A 10 nm oxide leaking through 1.2 eV traps (Chiu 2014 review's form, written out in the helper),
    // 0 → 9 V: its current spans under three decades above the floor, too few for the decades-share
    // rule; the wrong mechanisms each find a straight piece of under one decade.
    for (let seed = 1; seed <= 10; seed++) {
      const s = tatOxide({ leakage: 1e14, relative: 1e-3, floor: 1e-13, compliance: 1e-3, seed });
      const inputs = { thickness: 1e-8, area: 1e-8, massRatio: 0.5, temperature: 300 };
      for (const model of ['schottky', 'hopping', 'poole-frenkel', 'power-law']) {
        const r = analyze({ x: s.v, y: s.i }, { model, inputs });
        expect(r.plausible, `${model}, seed ${seed}: ${r.warnings.join('; ')}`).toBe(false);
      }
      const right = analyze({ x: s.v, y: s.i }, { model: 'trap-assisted-tunneling', inputs });
      expect(right.plausible, `seed ${seed}: ${right.warnings.join('; ')}`).toBe(true);
      expect(Math.abs(right.parameters.trapEnergy.value - 1.2)).toBeLessThan(0.05);
    }
  });

  it('an ohmic line on the readings of a trap-assisted-tunnelling film below its onset (the noise floor): never plausible, whether its conductance is under twice its uncertainty or just past it', () => {
    // The film of the test above with a 1e14 Ω leakage, 0.2 % noise and a 2e-13 A floor: below about
    // 4.5 V the readings are the floor (the leakage carries 4.5e-14 A at 4.5 V, a fifth of the
    // floor's σ), and the ohmic window search settles there. An estimate under twice its standard
    // error is not distinguishable from zero (a 95 % test, common practice). A slope just past that
    // is still the floor, picked as the best-looking stretch: the line must also rise across its
    // window by three times the floor's σ, the limit of detection (IUPAC; Long & Winefordner 1983).
    // The 2σ test alone had let 4 of these 20 draws pass with slopes of 2–3.4σ.
    let under = 0;
    let past = 0;
    for (let seed = 1; seed <= 20; seed++) {
      const s = wholeSweep({
        device: { kind: 'trap-assisted-tunneling', prefactor: 100, trapEnergy: 1.2, massRatio: 0.5 },
        thickness: 1e-8,
        area: 1e-8,
        leakage: 1e14,
        bias: linearBias(0, 9, 91),
        relative: 2e-3,
        floor: 2e-13,
        seed,
      });
      const r = analyze({ x: s.v, y: s.i }, { model: 'ohmic', inputs: { thickness: 1e-8, area: 1e-8 } });
      const c = r.parameters.conductivity;
      const what = `seed ${seed}: conductivity ${c.value} ± ${c.stdErr}, window ${r.window.from}–${r.window.to} V: ${r.warnings.join('; ')}`;
      expect(r.window.to, what).toBeLessThan(5);
      expect(r.plausible, what).toBe(false);
      expect(r.warnings.join(' '), what).toMatch(/give a window where the current rises above the floor/);
      if (Math.abs(c.value) < 2 * c.stdErr) {
        under++;
        expect(r.warnings.join(' '), what).toMatch(/the current from [0-9.]+ to [0-9.]+ V is indistinguishable from zero \(the noise floor: σ = /);
        expect(r.warnings.join(' '), what).toMatch(/less than twice its uncertainty/);
      } else {
        past++;
        expect(r.warnings.join(' '), what).toMatch(
          /changes by only [0-9.e-]+ A, under three times the noise floor \(σ = [0-9.e-]+ A, the limit of detection\)/,
        );
      }
    }
    expect(under).toBeGreaterThanOrEqual(10);
    expect(past).toBeGreaterThanOrEqual(1);
  });

  it('ohmic lines that measure a current stay plausible: a leakage above the floor, a 1 MΩ resistor (Ohm’s law)', () => {
    for (let seed = 1; seed <= 10; seed++) {
      for (const leakage of [1e12, 1e13]) {
        const s = tatOxide({ leakage, relative: 0.02, floor: 1e-13, seed });
        const r = analyze({ x: s.v, y: s.i }, { model: 'ohmic', inputs: { thickness: 1e-8, area: 1e-8 } });
        expect(r.plausible, `${leakage} Ω, seed ${seed}: ${r.warnings.join('; ')}`).toBe(true);
        expect(r.warnings.join(' ')).not.toMatch(/indistinguishable from zero/);
      }
      const noise = normals(seed);
      const v = linearBias(0, 1, 21);
      const i = v.map((b) => b / 1e6 + 1e-13 * noise() + 1e-3 * (b / 1e6) * noise());
      const r = analyze({ x: v, y: i }, { model: 'ohmic' });
      expect(r.plausible, `resistor, seed ${seed}: ${r.warnings.join('; ')}`).toBe(true);
      expect(Math.abs(r.parameters.resistance.value / 1e6 - 1)).toBeLessThan(0.01);
    }
  });

  it('Poole–Frenkel data read as Schottky: ε_r far from n², implausible, and the hint names the other reading', () => {
    const s = wholeSweep({ ...CASES[1].spec, seed: 6 });
    const r = analyze({ x: s.v, y: s.i }, { model: 'schottky', inputs: CASES[1].inputs });
    expect(r.plausible).toBe(false);
    expect(r.warnings.join(' ')).toMatch(/far from n²/);
  });

  it('a manual window across the leakage bend and the floor: warned, implausible', () => {
    const s = wholeSweep({ ...CASES[0].spec, seed: 8 });
    const r = analyze({ x: s.v, y: s.i }, { model: 'fowler-nordheim', inputs: CASES[0].inputs, window: { from: 0.5, to: 9.5 } });
    expect(r.plausible).toBe(false);
    expect(r.warnings.join(' ')).toMatch(/reaches the noise floor/);
  });

  it('an ohmic + V² mixture whose V² part is not V² (log–log slope 2.6, traps filling) fails the slope check with its own uncertainty', () => {
    // J = σV/d + K·V^2.6: a trap-limited power law, not Mott–Gurney.
    const v = linearBias(0.05, 10, 100);
    const i = Float64Array.from(v, (x, k) => ((3e-7 * x) / 1e-7 + 3e-5 * x ** 2.6) * 1e-8 * (1 + 0.01 * Math.sin(13 * k)));
    const r = analyze({ x: v, y: i }, { model: 'sclc', inputs: { thickness: 1e-7, area: 1e-8, permittivity: 3 }, window: 'all' });
    expect(r.plausible).toBe(false);
    expect(r.warnings.join(' ')).toMatch(/log–log slope|regime change|bend/);
  });
});

describe('space-charge-limited with an ohmic background (Mott & Gurney 1940; Lampert & Mark 1970)', () => {
  it('J/V against V gives σ, μ and the transition voltage 8σd²/(9ε₀ε_rμ) on a linear sweep; the V² slope is 2 within its error', () => {
    const s = wholeSweep({ ...CASES[6].spec, seed: 9 });
    const r = analyze({ x: s.v, y: s.i }, { model: 'sclc', inputs: CASES[6].inputs });
    const eps0 = 8.8541878128e-12; // CODATA 2018
    const vtr = (8 * 3e-5 * 1e-14) / (9 * eps0 * 3 * 1e-8); // 1.004 V for these values
    expect(Math.abs(r.parameters.mobility.value / 1e-8 - 1)).toBeLessThan(0.3);
    expect(Math.abs(r.parameters.conductivity.value / 3e-5 - 1)).toBeLessThan(0.3);
    expect(Math.abs(r.parameters.transitionVoltage.value / vtr - 1)).toBeLessThan(0.3);
    expect(Math.abs(r.parameters.exponent.value - 2)).toBeLessThan(3 * r.parameters.exponent.stdErr + 0.05);
    expect(r.notes.join(' ')).toMatch(/consistent with 2/);
  });
});

describe('a sweep that never leaves its noise floor', () => {
  it('a 0–2 V sense sweep of a 7 nm oxide: readings of either sign are noise, not "too large to be noise", and give the floor', async () => {
    // At 2 V (2.9 MV/cm) Fowler–Nordheim current through 7 nm of oxide is far below any instrument
    // (Fowler & Nordheim 1928; Lenzlinger & Snow 1969): every reading is the instrument's floor,
    // of either sign. With nothing larger in the sweep, the largest reading is itself noise, so
    // comparing the readings against the bias with it called them a photocurrent in every draw.
    const { classifySweep } = await import('../../daemon/analysis/sweep-points.js');
    let quiet = 0;
    const floors: number[] = [];
    for (let seed = 1; seed <= 10; seed++) {
      const s = wholeSweep({ device: fn, thickness: 7e-9, area: 1e-8, bias: linearBias(0, 2, 11), relative: 0.02, floor: 2e-13, seed });
      const c = classifySweep({ x: s.v, y: s.i });
      if (!c.notes.some((n) => /too large to be noise/.test(n))) {
        quiet++;
        floors.push(c.noise.floor);
      }
    }
    // Readings all of one sign (an offset, a photocurrent) are still called so; for 11 noise
    // readings fewer than a fifth of one sign happens in 6.5 % of draws (binomial, p = ½).
    expect(quiet).toBeGreaterThanOrEqual(8);
    // The robust RMS of about ten readings scatters by a quarter or so: within 3× of the truth.
    for (const f of floors) expect(f / 2e-13).toBeGreaterThan(1 / 3);
    for (const f of floors) expect(f / 2e-13).toBeLessThan(3);
  });
});

describe('dimensionless inputs out of any real film', () => {
  it('an effective-mass ratio of 5 (a slip for 0.5) or a refractive index of 20 is not plausible and says which input; real values pass', () => {
    // m*/m₀ of SiO2 is 0.3–0.5 (Weinberg 1982); optical n of solids lies about 1.3–4 (common practice).
    const s = wholeSweep({ ...CASES[0].spec, seed: 2 });
    const good = analyze({ x: s.v, y: s.i, compliance: s.compliance }, { model: 'fowler-nordheim', inputs: CASES[0].inputs });
    expect(good.warnings.join(' ')).not.toMatch(/effective-mass ratio/);
    const bad = analyze({ x: s.v, y: s.i, compliance: s.compliance }, { model: 'fowler-nordheim', inputs: { ...CASES[0].inputs, massRatio: 5 } });
    expect(bad.plausible).toBe(false);
    expect(bad.warnings.join(' ')).toMatch(/effective-mass ratio m\*\/m₀ 5 is outside 0\.02–2/);
    const pf = wholeSweep({ ...CASES[1].spec, seed: 2 });
    const n20 = analyze({ x: pf.v, y: pf.i, compliance: pf.compliance }, { model: 'poole-frenkel', inputs: { ...CASES[1].inputs, refractiveIndex: 20 } });
    expect(n20.plausible).toBe(false);
    expect(n20.warnings.join(' ')).toMatch(/refractive index n 20 is outside 1–5/);
  });
});

describe('out-and-back sweeps', () => {
  // The 7 nm Fowler–Nordheim oxide of the first case, swept 0 → 10 V and back in 0.1 V steps. A
  // film that traps electrons on the way out raises its effective barrier for the way back
  // (hysteresis of the I–V curve: a shift of the Fowler–Nordheim plot, common practice); here the
  // way back is drawn with a barrier 0.05 eV higher.
  const inputs = { thickness: 7e-9, area: 1e-8, massRatio: 0.42 };
  const out = linearBias(0, 10, 101);
  const back = linearBias(9.9, 0, 100);
  const legs = (seed: number, backBarrier: number) => {
    const spec = { thickness: 7e-9, area: 1e-8, leakage: 1e13, relative: 0.02, floor: 1e-13, compliance: 1e-3 };
    const a = wholeSweep({ ...spec, device: fn, bias: out, seed });
    const b = wholeSweep({ ...spec, device: { ...fn, barrier: backBarrier }, bias: back, seed: seed + 1000 });
    return { x: [...a.v, ...b.v], y: [...a.i, ...b.i], compliance: [...a.compliance, ...b.compliance] };
  };

  it('legs 0.05 eV apart: the first pass is the result (within 3σ of its barrier), the way back is fitted apart, and hysteresis is warned of', () => {
    for (let seed = 1; seed <= 5; seed++) {
      const r = analyze(legs(seed, 3.15), { model: 'fowler-nordheim', inputs });
      const b = r.parameters.barrierHeight;
      const what = `seed ${seed}: ${b.value} ± ${b.stdErr}; ${r.warnings.join('; ')}`;
      expect(Math.abs(b.value - 3.1), what).toBeLessThan(3 * b.stdErr);
      expect(r.points.reasons[REASONS.wayBack], what).toBe(100);
      const w = r.warnings.find((x) => x.startsWith('hysteresis'));
      expect(w, what).toMatch(/^hysteresis: the way back gives barrierHeight 3\.1[45]\d* ± [0-9.]+ eV against 3\.(09|10)\d* ± [0-9.]+ eV on the way out/);
      // The way back's own barrier, from the note, is within 3σ of the barrier it was drawn with.
      const m = r.notes.join(' ').match(/way back: barrierHeight ([0-9.]+) ± ([0-9.]+) eV/);
      expect(m, what).not.toBeNull();
      expect(Math.abs(Number(m?.[1]) - 3.15), what).toBeLessThan(3 * Number(m?.[2]));
    }
  });

  it('one curve both ways: no hysteresis warning in at least 9 of 10 draws, and the result covers the barrier', () => {
    let warned = 0;
    for (let seed = 1; seed <= 10; seed++) {
      const r = analyze(legs(seed, 3.1), { model: 'fowler-nordheim', inputs });
      const b = r.parameters.barrierHeight;
      expect(Math.abs(b.value - 3.1), `seed ${seed}: ${b.value} ± ${b.stdErr}`).toBeLessThan(3 * b.stdErr);
      expect(r.notes.join(' ')).toMatch(/an out-and-back sweep: the 101 readings of the first pass are fitted, the 100 on the way back apart/);
      if (r.warnings.some((x) => x.startsWith('hysteresis'))) warned++;
    }
    expect(warned).toBeLessThanOrEqual(1);
  });

  it('a sweep from one polarity to the other, or out only, is not split', () => {
    const s = wholeSweep({ ...CASES[0].spec, bias: linearBias(-10, 10, 201), seed: 3 });
    expect(sweepLegs(s.v)).toBeUndefined();
    expect(sweepLegs(out)).toBeUndefined();
    const r = analyze({ x: s.v, y: s.i, compliance: s.compliance }, { model: 'fowler-nordheim', inputs });
    expect(r.points.reasons[REASONS.wayBack]).toBeUndefined();
    // Out and back on both polarities (0 → 10 → 0 → −10 → 0): the first pass holds both branches.
    const both = [...linearBias(0, 10, 101), ...linearBias(9.9, -10, 200), ...linearBias(-9.9, 0, 100)];
    const split = sweepLegs(both);
    const round = (v: number) => Math.round(v * 1e6) / 1e6;
    expect(split?.out.map((k) => round(both[k]))).toEqual([...linearBias(0, 10, 101), ...linearBias(-0.1, -10, 100)].map(round));
    expect(split?.back.length).toBe(200);
  });
});
