/**
 * Breakdown tests of thin dielectrics on the station, after the wafer-level procedures of JEDEC
 * JESD35-A (in our own words): an optional check at the use condition first (a device already
 * conducting there is an initial failure and is not stressed), then the stress — a voltage ramp, a
 * current ramp, or a constant voltage with periodic sense sweeps — judged reading by reading by the
 * criteria in daemon/analysis/breakdown-tests.ts, the output off the moment breakdown is confirmed,
 * and the use-condition check again (the leakage after the test, stress-induced leakage).
 *
 * These tests destroy devices on purpose at high field: the cautions say so, the station's hard
 * limits still apply to every level, and the output goes off at breakdown without a ramp down.
 * The result (breakdown voltage and field, charge to breakdown per area, time to breakdown,
 * leakage before and after, the criterion that fired with its numbers) is journaled as a
 * `test-result` event and written as one row of the device-results file beside the journal.
 */
import { writeFileSync } from 'node:fs';
import { join } from 'node:path';
import {
  biasHeldAtCompliance,
  chargeToBreakdown,
  CurrentRampJudge,
  staircaseChargeToBreakdown,
  StressJudge,
  VoltageRampJudge,
  type BreakdownVerdict,
} from '../analysis/breakdown-tests.js';
import {
  DEVICE_RESULTS_FILE,
  formatDeviceResults,
  type DeviceIdentity,
  type DeviceResult,
  type Outcome,
  type Polarity,
} from '../../protocols/device-results.js';
import { checkAfterTestSentence } from '../../protocols/caution-words.js';
import type { NewEvent } from '../../protocols/wire.js';
import { OutputUnconfirmedError, type Measurement, type OffCheck } from '../instrument/smu-driver.js';
import type { Decision, LiveChain } from '../pipeline/chain.js';
import type { GuardedSource } from './guard.js';
import { useCheckCompliance } from './guard.js';
import { testRemaining, type TestMoment } from './eta.js';
import { currentRampLevels, voltageRampLevels, type ConstantStressPlan, type CurrentRampPlan, type StressPlan, type VoltageRampPlan } from './plan.js';

/** What a stress test needs from the run that hosts it. */
export interface RunContext {
  readonly source: GuardedSource;
  readonly chain: LiveChain;
  /** Throws when the run is being aborted. */
  check(): void;
  /** Waits s seconds; an abort wakes it early. */
  sleep(s: number): Promise<void>;
  /**
   * Journals one measurement; returns the live chain's decision, if any. `brokeDown`: the test's
   * judge confirmed breakdown at it (the reading is flagged and never fitted).
   */
  take(m: Measurement, programmed: number, brokeDown?: boolean): Decision | undefined;
  /** Journals an event; a journal failure is kept for the run, never thrown here. */
  record(e: NewEvent): void;
  /**
   * Ends the chain's sweep as complete and acts on its decision: an abort (drift) throws as every
   * abort does; 'stop' asks the caller to end the run after this sweep.
   */
  endSweep(note?: string): 'stop' | undefined;
}

export interface StressOutcome {
  readonly result: DeviceResult;
  /** Plain words for the run's end. */
  readonly reason: string;
}

const TEST_OF: Record<StressPlan['kind'], string> = {
  'voltage-ramp': 'voltage-ramp',
  'current-ramp': 'current-ramp',
  'constant-voltage': 'constant-voltage',
};

const g = (x: number) => x.toPrecision(4);

/**
 * Keeps a ramp's steps `stepTime` apart, set to set: the hold after a level is set is the step time
 * less the time the last reading took (the device sits at the level while it is read) and less the
 * set's own lateness, so a reading that takes 20 ms does not turn a 50 ms step into 70 ms and the
 * ramp rate into 70 % of the plan.
 */
export class StepPacer {
  /** When the current level was due to be set, s. */
  private due: number | undefined;
  private readTime = 0;

  constructor(private readonly stepTime: number) {}

