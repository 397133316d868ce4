/**
 * Sweep plans and the safety guard (unit level; the wire-level property test is in
 * test/daemon/guard-property.test.ts). Staircase values checked by hand arithmetic.
 */
import { describe, expect, it } from 'vitest';
import { checkLevel, checkPlan, GuardError, limitsSchema } from '../../daemon/run/guard.js';
import { parsePlan, PlanError, sweepValues } from '../../daemon/run/plan.js';

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
  it('every scenario\'s suggested sweep passes the default station\'s hard limits (npm start -- --scenario NAME works)', async () => {
    const { loadConfig } = await import('../../daemon/run/config.js');
    const { listScenarios } = await import('../../daemon/simulator/scenarios.js');
    const station = loadConfig();
    for (const s of listScenarios()) {
      const plan = parsePlan({ start: s.sweep.start, stop: s.sweep.stop, points: s.sweep.points, compliance: s.sweep.compliance });
      expect(() => checkPlan(station.limits, plan), s.name).not.toThrow();
    }
  });
});
