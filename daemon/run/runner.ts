/**
 * Executes a sweep plan through the safety guard, feeding every reading to the live chain, and
 * ends every path — completion, stop, abort, breakdown, drift, instrument fault, exception — with
 * the output off, attempted and recorded.
 */
import { ScpiDisconnectError, ScpiInstrumentError, ScpiTimeoutError } from '../../protocols/scpi-session.js';
import type { RunOutcome } from '../../protocols/wire.js';
import type { Decision, LiveChain } from '../pipeline/chain.js';
import { GuardError, type GuardedSource } from './guard.js';
import { sweepValues, type Plan } from './plan.js';

export interface RunResult {
  readonly outcome: RunOutcome;
  readonly reason: string;
  readonly sweeps: number;
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
};

class AbortSignalled extends Error {}

export class RunController {
  private abortReason: string | undefined;
  private abortOutcome: RunOutcome = 'aborted-user';
  private wake: (() => void) | undefined;
  private offSent: Promise<boolean> | undefined;
  private finished = false;

  constructor(readonly source: GuardedSource, readonly chain: LiveChain, readonly plan: Plan) {}

  get aborting(): boolean {
    return this.abortReason !== undefined;
  }

  /** Stop after the sweep in progress (the source ramps down, then output off). */
  stop(reason = 'stop requested'): void {
    if (this.finished) return;
    this.chain.requestStop(reason);
  }

  /** Abort now: output off at once, even while a reading is in flight. */
  abort(reason: string, outcome: RunOutcome = 'aborted-user'): void {
    // After the run has ended (output already off, journal closed) an abort has nothing to do.
    if (this.abortReason !== undefined || this.finished) return;
    this.abortReason = reason;
    this.abortOutcome = outcome;
    this.source.inhibit();
    if (outcome === 'aborted-user') this.chain.emit({ type: 'decision', action: 'abort', reason });
    this.offSent = this.offNow(reason);
    this.wake?.();
  }

  private async offNow(reason: string): Promise<boolean> {
    const ok = await this.source.outputOff();
    this.chain.emit({ type: 'output', on: false, confirmed: ok, reason });
    return ok;
  }

  private sleep(s: number): Promise<void> {
    if (s <= 0) return Promise.resolve();
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
    const values = sweepValues(plan);
    let outcome: RunOutcome = 'completed';
    let reason = `all ${plan.repeat} sweep(s) done`;
    let sweepOpen = false;
    try {
      await this.source.configure(plan.compliance, plan.nplc);
      this.check();
      await this.source.outputOn();
      this.chain.emit({ type: 'output', on: true, confirmed: true, reason: 'run started' });
      this.chain.emit({ type: 'caution', kind: 'output-on', message: 'Output on. The device terminals are live: keep hands off the probes and the fixture, and follow your lab\'s safety rules.' });
      for (let s = 1; s <= plan.repeat; s++) {
        this.check();
        if (Math.abs(values[0] - this.source.present) > 1e-12) await this.source.rampTo(values[0]);
        this.chain.startSweep(s, values.length, `sweep ${s} of ${plan.repeat}`);
        sweepOpen = true;
        let decision: Decision | undefined;
        for (const v of values) {
          this.check();
          await this.source.step(v);
          if (plan.delay > 0) await this.sleep(plan.delay);
          this.check();
          const m = await this.source.measure();
          if (!m.reading) {
            this.chain.rejected(m.raw, 'unreadable reply');
            continue;
          }
          decision = this.chain.reading(m.reading.v, m.reading.i, m.compliance, m.reading.overflow, v);
          if (decision?.action === 'abort') {
            this.abort(decision.reason, decision.outcome);
            break;
          }
        }
        if (this.aborting) {
          sweepOpen = false;
          this.chain.endSweep(false, `aborted: ${this.abortReason}`);
          throw new AbortSignalled(this.abortReason);
        }
        sweepOpen = false;
        decision = this.chain.endSweep(true);
        if (decision?.action === 'abort') {
          this.abort(decision.reason, decision.outcome);
          throw new AbortSignalled(decision.reason);
        }
        if (decision?.action === 'stop-after-sweep') {
          outcome = decision.outcome;
          reason = decision.reason;
          break;
        }
        if (s < plan.repeat && plan.dwell > 0) {
          await this.source.rampTo(0);
          await this.sleep(plan.dwell);
        }
      }
      await this.source.rampTo(0);
      const ok = await this.source.outputOff();
      this.chain.emit({ type: 'output', on: false, confirmed: ok, reason: 'run ended' });
    } catch (e) {
      if (e instanceof AbortSignalled || (e instanceof GuardError && this.aborting)) {
        outcome = this.abortOutcome;
        reason = this.abortReason ?? e.message;
        await this.offSent;
        // Belt and braces: whatever was in flight when the abort came, the last word is output off.
        const ok = await this.source.outputOff();
        if (!ok) this.chain.emit({ type: 'output', on: false, confirmed: false, reason: 'final output off after abort did not reach the instrument' });
      } else {
        const fault = e instanceof ScpiTimeoutError || e instanceof ScpiDisconnectError || e instanceof ScpiInstrumentError;
        outcome = e instanceof GuardError ? 'guard-refused' : fault ? 'instrument-fault' : 'instrument-fault';
        reason = (e as Error).message;
        if (sweepOpen) this.chain.endSweep(false, `ended by: ${reason}`);
        this.chain.emit({
          type: 'caution',
          kind: 'instrument-fault',
          message: `${e instanceof GuardError ? 'The safety guard refused a command' : 'Instrument fault'}: ${reason}. Output off was attempted; check the instrument's front panel before touching the fixture.`,
        });
        const ok = await this.source.outputOff();
        this.chain.emit({ type: 'output', on: false, confirmed: ok, reason: `after: ${reason}` });
      }
    }
    this.finished = true;
    this.chain.end(outcome, reason);
    return { outcome, reason, sweeps: this.chain.sweepsDone };
  }
}