  /**
   * Seconds to wait after a level was set at `tSet` (s) before reading it. Levels are due every
   * stepTime; a set that came late by a command's round trip is made up from the hold, one that
   * came more than a whole step late (a stall) restarts the schedule rather than rush the next steps.
   */
  holdAfterSet(tSet: number): number {
    if (this.due === undefined || tSet - this.due > this.stepTime) this.due = tSet;
    const hold = Math.max(0, this.due + this.stepTime - this.readTime - tSet);
    this.due += this.stepTime;
    return hold;
  }

  /** Runs a reading and notes how long it took. */
  async measure<T>(read: () => Promise<T>, now: () => number): Promise<T> {
    const t0 = now();
    const m = await read();
    this.readTime = Math.max(0, now() - t0);
    return m;
  }
}

/**
 * One reading series of a test: the time each reading was taken (s since the session started),
 * the time its level was set, the measured bias (V) and current (A), and the programmed level.
 *
 * How long each reading's current flowed (its hold): on a staircase (a ramp) the level k is on the
 * device from the moment it is set until level k+1 is set — its reading is taken somewhere inside
 * that interval — so hold_k = tSet_{k+1} − tSet_k (the last: until its reading). Under constant
 * stress the current flows between readings: hold_k = t_k − t_{k−1}, restarted after a pause.
 * Timing from the moments the levels change, not from the readings, keeps the charge right when
 * the computer is slow between a reading and the next level.
 */
class Series {
  readonly t: number[] = [];
  readonly tSet: number[] = [];
  readonly v: number[] = [];
  /** The level programmed for each reading (V, or A for a current ramp). */
  readonly set: number[] = [];
  readonly i: number[] = [];
  /** Extra seconds at a reading's current (the estimated part of a pause's edges). */
  readonly extra: number[] = [];
  /** Charge the estimates of pause edges may be off by, C. */
  edgeUncertainty = 0;
  private last: number;

  constructor(
    start: number,
    readonly staircase: boolean,
  ) {
    this.last = start;
  }

  /** A reading; `tSet` is when its level was set (staircases), else the previous reading's time. */
  add(t: number, v: number, i: number, set: number, tSet = this.last): void {
    this.t.push(t);
    this.tSet.push(tSet);
    this.v.push(v);
    this.set.push(set);
    this.i.push(i);
    this.extra.push(0);
    this.last = t;
  }

  /**
   * A pause's edge: the stress level was on for an unknown part of `gap` seconds next to reading k
   * (before the source stepped away, or after it stepped back): half of it is counted at that
   * reading's current, and the other half is the estimate's uncertainty.
   */
  edge(k: number, gap: number): void {
    if (k < 0 || k >= this.t.length || !(gap > 0)) return;
    this.extra[k] += 0.5 * gap;
    const a = Math.abs(this.i[k]);
    if (Number.isFinite(a)) this.edgeUncertainty += 0.5 * gap * a;
  }

  /** Restart the hold clock (after time that was not stress). */
  resume(t: number): void {
    this.last = t;
  }

  /** Seconds each reading's current flowed. */
  holds(): number[] {
    const n = this.t.length;
    return this.t.map((t, k) => (this.staircase ? (k + 1 < n ? this.tSet[k + 1] : t) - this.tSet[k] : t - this.tSet[k]) + this.extra[k]);
  }
}

export class StressTest {
  private sweep = 0;
  private leakageBefore: number | undefined;
  private leakageAfter: number | undefined;
  /** Why the leakage after the test is left empty (its reading was clipped at compliance), for the result's reason. */
  private afterNote: string | undefined;
  /** Where the test stands, for the time it has left (run/eta.ts). */
  private at: TestMoment = { phase: 'before' };

  constructor(
    readonly ctx: RunContext,
    readonly plan: StressPlan,
    readonly device: DeviceIdentity,
    readonly sessionId: string,
  ) {}

  private get limits() {
    return this.ctx.source.limits;
  }

