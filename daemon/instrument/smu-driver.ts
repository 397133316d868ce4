/**
 * The SMU driver: a dialect plus a SCPI session give configure, setVoltage, measure, outputOn and
 * the two ways of turning the output off. Order follows the usual safe-state recipe (common
 * practice for source-measure units): compliance before output on; the error queue drained after
 * every configuration step; output on confirmed by the instrument's own output query.
 *
 * Replies are checked against the query that asked for them: a reading with the wrong number of
 * fields, a compliance reply that is not 0 or 1, or a measured bias far from the level just
 * programmed means the replies have slipped onto the wrong queries — an OutOfStepError, which
 * ends the run with the output off.
 */
import { fill, fillList, type Dialect } from '../../protocols/dialect.js';
import { parseReading, REJECT_MEANING, RejectCounter, type Reading } from '../../protocols/reading-parser.js';
import { ScpiReplyError, ScpiTimeoutError, type ScpiSession } from '../../protocols/scpi-session.js';

const sleep = (ms: number) => new Promise<void>((r) => setTimeout(r, ms));

export interface Measurement {
  readonly reading: Reading | undefined;
  /** The raw reply, kept for the journal. */
  readonly raw: string;
  readonly compliance: boolean;
  /** Why the reply gave no reading (the parser's reason, in plain words). */
  readonly rejectReason?: string;
}

/** The instrument's replies no longer belong to the queries they answer. */
export class OutOfStepError extends ScpiReplyError {}

/** The instrument did not confirm that its output went off when asked (a breakdown test stops there). */
export class OutputUnconfirmedError extends Error {
  readonly code = 'OUTPUT_UNCONFIRMED';
}

/** A level or output-on command after the output was turned off for good. */
export class FencedError extends Error {
  readonly code = 'FENCED';
}

/** What the output query confirmed. */
export interface OffCheck {
  readonly confirmed: boolean;
  /** The instrument's reply, or why there is none. */
  readonly detail: string;
}

const STATE_REPLY = /^(?:[+]?[01](?:\.0*)?(?:E[+-]?0+)?|ON|OFF)$/i;

function parseState(reply: string): boolean {
  const t = reply.trim().toUpperCase();
  return t === 'ON' || (t !== 'OFF' && Number(t) === 1);
}

export class SmuDriver {
  readonly rejects = new RejectCounter();
  private outputKnownOn = false;
  private programmed = 0;
  private fenced = false;
  /** What the source forces: a voltage (the usual) or a current (current ramps). */
  private mode: 'voltage' | 'current' = 'voltage';

  constructor(
    readonly session: ScpiSession,
    readonly dialect: Dialect,
  ) {}

  async identify(): Promise<string> {
    return this.session.query(this.dialect.commands.identify);
  }

  /**
   * Returns once the instrument has carried out every command sent before (IEEE 488.2 *OPC?, which
   * answers only then). A wait that passes on the instrument's own clock must start after the level
   * it holds has really been applied.
   */
  async synchronize(): Promise<void> {
    await this.session.query('*OPC?');
  }

  /** Reset (if the dialect has one), output off, reading format, function, compliance, integration, auto range — then the error queue must be empty. */
  async configure(settings: { compliance: number; nplc?: number }): Promise<void> {
    const c = this.dialect.commands;
    if (c.reset) await this.session.write(c.reset);
    await this.session.write(c.outputOff);
    if (c.readingFormat) await this.session.write(c.readingFormat);
    await this.session.write(c.sourceVoltageMode);
    await this.session.write(fill(c.compliance, settings.compliance));
    if (settings.nplc !== undefined) await this.session.write(fill(c.integration, settings.nplc));
    await this.session.write(c.autoRange);
    await this.session.checkErrors('configuring the instrument');
    this.mode = 'voltage';
  }

  /**
   * Current sourcing: output off, the source function, the voltage compliance, integration — then
   * the error queue must be empty. Needs the dialect's current-sourcing commands.
   */
  async configureCurrentSource(settings: { voltageLimit: number; nplc?: number }): Promise<void> {
    const c = this.dialect.commands;
    if (!c.sourceCurrentMode || !c.sourceCurrent || !c.voltageCompliance) {
      throw new Error(`dialect '${this.dialect.name}' cannot source current (it has no sourceCurrentMode, sourceCurrent and voltageCompliance commands)`);
    }
    if (c.reset) await this.session.write(c.reset);
    await this.session.write(c.outputOff);
    if (c.readingFormat) await this.session.write(c.readingFormat);
    await this.session.write(c.sourceCurrentMode);
    await this.session.write(fill(c.voltageCompliance, settings.voltageLimit));
    if (settings.nplc !== undefined) await this.session.write(fill(c.integration, settings.nplc));
    await this.session.checkErrors('configuring the instrument to source current');
    this.mode = 'current';
    this.programmed = 0;
  }

  /** Forces a current, A (after configureCurrentSource). */
  async setCurrent(i: number): Promise<void> {
    this.checkFence('a source current');
    this.programmed = i;
    await this.session.write(fill(this.dialect.commands.sourceCurrent as string, i));
  }

