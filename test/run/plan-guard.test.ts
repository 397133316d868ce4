/**
 * Sweep plans and the safety guard (unit level; the wire-level property test is in
 * test/daemon/guard-property.test.ts). Staircase values checked by hand arithmetic.
 */
import { describe, expect, it } from 'vitest';
import { checkLevel, checkPlan, GuardError, limitsSchema } from '../../daemon/run/guard.js';
import { parsePlan, PlanError, planShape, sweepValues } from '../../daemon/run/plan.js';

const limits = limitsSchema.parse({ maxVoltage: 10, maxCompliance: 1e-3, maxPower: 5e-3 });

describe('plans', () => {
  it('linear, dual (out and back), log and list staircases', () => {
    expect(sweepValues(parsePlan({ start: 0, stop: 1, points: 5, compliance: 1e-3 }))).toEqual([0, 0.25, 0.5, 0.75, 1]);
    expect(sweepValues(parsePlan({ start: 0, stop: 1, points: 3, dual: true, compliance: 1e-3 }))).toEqual([0, 0.5, 1, 0.5, 0]);
    const log = sweepValues(parsePlan({ kind: 'log', start: 0.01, stop: 10, points: 4, compliance: 1e-3 }));
    expect(log[0]).toBe(0.01);
    expect(log[1]).toBeCloseTo(0.1, 14);
    expect(log[2]).toBeCloseTo(1, 14);
    expect(log[3]).toBe(10);
    expect(sweepValues(parsePlan({ kind: 'list', values: [1, -1, 2], compliance: 1e-3 }))).toEqual([1, -1, 2]);
  });

  it('a bad plan names its field', () => {
    expect(() => parsePlan({ start: 0, stop: 1, compliance: 1e-3 }, 'p.json')).toThrow(/p.json: field 'points'/);
    expect(() => parsePlan({ kind: 'log', start: 0, stop: 1, points: 3, compliance: 1e-3 })).toThrow(/same sign/);
    expect(() => parsePlan({ start: 0, stop: 1, points: 3, compliance: -1 })).toThrow(PlanError);
    expect(() => parsePlan({ start: 0, stop: 1, points: 3, compliance: 1e-3, volts: 3 })).toThrow(/volts/);
  });

  it('ramps and adaptive sweeps climb away from zero; their current limits sit under the compliance', () => {
    const ramp = { kind: 'voltage-ramp', start: 0, stop: 10, step: 0.1, stepTime: 0.1, compliance: 1e-3 };
    expect(parsePlan(ramp).kind).toBe('voltage-ramp');
    expect(parsePlan({ ...ramp, start: -1, stop: -10 }).kind).toBe('voltage-ramp');
    expect(() => parsePlan({ ...ramp, start: 10, stop: 2 }, 'down.json')).toThrow(/down\.json: field 'stop': 2 V is nearer zero than start 10 V/);
    expect(() => parsePlan({ ...ramp, start: 2, stop: -5 })).toThrow(/field 'stop': .*other sign/);
    expect(() => parsePlan({ ...ramp, criteria: { currentLimit: 1e-2 } })).toThrow(/field 'criteria.currentLimit': 0\.01 A is above the compliance 0\.001 A/);
    expect(() => parsePlan({ ...ramp, criteria: { floor: 1e-3 } })).toThrow(/field 'criteria.floor'/);
    const adaptive = { kind: 'adaptive', start: 0, stop: 10, maxPoints: 50, compliance: 1e-3, target: { parameter: 'barrierHeight', stdErr: 0.01 } };
    expect(() => parsePlan({ ...adaptive, start: 10, stop: 0 })).toThrow(/field 'stop'/);
    expect(() => parsePlan({ ...adaptive, currentLimit: 2e-3 })).toThrow(/field 'currentLimit'/);
    const stress = { kind: 'constant-voltage', stress: 8, duration: 100, sampleEvery: 5, compliance: 1e-3 };
    expect(() => parsePlan({ ...stress, sense: { start: 0, stop: 2, points: 5, every: 1 } })).toThrow(
      /field 'sense.every': 1 s is shorter than sampleEvery 5 s/,
    );
    expect(() => parsePlan({ ...stress, criteria: { currentLimit: 1 } })).toThrow(/field 'criteria.currentLimit'/);
  });

  it('a constant-voltage stress read less often than it lasts, or sense sweeps that would never come, are refused naming the field', () => {
    const stress = { kind: 'constant-voltage', stress: 8, duration: 100, sampleEvery: 5, compliance: 1e-3 };
    expect(() => parsePlan({ ...stress, sampleEvery: 200 }, 'cv.json')).toThrow(/cv\.json: field 'sampleEvery': 200 s is longer than the duration 100 s/);
    // Read once per duration: a reading at the start and one at the end, accepted.
    expect(parsePlan({ ...stress, sampleEvery: 100 }).kind).toBe('constant-voltage');
    // Sense sweeps run at each multiple of sense.every short of the duration (30, 60, 90 s of 100 s):
    // at sense.every = duration there is none.
    const sense = { start: 0, stop: 2, points: 5, every: 100 };
    expect(() => parsePlan({ ...stress, sense })).toThrow(/field 'sense\.every': 100 s is not shorter than the duration 100 s: no sense sweep/);
    expect(() => parsePlan({ ...stress, sense: { ...sense, every: 150 } })).toThrow(/field 'sense\.every'/);
    expect(planShape(parsePlan({ ...stress, sense: { ...sense, every: 30 } })).sweeps).toBe(7);
  });

  it('a test counts its use-condition checks and sense sweeps among its sweeps', () => {
    const ramp = { kind: 'voltage-ramp', start: 0, stop: 10, step: 0.1, stepTime: 0.1, compliance: 1e-3 };
    expect(planShape(parsePlan(ramp)).sweeps).toBe(1);
    expect(planShape(parsePlan({ ...ramp, useVoltage: 1 })).sweeps).toBe(3);
    // Sense sweeps at 30 and 60 s of a 90 s stress (not at its end): 3 stress segments + 2 sense sweeps.
    const stress = { kind: 'constant-voltage', stress: 8, duration: 90, sampleEvery: 5, compliance: 1e-3, sense: { start: 0, stop: 2, points: 5, every: 30 } };
    expect(planShape(parsePlan(stress)).sweeps).toBe(5);
    expect(planShape(parsePlan({ ...stress, duration: 91 })).sweeps).toBe(7);
  });
});