  private now(): number {
    return this.ctx.chain.options.journal.now() / 1000;
  }

  private startSweep(points: number, label: string, held?: { bias: number; stressTime: number }): void {
    this.sweep++;
    this.ctx.chain.startSweep(this.sweep, points, label, held);
  }

  /** The device's area and thickness: the device identity's, else the analysis inputs'. */
  private geometry(): { area?: number; thickness?: number; temperature?: number } {
    const inputs = this.ctx.chain.settings.inputs as { area?: number; thickness?: number; temperature?: number };
    return {
      area: this.device.area ?? inputs.area,
      thickness: this.device.thickness ?? inputs.thickness,
      temperature: this.device.temperature ?? inputs.temperature,
    };
  }

  async run(): Promise<StressOutcome> {
    const p = this.plan;
    // The progress events' time left: the plan's own timing from where the test stands.
    this.ctx.chain.setRemaining(() => testRemaining(p, this.at));
    this.ctx.record({
      type: 'caution',
      kind: 'destructive-test',
      message:
        "This test drives the device to breakdown on purpose: high fields, currents up to the limits, and a device that is destroyed at the end. The station's hard limits still apply and the output goes off the moment breakdown is confirmed; keep hands off the probes and the fixture, and follow your lab's safety rules.",
    });
    if (p.useVoltage !== undefined) {
      this.leakageBefore = (await this.useCheck('use-condition check before the test')).current;
      if (Math.abs(this.leakageBefore) > p.useCurrentLimit) {
        return this.finish(
          'initial-failure',
          undefined,
          `the device already conducts ${g(Math.abs(this.leakageBefore))} A at the ${p.useVoltage} V use condition (limit ${p.useCurrentLimit} A): an initial failure, not stressed`,
        );
      }
    }
    let verdict: BreakdownVerdict | undefined;
    let series: Series;
    if (p.kind === 'voltage-ramp') ({ verdict, series } = await this.voltageRamp(p));
    else if (p.kind === 'current-ramp') {
      const r = await this.currentRamp(p);
      if (r.shorted)
        return this.finish(
          'initial-failure',
          undefined,
          `the device held only ${g(Math.abs(r.shorted.voltage))} V at the first current level (${g(r.shorted.current)} A), below the ${p.criteria.voltageFloor} V it must hold before its voltage can collapse (criteria.voltageFloor): it already conducts — an initial failure, not stressed`,
        );
      ({ verdict, series } = r);
    } else ({ verdict, series } = await this.constantStress(p));
    this.at = { phase: 'after' };
    // Never on again after a breakdown whose output-off the instrument did not confirm.
    if (p.useVoltage !== undefined && this.offConfirmed !== false) {
      const after = await this.useCheck('use-condition check after the test');
      if (after.atCompliance) {
        // A clipped reading is the compliance, not the device's current at the use voltage: the
        // source could not hold the bias. The leakage is at least that much; no value is recorded.
        this.afterNote = `the use-condition check after the test reached the compliance (${g(Math.abs(after.current))} A, the bias held at ${g(after.measuredBias)} V of ${p.useVoltage} V): the device conducts at least that much there, so leakage_after is left empty`;
      } else this.leakageAfter = after.current;
    }
    const { area, thickness } = this.geometry();
    const n = series.t.length;
    if (verdict) {
      const k = verdict.index;
      const hold = series.holds();
      const q = series.staircase ? staircaseChargeToBreakdown(series.tSet, series.t, series.i, k) : chargeToBreakdown(hold, series.i, k);
      // The applied bias at breakdown: the level of the step in which it broke (a ramp or stress
      // programs the voltage; at breakdown the measured one collapses); for a current ramp the
      // highest voltage the device held before the collapse.
      const vbd = p.kind === 'current-ramp' ? Math.max(...series.v.slice(0, Math.max(1, k)).map(Math.abs)) : Math.abs(series.set[k]);
      // Broken at the first reading: the breakdown lies somewhere before it, so the time and charge
      // to breakdown are only upper bounds.
      const first =
        k === 0
          ? ` — at the first reading, so t_bd and Q_bd are upper bounds (${(hold[0] ?? 0) > 0 ? `the device broke within the first ${g(hold[0])} s` : 'the device broke as the bias was brought to the stress level'})`
          : '';
      return this.finish('breakdown', verdict.criterion, `breakdown (${verdict.criterion}): ${verdict.reason}${first}`, {
        ...this.achievedRate(series),
        voltage: vbd,
        field: thickness ? vbd / thickness : undefined,
        charge: area ? q / area : undefined,
        // Time under stress until the breakdown reading (sense sweeps excluded).
        time: hold.slice(0, k + 1).reduce((a, b) => a + b, 0),
        // The breakdown moment is known only to lie between the last intact reading and the one
        // that showed it: half that interval's charge is the estimate's own uncertainty.
        numbers: {
          ...verdict.numbers,
          ...this.achievedRate(series).numbers,
          ...(area && k > 0 ? { chargeUncertainty: (0.5 * Math.abs(series.i[k - 1]) * (series.t[k] - series.t[k - 1]) + series.edgeUncertainty) / area } : {}),
        },
      });
    }
    // The end of the ramp or of the stress time without breakdown: the device survived (censored).
    const last = n - 1;
    const held = this.heldAtCompliance;
    const vmax = n ? Math.max(...(p.kind === 'current-ramp' ? series.v : series.set).map(Math.abs)) : 0;
    const holds = series.holds();
    const q = chargeToBreakdown(holds, series.i, n);
    return this.finish(
      'survived',
      held ? 'compliance-held' : p.kind === 'constant-voltage' ? 'end-of-stress' : 'end-of-ramp',
      held
        ? `no breakdown seen: the current reached the ${g(Math.abs(held.current))} A compliance at ${g(held.programmed)} V with the bias held (${g(held.measured)} V measured), so the ramp ends there; raise the compliance to ramp further`
        : `no breakdown: the device held to the end of the ${p.kind === 'constant-voltage' ? `stress (${g(p.duration)} s)` : 'ramp'}`,
      {
        voltage: vmax,
        field: thickness ? vmax / thickness : undefined,
        charge: area ? q / area : undefined,
        time: last >= 0 ? holds.reduce((a, b) => a + b, 0) : undefined,
        ...this.achievedRate(series),
      },
    );
  }

