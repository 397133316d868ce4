/**
 * Adaptive sweeps against fixed sweeps on the built-in insulator scenarios, through the real runner,
 * guard, driver and SCPI session against the simulated instrument (the benchmark's own harness,
 * test/bench/adaptive.ts). For each scenario the target is the median error of the scenario's usual
 * fixed sweep over five noise seeds; the adaptive sweep must use fewer readings than that sweep and
 * no more than the fewest-point fixed sweep reaching the same error, go no higher in bias, and give
 * the parameter within the engineering tolerance of the simulated device's own value and within
 * 3 stated σ of it. The measured reductions (`npm run bench`, fifteen seeds: 1.7–4.1× on the first
 * sweep, 2.2–4.9× on later ones) fall short of the 3× the design aimed at on three of five films; here the summed readings must stay at least 1.4× fewer
 * (about 1.7× at this seed). Later sweeps of a run go straight to the regime learned by the first
 * and never above its top. A fit whose noise level, read from a handful of readings, comes out low
 * by chance does not stop a sweep.
 */
import { describe, expect, it } from 'vitest';
import { findScenario } from '../../daemon/simulator/scenarios.js';
import { rmSync } from 'node:fs';
import { scanJournal } from '../../daemon/journal/reader.js';
import { adaptivePlan, adaptiveRun, CASES, fixedBaseline, run, withinTolerance } from '../bench/adaptive.js';
import { renderReport } from '../../daemon/journal/report.js';
import { loadSession } from '../../daemon/journal/sessions.js';

const SEED = 2;
/** The noise seeds the target and the fixed baseline are taken over here (the benchmark takes fifteen). */
const FIVE_SEEDS = [1, 2, 3, 4, 5];