  /** Whether the source forces a current. */
  get sourcesCurrent(): boolean {
    return this.mode === 'current';
  }

  private checkFence(what: string): void {
    if (this.fenced) throw new FencedError(`${what} refused: the output was turned off for good in this run`);
  }

  async setVoltage(v: number): Promise<void> {
    this.checkFence('a source level');
    if (this.mode === 'current') throw new Error('setVoltage while the source forces current');
    this.programmed = v;
    await this.session.write(fill(this.dialect.commands.sourceVoltage, v));
  }

  /** The level 0 in whichever quantity the source forces (before output on). */
  async setZero(): Promise<void> {
    if (this.mode === 'current') await this.setCurrent(0);
    else await this.setVoltage(0);
  }

  /** The level last programmed, V. */
  get programmedLevel(): number {
    return this.programmed;
  }

  /** Output on, then the error queue and the instrument's own output query must agree. */
  async outputOn(): Promise<void> {
    this.checkFence('output on');
    await this.session.write(this.dialect.commands.outputOn);
    this.outputKnownOn = true;
    await this.session.checkErrors('turning the output on');
    this.checkFence('the output-on check');
    const reply = await this.session.query(this.dialect.commands.outputQuery);
    if (!STATE_REPLY.test(reply.trim()))
      throw new OutOfStepError(
        `the reply to '${this.dialect.commands.outputQuery}' was '${reply.slice(0, 80)}', not an output state (0/1 or OFF/ON): replies are out of step with the queries`,
      );
    if (!parseState(reply))
      throw new OutOfStepError(
        `the instrument reports its output off ('${this.dialect.commands.outputQuery}' → '${reply.trim()}') right after output on (an interlock open?)`,
      );
  }

  /** Output off through the command queue (the normal end of a run). Never throws; resolves whether the bytes were written. */
  async outputOff(): Promise<boolean> {
    try {
      await this.session.write(this.dialect.commands.outputOff);
      this.outputKnownOn = false;
      return true;
    } catch {
      return false;
    }
  }

  /**
   * The safety path: drops every queued command, then writes the dialect's abort and output off at
   * once, ahead of any query still waiting for its reply; from then on no level or output-on command
   * is accepted. Never throws; resolves whether the bytes were handed to the transport.
   */
  emergencyOff(reason: string): Promise<boolean> {
    this.fenced = true;
    this.session.cancelQueued(`not sent: ${reason}`);
    const c = this.dialect.commands;
    return this.session.urgent([c.abort, c.outputOff]).then((ok) => {
      if (ok) this.outputKnownOn = false;
      return ok;
    });
  }

  /**
   * Asks the instrument whether its output is off: waits for the line to go quiet (a late reply of
   * an earlier query is discarded), then the dialect's output query. Confirmed only when the
   * instrument itself answers "off". Never throws.
   */
  async confirmOff(timeoutMs = this.session.timeoutMs): Promise<OffCheck> {
    const q = this.dialect.commands.outputQuery;
    if (this.session.isClosed) return { confirmed: false, detail: 'the connection to the instrument is closed: its output state is unknown' };
    try {
      if (this.session.unsettled) await this.session.resync(100, timeoutMs);
      const reply = await this.session.query(q, timeoutMs, STATE_REPLY);
      const on = parseState(reply);
      return on
        ? { confirmed: false, detail: `the instrument reports its output ON ('${q}' → '${reply.trim()}')` }
        : { confirmed: true, detail: `the instrument reports its output off ('${q}' → '${reply.trim()}')` };
    } catch (e) {
      return { confirmed: false, detail: `no answer to '${q}' (${(e as Error).message}): the output state is unknown` };
    }
  }

  get outputOnAsFarAsKnown(): boolean {
    return this.outputKnownOn;
  }

  /** One reading at the programmed level, checked against the query that asked for it. */
  async measure(): Promise<Measurement> {
    const d = this.dialect;
    const raw = await this.session.query(d.commands.measure);
    const parsed = parseReading(raw, d.readFields);
    if (!parsed.ok) {
      if (parsed.reason === 'field count') {
        throw new OutOfStepError(
          `the reply to '${d.commands.measure}' was '${raw.slice(0, 120)}': ${raw.split(',').length} field(s) where the dialect expects ${d.readFields.length} (${d.readFields.join(', ')}): replies are out of step with the queries`,
        );
      }
      this.rejects.add(parsed.reason);
      return { reading: undefined, raw, compliance: false, rejectReason: REJECT_MEANING[parsed.reason] };
    }
    const r = parsed.reading;
    let compliance: boolean;
    if (d.status && r.status !== undefined) {
      compliance = Number.isFinite(r.status) && (Math.round(r.status) & d.status.complianceMask) !== 0;
    } else {
      const q = (this.mode === 'current' ? d.commands.voltageComplianceTripped : undefined) ?? (d.commands.complianceTripped as string);
      const tripped = (await this.session.query(q)).trim();
      if (!/^\+?[01]$/.test(tripped)) {
        throw new OutOfStepError(`the reply to '${q}' was '${tripped.slice(0, 120)}', not 0 or 1: replies are out of step with the queries`);
      }
      compliance = tripped.endsWith('1');
    }
    this.checkReadback(r, compliance, raw);
    return { reading: r, raw, compliance };
  }