  /**
   * The ramp rate the instrument actually saw (a voltage ramp: V/s between the first and the last
   * level set; a current ramp: steps per second), for the journal beside the planned one.
   */
  private achievedRate(series: Series): { numbers?: Record<string, number> } {
    const p = this.plan;
    const n = series.tSet.length;
    if (p.kind === 'constant-voltage' || n < 2) return {};
    const period = (series.tSet[n - 1] - series.tSet[0]) / (n - 1);
    if (!(period > 0)) return {};
    return {
      numbers: {
        stepPeriod: period,
        plannedStepPeriod: p.stepTime,
        ...(p.kind === 'voltage-ramp' ? { rampRate: p.step / period, plannedRampRate: p.step / p.stepTime } : {}),
      },
    };
  }

  /** Turns the output on (the driver confirms it with the instrument's own query) and journals it. */
  private async outputOn(what: string): Promise<void> {
    await this.ctx.source.outputOn();
    this.ctx.record({ type: 'output', on: true, sent: true, queried: true, confirmed: true, reason: `${what} (the instrument reports its output on)` });
  }

  /** One reading at the use voltage (voltage sourcing at the plan's compliance); output off after. */
  private async useCheck(label: string): Promise<{ current: number; atCompliance: boolean; measuredBias: number }> {
    const p = this.plan;
    const src = this.ctx.source;
    const v = p.useVoltage as number;
    await src.configure(useCheckCompliance(this.limits, p), p.nplc);
    this.ctx.check();
    await this.outputOn(label);
    this.startSweep(1, label);
    await src.rampTo(v);
    await this.ctx.sleep(0.01);
    this.ctx.check();
    const m = await src.measure();
    this.ctx.take(m, v);
    this.ctx.chain.endSweep(true);
    await src.rampTo(0);
    await this.offBetweenPhases(`${label} done`);
    return { current: m.reading?.i ?? Number.NaN, atCompliance: m.compliance, measuredBias: m.reading?.v ?? Number.NaN };
  }

