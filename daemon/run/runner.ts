/**
 * Executes a sweep plan through the safety guard, feeding every reading to the live chain, and
 * ends every path — completion, stop, abort, breakdown, drift, instrument fault, a journal that
 * cannot be written, exception — with the output off.
 *
 * Order on every failure: output off first (the guard's emergency path writes it ahead of anything
 * queued, before any journal write, so a full disk or a page error cannot hold it back), then what
 * can be recorded is recorded, then the instrument's own output query confirms the state. The
 * journal says "sent" and, separately, "confirmed" only when the instrument answered "off".
 */
import { ScpiDisconnectError, ScpiInstrumentError, ScpiReplyError, ScpiTimeoutError } from '../../protocols/scpi-session.js';
import type { NewEvent, RunOutcome } from '../../protocols/wire.js';
import { FencedError, OutputUnconfirmedError, type Measurement } from '../instrument/smu-driver.js';
import { JournalWriteError } from '../journal/journal.js';
import type { Decision, LiveChain } from '../pipeline/chain.js';
import { GuardError, type GuardedSource } from './guard.js';
import type { DeviceIdentity, DeviceResult } from '../../protocols/device-results.js';
import { runAdaptive, type AdaptiveSweepFigures } from './adaptive.js';
import { isStressPlan, PlanError, sweepValues, type AdaptivePlan, type Plan, type StressPlan, type SweepPlan } from './plan.js';
import { StressTest, writeDeviceResults, type RunContext } from './stress.js';

export interface RunResult {
  readonly outcome: RunOutcome;
  readonly reason: string;
  readonly sweeps: number;
  /** Readings that could enter an analysis (finite bias and current, no over-range flag). */
  readonly usable: number;
  /** Replies that gave no reading, by reason. */
  readonly rejected: Readonly<Record<string, number>>;
  /** Whether the instrument itself confirmed its output off at the end. */
  readonly outputOffConfirmed: boolean;
  /** A breakdown test's result (the row written to device-results.csv). */
  readonly result?: DeviceResult;
  /** An adaptive run's figures, for the run and per sweep. */
  readonly adaptive?: ReturnType<typeof adaptiveTotals>;
}

/** Run totals of adaptive sweeps: readings, largest |bias| (V), charge (C), the last parameter, and every sweep. */
export function adaptiveTotals(sweeps: readonly AdaptiveSweepFigures[]) {
  return {
    readings: sweeps.reduce((a, f) => a + f.readings, 0),
    maxAbsBias: sweeps.reduce((a, f) => Math.max(a, f.maxAbsBias), 0),
    charge: sweeps.reduce((a, f) => a + f.charge, 0),
    parameter: sweeps.at(-1)?.parameter ?? null,
    sweeps: [...sweeps],
  };
}

/** Exit codes of `plumbline run` by outcome. */
export const EXIT_CODE: Record<RunOutcome, number> = {
  completed: 0,
  stopped: 0,
  'aborted-user': 3,
  'aborted-drift': 4,
  'aborted-breakdown': 5,
  'instrument-fault': 6,
  'guard-refused': 7,
  interrupted: 8,
  'journal-fault': 9,
  'internal-error': 10,
};

class AbortSignalled extends Error {}

export class RunController {
  private abortReason: string | undefined;
  private abortOutcome: RunOutcome = 'aborted-user';
  private wake: (() => void) | undefined;
  private offSent: Promise<boolean> | undefined;
  private finished = false;
  private usable = 0;
  private readonly rejectedBy: Record<string, number> = {};
  /** The first journal failure (the run goes on to turn the output off without it). */
  private journalError: Error | undefined;

  constructor(
    readonly source: GuardedSource,
    readonly chain: LiveChain,
    readonly plan: Plan,
    readonly device?: DeviceIdentity,
    readonly sessionId = 'session',
  ) {
    // A line nobody asked for means every later reply would land on the wrong query.
    source.driver.session.onStray = (line) => {
      if (this.finished || this.aborting) return;
      this.abort(
        `out of step: the instrument sent '${line.slice(0, 120)}' with no query waiting for it (an extra reply line, or a reply to an earlier command)`,
        'instrument-fault',
      );
    };
  }

  get aborting(): boolean {
    return this.abortReason !== undefined;
  }

  /** Stop after the sweep in progress (the source ramps down, then output off). */
  stop(reason = 'stop requested'): void {
    if (this.finished || this.aborting) return;
    this.chain.requestStop(reason);
  }