describe('adaptive sweeps against the fixed sweep on every insulator scenario', () => {
  it('fewer readings, no higher bias, the parameter within tolerance of the device and honestly stated', async () => {
    let fewestTotal = 0;
    let adaptiveTotal = 0;
    const reached: string[] = [];
    for (const c of CASES) {
      const sc = findScenario(c.scenario);
      const truth = sc.device.params[c.parameter];
      // The target: the median error of the usual sweep over five noise seeds; the fewest-point
      // fixed sweep whose median error reaches it.
      const base = await fixedBaseline(c, FIVE_SEEDS);
      expect(base, `${c.scenario}: the usual fixed sweep fits`).toBeDefined();
      const b = base as NonNullable<typeof base>;
      const a = await adaptiveRun(c, b.target, SEED);
      expect(a, `${c.scenario}: the adaptive sweep gives a fit`).toBeDefined();
      const o = a as NonNullable<typeof a>;
      expect(o.plausible, c.scenario).toBe(true);
      expect(o.readings, `${c.scenario}: readings against the usual ${sc.sweep.points}`).toBeLessThan(sc.sweep.points);
      expect(o.readings, `${c.scenario}: readings against the fewest-point fixed sweep's ${b.points}`).toBeLessThanOrEqual(b.points);
      expect(o.peak, c.scenario).toBeLessThanOrEqual(Math.max(Math.abs(sc.sweep.start), Math.abs(sc.sweep.stop)) + 1e-9);
      expect(withinTolerance(c, o.value, truth), `${c.scenario}: ${o.value} against the device's ${truth}`).toBe(true);
      expect(Math.abs(o.value - truth), `${c.scenario}: within 3 stated σ (${o.stdErr})`).toBeLessThanOrEqual(3 * o.stdErr);
      expect(['target-reached', 'bias-limit', 'current-limit']).toContain(o.stopReason);
      if (o.stopReason === 'target-reached') {
        reached.push(c.scenario);
        expect(o.stdErr, c.scenario).toBeLessThanOrEqual(b.target);
      }
      fewestTotal += b.points;
      adaptiveTotal += o.readings;
    }
    // Fowler–Nordheim, Schottky and hopping reach the target in nearly every seed the benchmark tries.
    expect(reached).toEqual(expect.arrayContaining(['oxide-fn', 'highk-schottky', 'film-hopping']));
    // About 1.5× fewer in all than the fewest-point fixed sweeps reaching the same errors (measured).
    expect(fewestTotal / adaptiveTotal).toBeGreaterThanOrEqual(1.4);
  }, 120_000);

  it('a noise estimate that comes out low by chance does not stop the sweep with an error several times too small', async () => {
    // At this seed the oxide's fit, from eight regime readings, put its relative noise at the
    // 0.01 % minimum: the stated error fell to ±3.6e-5 eV and the sweep stopped after 17 readings,
    // 7.9 stated σ from the device's barrier — until the stop also asked for the error the same
    // readings give with a typical instrument's noise.
    const c = CASES.find((k) => k.scenario === 'oxide-fn') as (typeof CASES)[number];
    const truth = findScenario(c.scenario).device.params[c.parameter];
    const o = await adaptiveRun(c, 1.5e-4, 1);
    expect(o?.stopReason).toBe('target-reached');
    const a = o as NonNullable<typeof o>;
    expect(Math.abs(a.value - truth), `${a.value} ± ${a.stdErr} eV against ${truth} eV`).toBeLessThanOrEqual(3 * a.stdErr);
    expect(a.stdErr).toBeGreaterThan(1e-4);
  }, 60_000);

  it('a line of the current itself (a 1 MΩ resistor, ohmic): the sweep stops when the resistance is pinned, well before the range ends', async () => {
    // I = V/R (Ohm's law): the fit's slope is 1/R in A/V, not a slope of ln I, so the planner's
    // ln I information says nothing about it; the stop rests on the fit's error alone.
    const device = { mechanism: 'ohmic', params: { resistance: 1e6 }, inputs: {} };
    const plan = { kind: 'adaptive', start: 0, stop: 10, maxPoints: 200, compliance: 1e-3, target: { parameter: 'resistance', stdErr: 1000 } };
    const { result, dir } = await run('oxide-fn', plan, 1, { device, model: 'ohmic', compliance: 1e-3 });
    rmSync(dir, { recursive: true, force: true });
    const sw = result.adaptive?.sweeps[0];
    expect(sw?.stopReason).toBe('target-reached');
    expect(sw?.parameter?.stdErr).toBeLessThanOrEqual(1000);
    expect(Math.abs((sw?.parameter?.value as number) - 1e6)).toBeLessThanOrEqual(3 * (sw?.parameter?.stdErr as number));
    expect(sw?.readings).toBeLessThan(60);
  }, 60_000);

  it('later sweeps start where the first found the regime, stay at or below its top and reach the target', async () => {
    const c = CASES.find((k) => k.scenario === 'nitride-pf') as (typeof CASES)[number];
    const sc = findScenario(c.scenario);
    const base = await fixedBaseline(c, FIVE_SEEDS);
    const target = (base as NonNullable<typeof base>).target;
    const { result, dir } = await run(c.scenario, { ...adaptivePlan(c, target), repeat: 3 }, SEED);
    rmSync(dir, { recursive: true, force: true });
    const sw = result.adaptive?.sweeps ?? [];
    expect(sw.length).toBe(3);
    for (const later of sw.slice(1)) {
      expect(later.maxAbsBias).toBeLessThanOrEqual(sw[0].maxAbsBias + 1e-9);
      expect(later.stopReason).toBe('target-reached');
      expect(later.parameter?.stdErr).toBeLessThanOrEqual(target);
      expect(withinTolerance(c, later.parameter?.value as number, sc.device.params[c.parameter])).toBe(true);
      // No climb from the floor: fewer readings than the fixed sweep's.
      expect(later.readings).toBeLessThan((base as NonNullable<typeof base>).points);
    }
  }, 60_000);

  it('a later sweep that reads no current at zero bias or against it is weighed with the floor its first sweep measured', async () => {
    // The trap-assisted film's currents (6 pA to 0.9 nA) all sit on the simulated instrument's
    // lowest range, whose offset (0.02 % of 1 nA = 2e-13 A, its data sheet in instrument.ts) is the floor.
    const c = CASES.find((k) => k.scenario === 'oxide-tat') as (typeof CASES)[number];
    const { result, dir } = await run(c.scenario, { ...adaptivePlan(c, 4.4e-4), repeat: 2 }, SEED);
    const finals = new Map<number, { floorSource: string; floor: number; stdErr: number }>();
    scanJournal(dir, (e) => {
      if (e.type === 'fit' && e.final && e.fit?.noise) {
        finals.set(e.sweep, { ...e.fit.noise, stdErr: e.fit.parameters[c.parameter].stdErr });
      }
    });
    rmSync(dir, { recursive: true, force: true });
    expect(result.adaptive?.sweeps.length).toBe(2);
    const first = finals.get(1);
    const later = finals.get(2);
    expect(first?.floorSource).toBe('readings');
    expect(later?.floorSource).toBe('earlier sweeps');
    expect((later?.floor ?? 0) / 2e-13).toBeGreaterThan(0.5);
    expect((later?.floor ?? 0) / 2e-13).toBeLessThan(2);
    // Without it the later sweep's error came out 2.5× the first's (1.03e-3 against 4.1e-4 eV).
    expect(later?.stdErr ?? Infinity).toBeLessThan(1.5 * (first?.stdErr ?? 0));
  }, 60_000);

  it('a loose target met in a handful of readings: the stated errors cover the sweep-to-sweep scatter of a stable device', async () => {
    // Twenty sweeps of the oxide to ±5 meV each stop at five or six readings, only two or three of
    // them far enough above the floor to show the instrument's relative noise. The stated error
    // must still be an honest standard deviation: about as large as the spread of the barrier
    // between sweeps of the same unchanging device, and covering its value within 2σ in most
    // sweeps (a normal variable lies within 2σ 95 % of the time). Taking the smallest relative
    // noise any instrument has when the readings could not show it, the sweeps stated ±0.38 meV
    // against a spread of ±1.6 meV, and 17 of 30 lay within 2σ of their mean.
    const c = CASES.find((k) => k.scenario === 'oxide-fn') as (typeof CASES)[number];
    const truth = findScenario(c.scenario).device.params[c.parameter];
    const { result, dir } = await run(c.scenario, { ...adaptivePlan(c, 0.005), repeat: 20 }, SEED);
    rmSync(dir, { recursive: true, force: true });
    const sw = result.adaptive?.sweeps ?? [];
    expect(sw.length).toBe(20);
    const values = sw.map((x) => x.parameter?.value as number);
    const errs = sw.map((x) => x.parameter?.stdErr as number).sort((a, b) => a - b);
    const mean = values.reduce((a, b) => a + b, 0) / values.length;
    const sd = Math.sqrt(values.reduce((a, b) => a + (b - mean) ** 2, 0) / (values.length - 1));
    expect(Math.max(...sw.map((x) => x.readings))).toBeLessThan(15);
    expect(errs[10] / sd, `median stated ${errs[10]} eV against a spread of ${sd} eV`).toBeGreaterThan(0.6);
    expect(values.filter((v, k) => Math.abs(v - truth) <= 2 * (sw[k].parameter?.stdErr as number)).length).toBeGreaterThanOrEqual(17);
  }, 60_000);

  it('the session report shows each adaptive sweep: readings, largest |V|, charge, the parameter reached and why it stopped', async () => {
    const c = CASES.find((k) => k.scenario === 'oxide-fn') as (typeof CASES)[number];
    const { result, dir } = await run(c.scenario, { ...adaptivePlan(c, 0.002), repeat: 2 }, SEED);
    const html = renderReport(loadSession(dir));
    rmSync(dir, { recursive: true, force: true });
    const sw = result.adaptive?.sweeps ?? [];
    expect(sw).toHaveLength(2);
    expect(html).toContain('<h2>Adaptive sweeps</h2>');
    for (const x of sw) {
      expect(html).toContain(`<tr><td>${x.sweep}</td><td>${x.readings}</td>`);
      expect(x.stopReason).toBe('target-reached');
    }
    expect(html).toMatch(/the parameter reached its target standard error/);
    expect(html).toMatch(/3\.\d+ ± 0\.\d+ eV/);
    expect(html).toContain(`${sw[0].readings + sw[1].readings} readings in all`);
  }, 60_000);
});