  /**
   * Output off at once (no ramp down): breakdown was confirmed. The instrument is then asked whether
   * its output is off; only when it says so may the check after the test turn it on again, and the
   * caution says that it will.
   */
  private async offAtBreakdown(verdict: BreakdownVerdict): Promise<void> {
    const check = await this.offAndAsk(`breakdown confirmed (${verdict.criterion})`);
    this.offConfirmed = check.confirmed;
    const after =
      this.plan.useVoltage === undefined
        ? ''
        : check.confirmed
          ? checkAfterTestSentence(this.plan.useVoltage)
          : ' The instrument did not confirm that its output is off, so the check after the test is skipped.';
    this.ctx.record({
      type: 'caution',
      kind: 'breakdown-confirmed',
      sweep: this.sweep,
      numbers: verdict.numbers,
      message: `Breakdown (${verdict.criterion}): ${verdict.reason}. The output was turned off${check.confirmed ? ' (the instrument confirms it)' : ''}. The device is destroyed.${after} Follow your lab's rules before touching the fixture.`,
    });
  }

  /**
   * Output off, then the instrument asked whether it is off; both journaled (the sent command, then
   * the instrument's answer).
   */
  private async offAndAsk(reason: string): Promise<OffCheck> {
    const src = this.ctx.source;
    const sent = await src.outputOff();
    this.ctx.record({ type: 'output', on: false, sent, confirmed: false, reason });
    const check = await src.confirmOff();
    this.ctx.record({ type: 'output', on: false, sent, queried: true, confirmed: check.confirmed, reason: check.detail });
    return check;
  }

  /**
   * Output off between the phases of a test (after a use-condition check, at the end of a ramp or a
   * stress), confirmed by the instrument. The test goes on to its next phase (which turns the output
   * on again) only when the instrument says its output is off: an instrument that cannot say so is
   * not trusted with the rest of a destructive test, and the run ends as an instrument fault.
   */
  private async offBetweenPhases(reason: string): Promise<void> {
    const check = await this.offAndAsk(reason);
    if (!check.confirmed) throw new OutputUnconfirmedError(`after '${reason}' the output was turned off, but ${check.detail}`);
  }

  /** A voltage ramp that reached compliance with the bias held (no breakdown; the ramp ended there). */
  private heldAtCompliance: { programmed: number; measured: number; current: number } | undefined;

  /** Whether the instrument confirmed its output off at breakdown (undefined: no breakdown yet). */
  private offConfirmed: boolean | undefined;