  /**
   * Abort now: output off at once — written ahead of any queued command and of a reading still in
   * flight — then the decision is recorded.
   */
  abort(reason: string, outcome: RunOutcome = 'aborted-user'): void {
    // After the run has ended (output already off, journal closed) an abort has nothing to do.
    if (this.abortReason !== undefined || this.finished) return;
    this.abortReason = reason;
    this.abortOutcome = outcome;
    this.offSent = this.source.emergencyOff(reason);
    if (outcome === 'aborted-user') this.record({ type: 'decision', action: 'abort', reason });
    else if (outcome === 'instrument-fault' || outcome === 'journal-fault') {
      this.record({
        type: 'caution',
        kind: outcome,
        message: `${outcome === 'journal-fault' ? 'The journal could not be written' : 'Instrument fault'}: ${reason}. Output off was sent at once; check the instrument's front panel before touching the fixture.`,
      });
    }
    this.wake?.();
  }

  /** Journals and broadcasts; a journal failure is kept, never thrown into a safety path. */
  private record(e: NewEvent): void {
    try {
      this.chain.emit(e);
    } catch (err) {
      this.journalError ??= err as Error;
    }
  }

  /**
   * How the run's waits (point delays, dwells, a test's hold times) pass: wall time (the default),
   * or, for a built-in simulator in fast mode, at once on the simulator's clock.
   */
  settle?: (s: number) => Promise<void>;

  private sleep(s: number): Promise<void> {
    if (s <= 0) return Promise.resolve();
    if (this.settle) return this.settle(s);
    return new Promise((resolve) => {
      const t = setTimeout(() => {
        this.wake = undefined;
        resolve();
      }, s * 1000);
      this.wake = () => {
        clearTimeout(t);
        this.wake = undefined;
        resolve();
      };
    });
  }

  private check(): void {
    if (this.abortReason !== undefined) throw new AbortSignalled(this.abortReason);
  }

  async execute(): Promise<RunResult> {
    const plan = this.plan;
    let outcome: RunOutcome = 'completed';
    let reason = '';
    let offSent: boolean | undefined;
    try {
      let ended: { outcome: RunOutcome; reason: string };
      if (isStressPlan(plan)) ended = await this.stressBody(plan);
      else if (plan.kind === 'adaptive') ended = await this.adaptiveBody(plan);
      else ended = await this.sweepBody(plan);
      ({ outcome, reason } = ended);
      if (this.source.isOn) {
        await this.source.toZero();
        offSent = await this.source.outputOff();
        this.chain.emit({ type: 'output', on: false, sent: offSent, confirmed: false, reason: 'run ended' });
      } else {
        // The body turned the output off itself (a breakdown test does, at once) and recorded it.
        offSent = true;
      }
      if (this.usable === 0) {
        const total = Object.values(this.rejectedBy).reduce((a, b) => a + b, 0) + this.chain.readings;
        outcome = 'instrument-fault';
        reason = `no usable reading in ${total} repl${total === 1 ? 'y' : 'ies'} (${this.describeRejects()}): check the dialect's readFields and the instrument's range`;
        this.record({ type: 'caution', kind: 'instrument-fault', message: `The run gave no usable reading: ${reason}.` });
      }
    } catch (e) {
      // Output off before anything else: nothing below (journal, disk, page) may delay it.
      if (!this.offSent) this.offSent = this.source.emergencyOff((e as Error).message);
      offSent = await this.offSent;
      // Once an abort has begun, whatever else fails (a cancelled command, a refused level) is its consequence.
      const aborted = e instanceof AbortSignalled || this.aborting;
      if (aborted) {
        outcome = this.abortOutcome;
        reason = this.abortReason ?? (e as Error).message;
      } else ({ outcome, reason } = this.classify(e as Error));
      // The journal records the output off where it happened: before the interrupted sweep is
      // closed and fitted (a fit takes its time; the output did not wait for it).
      this.record({
        type: 'output',
        on: false,
        sent: offSent,
        confirmed: false,
        reason: offSent ? `output off sent after: ${reason}` : `output off could NOT be sent (the connection is gone) after: ${reason}`,
      });
      if (aborted) {
        if (this.sweepOpen) this.safely(() => this.chain.endSweep(false, `aborted: ${reason}`));
        // An adaptive sweep the abort cut (or ended at its close) is journaled now, the output off.
        for (const f of this.adaptive.slice(this.adaptiveJournaled)) this.safely(() => this.record({ type: 'adaptive-sweep', ...f }));
      } else {
        if (this.sweepOpen) this.safely(() => this.chain.endSweep(false, `ended by: ${reason}`));
        this.record({
          type: 'caution',
          kind: outcome === 'journal-fault' ? 'journal-fault' : 'instrument-fault',
          message: `${outcome === 'guard-refused' ? 'The safety guard refused a command' : outcome === 'journal-fault' ? 'The journal could not be written' : 'Instrument fault'}: ${reason}. ${
            offSent
              ? "Output off was sent at once; check the instrument's front panel before touching the fixture."
              : "Output off could NOT be sent (the connection is gone): the instrument keeps its output as it was. Treat the terminals as live; check the instrument's front panel and turn the output off there before touching the fixture."
          }`,
        });
      }
    }
    // The instrument's own word on its output.
    const check = await this.source.confirmOff();
    this.record({ type: 'output', on: false, sent: offSent ?? false, queried: true, confirmed: check.confirmed, reason: check.detail });
    if (!check.confirmed) {
      this.record({
        type: 'caution',
        kind: 'output-unconfirmed',
        message: `The instrument did not confirm that its output is off: ${check.detail}. Treat the terminals as live; check the instrument's front panel and turn the output off there before touching the fixture.`,
      });
    }
    if (this.journalError && outcome !== 'journal-fault') {
      outcome = 'journal-fault';
      reason = `${this.journalError.message} (the run was ${reason})`;
    }
    if (isStressPlan(plan)) this.writeResults(outcome, reason);
    this.finished = true;
    this.safely(() => this.chain.end(outcome, reason));
    return {
      outcome,
      reason,
      sweeps: this.chain.sweepsDone,
      usable: this.usable,
      rejected: { ...this.rejectedBy },
      outputOffConfirmed: check.confirmed,
      ...(this.testResult ? { result: this.testResult } : {}),
      ...(plan.kind === 'adaptive' ? { adaptive: adaptiveTotals(this.adaptive) } : {}),
    };
  }