  /**
   * Instrument-paced block: loads the levels, lets the instrument step through them on its own
   * (settling `delay` s before each measurement), polls its busy bit — a short query, so the parser
   * stays free for an abort — and fetches every reading at once. Each reading is checked against its
   * own level as in `measure`. `expectedMs` bounds the wait (a block that never ends is a fault).
   */
  async runBlock(levels: readonly number[], delay: number, expectedMs: number): Promise<Measurement[]> {
    const d = this.dialect;
    const p = d.paced;
    if (!p) throw new Error(`dialect '${d.name}' has no instrument-paced templates`);
    this.checkFence('an instrument-paced block');
    await this.session.write(p.listMode);
    await this.session.write(fillList(p.listValues, levels));
    await this.session.write(fill(p.pointCount, levels.length));
    await this.session.write(fill(p.pointDelay, delay));
    await this.session.checkErrors('loading a block of levels');
    this.checkFence('an instrument-paced block');
    this.programmed = levels[levels.length - 1];
    await this.session.write(p.start);
    const t0 = performance.now();
    const budget = 2 * expectedMs + this.session.timeoutMs;
    const pollMs = Math.min(200, Math.max(10, expectedMs / 20));
    for (;;) {
      const reply = (await this.session.query(p.busyQuery)).trim();
      const word = Number(reply);
      if (!Number.isFinite(word))
        throw new OutOfStepError(`the reply to '${p.busyQuery}' was '${reply.slice(0, 80)}', not a status word: replies are out of step with the queries`);
      if ((Math.round(word) & p.busyMask) === 0) break;
      if (performance.now() - t0 > budget)
        throw new ScpiTimeoutError(`the instrument-paced block of ${levels.length} points did not finish within ${Math.round(budget)} ms`);
      await sleep(pollMs);
    }
    const raw = await this.session.query(p.fetch);
    const fields = raw.split(',');
    const per = d.readFields.length;
    if (fields.length !== per * levels.length) {
      throw new OutOfStepError(
        `the reply to '${p.fetch}' holds ${fields.length} fields where ${levels.length} readings of ${per} (${d.readFields.join(', ')}) were expected: replies are out of step with the queries`,
      );
    }
    const out: Measurement[] = [];
    for (let k = 0; k < levels.length; k++) {
      const text = fields.slice(k * per, (k + 1) * per).join(',');
      const parsed = parseReading(text, d.readFields);
      if (!parsed.ok) {
        this.rejects.add(parsed.reason);
        out.push({ reading: undefined, raw: text, compliance: false, rejectReason: REJECT_MEANING[parsed.reason] });
        continue;
      }
      const r = parsed.reading;
      const compliance = r.status !== undefined && Number.isFinite(r.status) && (Math.round(r.status) & (d.status?.complianceMask ?? 0)) !== 0;
      this.checkReadback(r, compliance, text, levels[k]);
      out.push({ reading: r, raw: text, compliance });
    }
    await this.session.write(p.fixedMode);
    await this.session.write(fill(d.commands.sourceVoltage, this.programmed));
    return out;
  }

  /** A measured bias far from the programmed level means the reply belongs to another point. */
  private checkReadback(r: Reading, compliance: boolean, raw: string, set = this.programmed): void {
    if (this.mode === 'current') {
      // Forcing current: the measured current must be the forced one (unless the voltage limit held it back).
      if (compliance || !Number.isFinite(r.i)) return;
      const tol = 1e-12 + Math.max(0.01, this.dialect.readback.relative) * Math.abs(set);
      if (Math.abs(r.i - set) > tol) {
        throw new OutOfStepError(
          `the reply '${raw.slice(0, 120)}' reports ${r.i} A while ${set} A is forced: the reply belongs to another point — replies are out of step with the commands`,
        );
      }
      return;
    }
    if (!Number.isFinite(r.v)) return;
    const tol = this.dialect.readback.absolute + this.dialect.readback.relative * Math.abs(set);
    // At compliance the source cannot hold the level: the bias falls toward zero, never beyond it.
    const fits = compliance ? Math.abs(r.v) <= Math.abs(set) + tol && (r.v * set >= 0 || Math.abs(r.v) <= tol) : Math.abs(r.v - set) <= tol;
    if (!fits) {
      throw new OutOfStepError(
        `the reply '${raw.slice(0, 120)}' reports ${r.v} V while ${set} V is programmed (more than ±${tol.toPrecision(3)} V apart${compliance ? ', at compliance' : ''}): the reply belongs to another point — replies are out of step with the commands`,
      );
    }
  }
}