  private async voltageRamp(p: VoltageRampPlan): Promise<{ verdict?: BreakdownVerdict; series: Series; tStart: number }> {
    const src = this.ctx.source;
    await src.configure(p.compliance, p.nplc);
    this.ctx.check();
    await this.outputOn('voltage ramp started');
    const levels = voltageRampLevels(p);
    if (Math.abs(levels[0]) > p.step) await src.rampTo(levels[0]);
    const judge = new VoltageRampJudge(p.criteria, p.compliance);
    this.startSweep(levels.length, `voltage ramp ${p.start} → ${p.stop} V at ${g(p.step / p.stepTime)} V/s`);
    const tStart = this.now();
    const series = new Series(tStart, true);
    const pace = new StepPacer(p.stepTime);
    for (const [k, v] of levels.entries()) {
      this.ctx.check();
      await src.step(v);
      this.at = { phase: 'ramp', set: k + 1 };
      const tSet = this.now();
      await this.ctx.sleep(pace.holdAfterSet(tSet));
      this.ctx.check();
      const m = await pace.measure(
        () => src.measure(),
        () => this.now(),
      );
      if (!m.reading) {
        this.ctx.take(m, v);
        continue;
      }
      series.add(this.now(), m.reading.v, m.reading.i, v, tSet);
      // At compliance with the bias held, the current limit is the end of what this ramp can show:
      // the device has not broken down (it is right-censored at this level).
      if (m.compliance && biasHeldAtCompliance(v, m.reading.v)) {
        this.ctx.take(m, v);
        this.heldAtCompliance = { programmed: v, measured: m.reading.v, current: m.reading.i };
        break;
      }
      // Judged against the applied (programmed) bias: at compliance the measured one collapses.
      const verdict = judge.add(v, m.reading.i, m.compliance);
      this.ctx.take(m, v, verdict !== undefined);
      if (verdict) {
        const at = { ...verdict, index: series.t.length - 1 };
        await this.offAtBreakdown(at);
        this.ctx.chain.endSweep(false, `breakdown at ${g(v)} V`);
        return { verdict: at, series, tStart };
      }
    }
    this.ctx.chain.endSweep(true);
    await src.rampTo(0);
    await this.offBetweenPhases('the voltage ramp ended without breakdown');
    return { series, tStart };
  }

  private async currentRamp(
    p: CurrentRampPlan,
  ): Promise<{ verdict?: BreakdownVerdict; series: Series; tStart: number; shorted?: { voltage: number; current: number } }> {
    const src = this.ctx.source;
    await src.configureCurrent(p.voltageLimit, p.nplc);
    this.ctx.check();
    await this.outputOn('current ramp started');
    const levels = currentRampLevels(p);
    const judge = new CurrentRampJudge(p.criteria.voltageDrop, p.criteria.voltageFloor);
    this.startSweep(levels.length, `current ramp ${p.start} → ${p.stop} A, ${p.stepsPerDecade} steps per decade`);
    const tStart = this.now();
    const series = new Series(tStart, true);
    const pace = new StepPacer(p.stepTime);
    let limited = false;
    for (const [k, i] of levels.entries()) {
      this.ctx.check();
      await src.stepCurrent(i);
      this.at = { phase: 'ramp', set: k + 1 };
      const tSet = this.now();
      await this.ctx.sleep(pace.holdAfterSet(tSet));
      this.ctx.check();
      const m = await pace.measure(
        () => src.measure(),
        () => this.now(),
      );
      if (!m.reading) {
        this.ctx.take(m, i);
        continue;
      }
      // The forced current is the current through the device (the instrument's own reading of it).
      series.add(this.now(), m.reading.v, m.reading.i, i, tSet);
      const verdict = judge.add(m.reading.v, m.reading.i);
      this.ctx.take(m, i, verdict !== undefined);
      if (series.t.length === 1 && Math.abs(m.reading.v) < p.criteria.voltageFloor) {
        // Already conducting at the first level: nothing left to break. The output goes off.
        this.ctx.chain.endSweep(false, `the device held only ${g(Math.abs(m.reading.v))} V at ${g(i)} A: it already conducts`);
        await src.stepCurrent(0);
        await this.offBetweenPhases('the device already conducts at the first current level');
        return { series, tStart, shorted: { voltage: m.reading.v, current: i } };
      }
      if (verdict) {
        const at = { ...verdict, index: series.t.length - 1 };
        await this.offAtBreakdown(at);
        this.ctx.chain.endSweep(false, `breakdown at ${g(i)} A`);
        return { verdict: at, series, tStart };
      }
      if (m.compliance) {
        // The voltage limit held the current back: the device could not be driven further.
        limited = true;
        break;
      }
    }
    this.ctx.chain.endSweep(!limited, limited ? 'the voltage limit was reached: the ramp could not force more current' : undefined);
    await src.stepCurrent(0);
    await this.offBetweenPhases(limited ? 'the current ramp reached its voltage limit' : 'the current ramp ended without breakdown');
    return { series, tStart };
  }