  /** Whether a sweep is open in the chain (an abort closes it as incomplete). */
  private get sweepOpen(): boolean {
    return this.chain.sweepInProgress;
  }

  /** Configure, output on (the instrument must confirm it), and say the terminals are live. */
  private async powerUp(compliance: number, nplc: number | undefined): Promise<void> {
    await this.source.configure(compliance, nplc);
    this.check();
    await this.source.outputOn();
    this.check();
    this.chain.emit({ type: 'output', on: true, sent: true, queried: true, confirmed: true, reason: 'run started (the instrument reports its output on)' });
    this.chain.emit({
      type: 'caution',
      kind: 'output-on',
      message: "Output on. The device terminals are live: keep hands off the probes and the fixture, and follow your lab's safety rules.",
    });
  }

  private async sweepBody(plan: SweepPlan): Promise<{ outcome: RunOutcome; reason: string }> {
    const values = sweepValues(plan);
    await this.powerUp(plan.compliance, plan.nplc);
    for (let s = 1; s <= plan.repeat; s++) {
      this.check();
      if (Math.abs(values[0] - this.source.present) > 1e-12) await this.source.rampTo(values[0]);
      this.chain.startSweep(s, values.length, `sweep ${s} of ${plan.repeat}`);
      let decision: Decision | undefined;
      if (plan.pacing === 'instrument') {
        // The instrument steps through each block itself; the readings are judged when the block
        // is fetched, and an abort decision turns the output off before the next block.
        const size = Math.min(plan.blockPoints ?? values.length, this.source.driver.dialect.paced?.maxPoints ?? values.length);
        const perPointMs = plan.delay * 1000 + ((plan.nplc ?? 1) / 50) * 1000 + 2;
        blocks: for (let b = 0; b < values.length; b += size) {
          this.check();
          const levels = values.slice(b, b + size);
          const ms = await this.source.block(levels, plan.delay, levels.length * perPointMs);
          this.check();
          for (let k = 0; k < ms.length; k++) {
            decision = this.take(ms[k], levels[k]);
            if (decision?.action === 'abort') {
              this.abort(decision.reason, decision.outcome);
              break blocks;
            }
          }
        }
      } else {
        for (const v of values) {
          this.check();
          await this.source.step(v);
          if (plan.delay > 0) await this.sleep(plan.delay);
          this.check();
          const m = await this.source.measure();
          this.check();
          decision = this.take(m, v);
          if (decision?.action === 'abort') {
            this.abort(decision.reason, decision.outcome);
            break;
          }
        }
      }
      if (this.aborting) {
        this.chain.endSweep(false, `aborted: ${this.abortReason}`);
        throw new AbortSignalled(this.abortReason);
      }
      decision = this.chain.endSweep(true);
      if (decision?.action === 'abort') {
        this.abort(decision.reason, decision.outcome);
        throw new AbortSignalled(decision.reason);
      }
      if (decision?.action === 'stop-after-sweep') return { outcome: decision.outcome, reason: decision.reason };
      if (s < plan.repeat && plan.dwell > 0) {
        await this.source.rampTo(0);
        await this.sleep(plan.dwell);
      }
    }
    return { outcome: 'completed', reason: `all ${plan.repeat} sweep(s) done` };
  }

  private testResult: DeviceResult | undefined;