describe('guard', () => {
  it('refuses voltage, compliance and power beyond the limits, naming the setting', () => {
    expect(() => checkLevel(limits, 10.5, 1e-4)).toThrow(/maxVoltage = 10 V/);
    // 6 V × 1 mA = 6 mW > 5 mW.
    try {
      checkLevel(limits, 6, 1e-3);
      expect.unreachable();
    } catch (e) {
      expect(e).toBeInstanceOf(GuardError);
      expect((e as GuardError).setting).toBe('maxPower');
    }
    expect(() => checkLevel(limits, -4.9, 1e-3)).not.toThrow();
    expect(() => checkPlan(limits, parsePlan({ start: 0, stop: 1, points: 3, compliance: 2e-3 }))).toThrow(/maxCompliance/);
    expect(() => checkPlan(limits, parsePlan({ kind: 'list', values: [1, 2, -11], compliance: 1e-4 }))).toThrow(/-11/);
  });
});

describe('the default station and the demo scenarios', () => {
  it("every scenario's suggested sweep passes the default station's hard limits (npm start -- --scenario NAME works)", async () => {
    const { loadConfig } = await import('../../daemon/run/config.js');
    const { listScenarios } = await import('../../daemon/simulator/scenarios.js');
    const station = loadConfig();
    for (const s of listScenarios()) {
      const plan = parsePlan({ start: s.sweep.start, stop: s.sweep.stop, points: s.sweep.points, compliance: s.sweep.compliance });
      expect(() => checkPlan(station.limits, plan), s.name).not.toThrow();
    }
  });
});