  private async constantStress(p: ConstantStressPlan): Promise<{ verdict?: BreakdownVerdict; series: Series; tStart: number; stressTime: number }> {
    const src = this.ctx.source;
    await src.configure(p.compliance, p.nplc);
    this.ctx.check();
    await this.outputOn('constant-voltage stress started');
    const judge = new StressJudge(p.criteria, p.compliance);
    let stressTime = 0;
    let nextSense = p.sense ? p.sense.every : Infinity;
    let segmentOpen = false;
    // Sense sweeps done and the seconds they took together (the time left counts those to come at their mean).
    const sensed = { done: 0, seconds: 0 };
    const mark = (): void => {
      this.at = { phase: 'stress', stressTime, sensesDone: sensed.done, senseSeconds: sensed.seconds };
    };
    const openSegment = (): void => {
      // The reading at the stress's start, then one every sampleEvery to the next sense sweep or the end.
      this.startSweep(
        1 + Math.max(0, Math.ceil(Math.min(p.duration - stressTime, nextSense - stressTime) / p.sampleEvery - 1e-9)),
        `stress at ${p.stress} V from ${g(stressTime)} s`,
        { bias: p.stress, stressTime },
      );
      segmentOpen = true;
    };
    // Stress time is taken from the instrument's own clock when its readings carry one (the
    // dialect's "time" field): the computer's clock would count its own delays as stress.
    const clock = (m: Measurement) => (m.reading?.t !== undefined && Number.isFinite(m.reading.t) ? m.reading.t : this.now());
    const tStart = this.now();
    const series = new Series(tStart, false);
    /**
     * Ramps to the stress and reads at once: that reading starts the segment's stress clock. After a
     * sense sweep, the stress came on somewhere between the sweep's last reading and this one: half
     * of that gap is counted (an edge).
     */
    const startSegment = async (after?: number): Promise<BreakdownVerdict | undefined> => {
      await src.rampTo(p.stress);
      openSegment();
      this.ctx.check();
      const m = await src.measure();
      const t = clock(m);
      series.resume(t);
      if (!m.reading) {
        mark();
        this.ctx.take(m, p.stress);
        return undefined;
      }
      series.add(t, m.reading.v, m.reading.i, p.stress);
      if (after !== undefined) series.edge(series.t.length - 1, t - after);
      stressTime += after !== undefined ? 0.5 * Math.max(0, t - after) : 0;
      const verdict = judge.add(stressTime, m.reading.i, m.compliance);
      mark();
      this.ctx.take(m, p.stress, verdict !== undefined);
      return verdict;
    };
    const broke = async (verdict: BreakdownVerdict) => {
      const at = { ...verdict, index: series.t.length - 1 };
      await this.offAtBreakdown(at);
      this.ctx.chain.endSweep(false, `breakdown after ${g(stressTime)} s`);
      return { verdict: at, series, tStart, stressTime };
    };
    let v0 = await startSegment();
    if (v0) return broke(v0);
    while (stressTime < p.duration) {
      this.ctx.check();
      await this.ctx.sleep(Math.min(p.sampleEvery, p.duration - stressTime));
      this.ctx.check();
      const m = await src.measure();
      if (!m.reading) {
        mark();
        this.ctx.take(m, p.stress);
        continue;
      }
      const t = clock(m);
      series.add(t, m.reading.v, m.reading.i, p.stress);
      stressTime += t - series.tSet[series.tSet.length - 1];
      const verdict = judge.add(stressTime, m.reading.i, m.compliance);
      mark();
      this.ctx.take(m, p.stress, verdict !== undefined);
      if (verdict) return broke(verdict);
      if (p.sense && stressTime >= nextSense && stressTime < p.duration) {
        this.ctx.chain.endSweep(true);
        segmentOpen = false;
        const t0 = this.now();
        const sense = await this.senseSweep(p, clock);
        sensed.done++;
        sensed.seconds += Math.max(0, this.now() - t0);
        // The stress was still on for part of the gap before the sense sweep's first reading.
        if (sense) {
          series.edge(series.t.length - 1, sense.first - series.t[series.t.length - 1]);
          stressTime += 0.5 * Math.max(0, sense.first - series.t[series.t.length - 1]);
        }
        nextSense += p.sense.every;
        // The time spent sensing is not stress: the stress clock resumes at the next segment's first reading.
        v0 = await startSegment(sense?.last);
        if (v0) return broke(v0);
      }
    }
    if (segmentOpen) this.ctx.chain.endSweep(true);
    await src.rampTo(0);
    await this.offBetweenPhases('the constant-voltage stress ended without breakdown');
    return { series, tStart, stressTime };
  }