  private async stressBody(plan: StressPlan): Promise<{ outcome: RunOutcome; reason: string }> {
    const test = new StressTest(this.context(), plan, this.device ?? {}, this.sessionId);
    const r = await test.run();
    this.testResult = r.result;
    // Breakdown is what the test is for: the run itself completed; the result says what happened.
    return { outcome: 'completed', reason: r.reason };
  }

  /** Each adaptive sweep's figures (readings, largest bias, charge, parameter, why it stopped). */
  readonly adaptive: AdaptiveSweepFigures[] = [];
  /** How many of them are journaled (an abort journals the rest once the output is off). */
  private adaptiveJournaled = 0;

  private async adaptiveBody(plan: AdaptivePlan): Promise<{ outcome: RunOutcome; reason: string }> {
    await this.powerUp(plan.compliance, plan.nplc);
    return runAdaptive(this.context(), plan, this.adaptive);
  }

  /** What the test and adaptive bodies see of this run. */
  private context(): RunContext {
    return {
      source: this.source,
      chain: this.chain,
      check: () => this.check(),
      sleep: (s) => this.sleep(s),
      take: (m, programmed, brokeDown) => {
        const d = this.take(m, programmed, brokeDown);
        if (d?.action === 'abort') {
          this.abort(d.reason, d.outcome);
          this.check();
        }
        return d;
      },
      record: (e) => {
        if (e.type === 'adaptive-sweep') this.adaptiveJournaled++;
        this.record(e);
      },
      endSweep: (note) => {
        const d = this.chain.endSweep(true, note);
        if (d?.action === 'abort') {
          this.abort(d.reason, d.outcome);
          throw new AbortSignalled(d.reason);
        }
        return d?.action === 'stop-after-sweep' ? 'stop' : undefined;
      },
    };
  }

  /** The device-results row of a breakdown test beside the journal (an aborted test is "invalid"). */
  private writeResults(outcome: RunOutcome, reason: string): void {
    const dir = this.chain.options.journal.dir;
    const r: DeviceResult =
      this.testResult && outcome === 'completed'
        ? this.testResult
        : {
            device: this.device?.device ?? this.sessionId,
            wafer: this.device?.wafer,
            site: this.device?.site,
            x: this.device?.x,
            y: this.device?.y,
            test: this.plan.kind,
            outcome: 'invalid',
            criterion: outcome,
            tags: this.device?.tags,
          };
    if (!this.testResult || outcome !== 'completed') this.testResult = r;
    this.safely(() => writeDeviceResults(dir, [r]));
    void reason;
  }

  /** One measurement into the chain (a reply without a reading is journaled as rejected, with its reason). */
  private take(m: Measurement, programmed: number, brokeDown = false): Decision | undefined {
    if (!m.reading) {
      const why = m.rejectReason ?? 'an unreadable reply';
      this.rejectedBy[why] = (this.rejectedBy[why] ?? 0) + 1;
      this.chain.rejected(m.raw, why);
      return undefined;
    }
    const r = m.reading;
    if (Number.isFinite(r.v) && Number.isFinite(r.i) && !r.overflow && !r.voltageOverflow) this.usable++;
    return this.chain.reading(r.v, r.i, m.compliance, r.overflow, programmed, r.voltageOverflow, brokeDown);
  }

  private safely(fn: () => unknown): void {
    try {
      fn();
    } catch (err) {
      this.journalError ??= err as Error;
    }
  }

  private describeRejects(): string {
    const parts = Object.entries(this.rejectedBy).map(([k, n]) => `${n} × ${k}`);
    const unusable = this.chain.readings - this.usable;
    if (unusable > 0) parts.push(`${unusable} over range or not finite`);
    return parts.join(', ') || 'none';
  }

  private classify(e: Error): { outcome: RunOutcome; reason: string } {
    if (e instanceof JournalWriteError) return { outcome: 'journal-fault', reason: `${e.message}; readings journaled before the failure are on disk` };
    if (e instanceof GuardError) return { outcome: 'guard-refused', reason: e.message };
    if (e instanceof PlanError) return { outcome: 'guard-refused', reason: e.message };
    if (e instanceof ScpiReplyError) return { outcome: 'instrument-fault', reason: `out of step: ${e.message}` };
    if (
      e instanceof ScpiTimeoutError ||
      e instanceof ScpiDisconnectError ||
      e instanceof ScpiInstrumentError ||
      e instanceof FencedError ||
      e instanceof OutputUnconfirmedError
    ) {
      return { outcome: 'instrument-fault', reason: e.message };
    }
    // Anything else is a defect of ours: say so rather than blaming the instrument.
    return { outcome: 'internal-error', reason: `internal error while driving the instrument (please report it): ${e.message}` };
  }
}