  /**
   * A short low-field sweep between stress intervals (the leakage it shows grows with trapped
   * charge). Returns the clock readings of its first and last points.
   */
  private async senseSweep(p: ConstantStressPlan, clock: (m: Measurement) => number): Promise<{ first: number; last: number } | undefined> {
    const s = p.sense as NonNullable<ConstantStressPlan['sense']>;
    const src = this.ctx.source;
    await src.rampTo(s.start);
    this.startSweep(s.points, `sense sweep ${s.start} → ${s.stop} V`);
    let first: number | undefined;
    let last: number | undefined;
    for (let k = 0; k < s.points; k++) {
      const v = s.start + ((s.stop - s.start) * k) / (s.points - 1);
      this.ctx.check();
      await src.step(v);
      const m = await src.measure();
      this.ctx.take(m, v);
      const t = clock(m);
      first ??= t;
      last = t;
    }
    this.ctx.chain.endSweep(true);
    return first !== undefined && last !== undefined ? { first, last } : undefined;
  }

  /** The sign of the stress: where a ramp climbs to, or the held bias. */
  private polarity(): Polarity {
    const p = this.plan;
    const s = p.kind === 'constant-voltage' ? p.stress : p.kind === 'current-ramp' ? p.start : p.stop;
    return s < 0 ? 'negative' : 'positive';
  }

  private finish(
    outcome: Outcome,
    criterion: string | undefined,
    reason: string,
    at: { voltage?: number; field?: number; charge?: number; time?: number; numbers?: Readonly<Record<string, number>> } = {},
  ): StressOutcome {
    const { area, thickness, temperature } = this.geometry();
    const result: DeviceResult = {
      device: this.device.device ?? this.sessionId,
      wafer: this.device.wafer,
      site: this.device.site,
      x: this.device.x,
      y: this.device.y,
      test: TEST_OF[this.plan.kind],
      polarity: this.polarity(),
      outcome,
      criterion,
      breakdownVoltage: at.voltage,
      breakdownField: at.field,
      chargeToBreakdown: at.charge,
      chargeToBreakdownUncertainty: at.numbers?.chargeUncertainty,
      timeToBreakdown: at.time,
      area,
      thickness,
      temperature,
      leakageBefore: this.leakageBefore,
      leakageAfter: this.leakageAfter,
      leakageFloor: this.leakageBefore !== undefined || this.leakageAfter !== undefined ? this.ctx.chain.noiseFloor?.sigma : undefined,
      tags: this.device.tags,
    };
    if (this.afterNote) reason = `${reason}; ${this.afterNote}`;
    this.ctx.record({
      type: 'test-result',
      test: result.test,
      outcome,
      reason,
      result: result as unknown as Record<string, unknown>,
      ...(at.numbers ? { numbers: at.numbers } : {}),
    });
    return { result, reason };
  }
}

/** Writes the device-results file beside the journal (one row per test of the session). */
export function writeDeviceResults(dir: string, results: readonly DeviceResult[]): string {
  const file = join(dir, DEVICE_RESULTS_FILE);
  writeFileSync(file, formatDeviceResults(results));
  return file;
}
