/**
 * The simulated source-measure unit: a SCPI parser for the default dialect's subset, instrument
 * state (output, source level, compliance, integration time, range), measurement realism (noise as
 * ± % of reading + offset of the range, compliance clamp with the tripped flag, integration time as
 * the point period), an error queue, and fault injection for tests.
 *
 * It reads command lines and writes response lines through `send`; the transports (in-process, pty,
 * TCP) only carry bytes.
 */
import { formatScpiNumber, parseScpiNumber } from '../../protocols/scpi-numbers.js';
import { seededNormal } from '../analysis/random.js';
import { SimulatedDevice, type DeviceSpec } from './device.js';
import { matches, pattern, type HeaderPattern } from './scpi-headers.js';

export interface InstrumentSpec {
  /** Fraction of reading, e.g. 0.001. */
  readonly gain: number;
  /** Offset as a fraction of the current range, e.g. 1e-4. */
  readonly rangeOffset: number;
  /** Smallest current range, A (autorange goes up in decades). */
  readonly minRange: number;
  /** Power-line frequency, Hz (sets the integration time per NPLC). */
  readonly lineFrequency: number;
  /** Maximum |V| the simulated hardware accepts. */
  readonly maxVoltage: number;
}

export interface Faults {
  /** Emit garbage bytes before every n-th reply. */
  readonly garbageEvery?: number;
  /** Drop the terminator of every n-th reply. */
  readonly dropTerminatorEvery?: number;
  /** Delay every reply by this many ms. */
  readonly slowReplyMs?: number;
  /** Close the connection after this many READ? replies. */
  readonly disconnectAfterReadings?: number;
  /** Take this long over each reading (READ?, MEAS?), ms: a long integration; the parser waits meanwhile. */
  readonly readDelayMs?: number;
  /** Stop answering anything after this many readings (a hung instrument). */
  readonly hangAfterReadings?: number;
  /** After this many readings, send one extra reply line nobody asked for (a copy of the last reading). */
  readonly strayAfterReadings?: number;
  /** Answer every reading with this text instead (e.g. "+9.9E37,+9.9E37": over range; "9.91E37,9.91E37": not a number). */
  readonly readingReply?: string;
  /** A sticking output relay: from the n-th output-off command on (1 = the first), the output stays on. */
  readonly stuckOutputFromOff?: number;
}

export interface SimOptions {
  readonly device: DeviceSpec;
  readonly instrument?: Partial<InstrumentSpec>;
  readonly seed?: number;
  readonly faults?: Faults;
  /** Really wait the integration time before answering READ? (default true). */
  readonly realTime?: boolean;
  /**
   * How many lines `log`, `received` and `applied` keep (the oldest half goes past this; default
   * 200,000). A station's own simulator keeps fewer: a long run must not grow with its records.
   */
  readonly recordLimit?: number;
  readonly idn?: string;
}

const DEFAULT_INSTRUMENT: InstrumentSpec = { gain: 5e-4, rangeOffset: 2e-4, minRange: 1e-9, lineFrequency: 50, maxVoltage: 210 };

type Handler = (arg: string | undefined, query: boolean) => string | undefined | Promise<string | undefined>;

class ScpiError extends Error {
  constructor(
    readonly code: number,
    text: string,
  ) {
    super(text);
  }
}

export class SimulatedSmu {
  readonly device: SimulatedDevice;
  readonly spec: InstrumentSpec;
  private readonly normal: () => number;
  private faults: Faults;
  private readonly realTime: boolean;
  private readonly idn: string;
  private readonly commands: { pat: HeaderPattern; fn: Handler }[] = [];
  private readonly errors: { code: number; text: string }[] = [];
  private replies = 0;
  /** Output-off commands received (for the sticking-relay fault). */
  private offsReceived = 0;
  private readingsServed = 0;
  output = false;
  level = 0;
  compliance = 1e-3;
  nplc = 1;
  autoRange = true;
  range = 1e-3;
  tripped = false;
  /** What the source forces: a voltage (default) or a current (with a voltage compliance). */
  sourceFunction: 'VOLT' | 'CURR' = 'VOLT';
  /** Forced current in current mode, A. */
  currentLevel = 0;
  /** Voltage compliance in current mode, V. */
  voltageCompliance = 21;
  /** Simulated time let pass at once (`elapse`), ms: added to the wall clock to give the instrument's. */
  private skewMs = 0;
  /** When the device's wear was last brought up to date (the instrument's clock, ms). */
  private wearAt = performance.now();
  /** Reply elements of a reading (:FORM:ELEM): voltage and current, optionally a status word. */
  elements: ('VOLT' | 'CURR' | 'TIME' | 'STAT')[] = ['VOLT', 'CURR'];
  /** The instrument's clock: readings' TIME element is seconds since then (ms). */
  private readonly clockZero = performance.now();
  /** Source mode: a fixed level, or a list the instrument steps through itself after :INIT. */
  sourceMode: 'FIX' | 'LIST' = 'FIX';
  list: number[] = [];
  triggerCount = 1;
  sourceDelay = 0;
  /** True while an :INIT list sweep runs. */
  sweeping = false;
  private sweepAbort = false;
  private buffer: string[] = [];
  private hung = false;
  /** Every voltage actually applied to the device (for tests that check the wire). */
  readonly applied: number[] = [];
  /** How many entries each record below keeps before its oldest half is dropped. */
  readonly recordLimit: number;
  /** Every command line received, in order (bounded: the oldest half is dropped past recordLimit). */
  readonly log: string[] = [];
  /**
   * Every line as it arrived at the instrument's end of the wire, with the time of arrival in ms
   * since the Unix epoch (performance.timeOrigin + now, comparable across processes), before the
   * parser executed it. Bounded like `log`.
   */
  readonly received: { line: string; at: number; repliesSent: number }[] = [];
  /** Reply lines written to the wire so far. */
  repliesSent = 0;
  /** Bit of the reading's status word that means "at compliance" (this simulator's choice). */
  static readonly STATUS_COMPLIANCE = 8;
  /** Bit of the operation condition register set while a list sweep runs (SCPI's "sweeping" bit 3). */
  static readonly OPER_SWEEPING = 8;
  onDisconnect: (() => void) | undefined;

  constructor(options: SimOptions) {
    this.device = new SimulatedDevice(options.device, options.seed ?? 1);
    this.spec = { ...DEFAULT_INSTRUMENT, ...options.instrument };
    this.normal = seededNormal(options.seed ?? 1);
    this.faults = options.faults ?? {};
    this.realTime = options.realTime ?? true;
    this.recordLimit = options.recordLimit ?? 200_000;
    this.idn = options.idn ?? 'plumbline,simulated SMU,0,0.1';
    this.define();
  }

  /**
   * Lets `seconds` of simulated time pass at once (a fast simulator's waits cost no wall time): the
   * instrument's clock and the device's wear move on as if they had been waited.
   */
  elapse(seconds: number): void {
    this.skewMs += seconds * 1000;
  }

  /** Simulated time let pass at once so far, s. */
  get elapsedAtOnce(): number {
    return this.skewMs / 1000;
  }

  /** Removes injected faults (a "repaired" instrument for reconnect tests). */
  clearFaults(): void {
    this.faults = {};
  }

  private on(spec: string, fn: Handler): void {
    this.commands.push({ pat: pattern(spec), fn });
  }

  private num(arg: string | undefined): number {
    if (arg === undefined) throw new ScpiError(-109, 'Missing parameter');
    const n = parseScpiNumber(arg);
    if (n.flag !== 'ok') throw new ScpiError(-104, 'Data type error');
    return n.value;
  }

  private bool(arg: string | undefined): boolean {
    const a = (arg ?? '').trim().toUpperCase();
    if (a === 'ON' || a === '1') return true;
    if (a === 'OFF' || a === '0') return false;
    throw new ScpiError(-224, 'Illegal parameter value');
  }

  private define(): void {
    this.on('*IDN', (_a, q) => (q ? this.idn : undefined));
    this.on('*RST', () => {
      this.stopSweep();
      this.wear(() => (this.output = false));
      this.level = 0;
      this.compliance = 1e-3;
      this.nplc = 1;
      this.tripped = false;
      this.elements = ['VOLT', 'CURR'];
      this.sourceFunction = 'VOLT';
      this.currentLevel = 0;
      this.voltageCompliance = 21;
      this.sourceMode = 'FIX';
      this.list = [];
      this.triggerCount = 1;
      this.sourceDelay = 0;
      return undefined;
    });
    this.on('*CLS', () => {
      this.errors.length = 0;
      return undefined;
    });
    this.on('*OPC', (_a, q) => (q ? '1' : undefined));
    this.on('*ESR', (_a, q) => (q ? '0' : undefined));
    this.on('*STB', (_a, q) => (q ? String(this.errors.length ? 4 : 0) : undefined));
    this.on(':SYSTem:ERRor[:NEXT]', (_a, q) => {
      if (!q) throw new ScpiError(-113, 'Undefined header');
      const e = this.errors.shift();
      return e ? `${e.code},"${e.text}"` : '0,"No error"';
    });
    this.on(':SYSTem:VERSion', () => '1999.0');
    this.on('[:SOURce]:FUNCtion[:MODE]', (a, q) => {
      if (q) return this.sourceFunction;
      const f = (a ?? '').trim();
      if (/^VOLT(AGE)?$/i.test(f)) this.wear(() => (this.sourceFunction = 'VOLT'));
      else if (/^CURR(ENT)?$/i.test(f)) this.wear(() => (this.sourceFunction = 'CURR'));
      else throw new ScpiError(-224, 'Illegal parameter value');
      return undefined;
    });
    this.on('[:SOURce]:VOLTage[:LEVel][:IMMediate][:AMPLitude]', (a, q) => {
      if (q) return formatScpiNumber(this.level);
      const v = this.num(a);
      if (Math.abs(v) > this.spec.maxVoltage) throw new ScpiError(-222, 'Data out of range');
      this.wear(() => (this.level = v));
      return undefined;
    });
    this.on('[:SOURce]:CURRent[:LEVel][:IMMediate][:AMPLitude]', (a, q) => {
      if (q) return formatScpiNumber(this.currentLevel);
      const c = this.num(a);
      if (Math.abs(c) > 1) throw new ScpiError(-222, 'Data out of range');
      this.wear(() => (this.currentLevel = c));
      return undefined;
    });
    this.on(':SENSe:VOLTage[:DC]:PROTection[:LEVel]', (a, q) => {
      if (q) return formatScpiNumber(this.voltageCompliance);
      const v = this.num(a);
      if (!(v > 0) || v > this.spec.maxVoltage) throw new ScpiError(-222, 'Data out of range');
      this.wear(() => (this.voltageCompliance = v));
      return undefined;
    });
    this.on(':SENSe:CURRent[:DC]:PROTection[:LEVel]', (a, q) => {
      if (q) return formatScpiNumber(this.compliance);
      const c = this.num(a);
      if (!(c > 0) || c > 1) throw new ScpiError(-222, 'Data out of range');
      this.compliance = c;
      return undefined;
    });
    this.on(':SENSe:CURRent[:DC]:PROTection:TRIPped', (_a, q) => (q ? (this.tripped ? '1' : '0') : undefined));
    this.on(':SENSe:CURRent[:DC]:NPLCycles', (a, q) => {
      if (q) return formatScpiNumber(this.nplc);
      const n = this.num(a);
      if (!(n >= 0.001 && n <= 100)) throw new ScpiError(-222, 'Data out of range');
      this.nplc = n;
      return undefined;
    });
    this.on(':SENSe:CURRent[:DC]:RANGe[:UPPer]', (a, q) => {
      if (q) return formatScpiNumber(this.range);
      this.range = this.num(a);
      this.autoRange = false;
      return undefined;
    });
    this.on(':SENSe:CURRent[:DC]:RANGe:AUTO', (a, q) => {
      if (q) return this.autoRange ? '1' : '0';
      this.autoRange = this.bool(a);
      return undefined;
    });
    this.on(':OUTPut[:STATe]', (a, q) => {
      if (q) return this.output ? '1' : '0';
      const on = this.bool(a);
      if (!on && this.faults.stuckOutputFromOff !== undefined && ++this.offsReceived >= this.faults.stuckOutputFromOff) return undefined;
      this.wear(() => (this.output = on));
      if (!this.output) {
        this.tripped = false;
        this.stopSweep();
      }
      return undefined;
    });
    this.on(':ABORt', () => {
      this.stopSweep();
      return undefined;
    });
    const read: Handler = (_a, q) => (q ? this.measure() : undefined);
    this.on(':READ', read);
    this.on(':MEASure[:CURRent][:DC]', read);
    this.on(':FORMat:ELEMents', (a, q) => {
      if (q) return this.elements.join(',');
      const els = (a ?? '').split(',').map((x) =>
        x
          .trim()
          .toUpperCase()
          .replace(/^(VOLT)AGE$|^(CURR)ENT$|^(STAT)US$/, '$1$2$3'),
      );
      if (els.length === 0 || els.some((e) => e !== 'VOLT' && e !== 'CURR' && e !== 'TIME' && e !== 'STAT'))
        throw new ScpiError(-224, 'Illegal parameter value');
      this.elements = els as ('VOLT' | 'CURR' | 'TIME' | 'STAT')[];
      return undefined;
    });
    this.on(':STATus:OPERation:CONDition', (_a, q) => (q ? String(this.sweeping ? SimulatedSmu.OPER_SWEEPING : 0) : undefined));
    this.on('[:SOURce]:VOLTage:MODE', (a, q) => {
      if (q) return this.sourceMode;
      const m = (a ?? '').trim().toUpperCase();
      if (m === 'FIX' || m === 'FIXED') this.sourceMode = 'FIX';
      else if (m === 'LIST') this.sourceMode = 'LIST';
      else throw new ScpiError(-224, 'Illegal parameter value');
      return undefined;
    });
    this.on('[:SOURce]:LIST:VOLTage', (a, q) => {
      if (q) return this.list.map(formatScpiNumber).join(',');
      const vals = (a ?? '').split(',').map((x) => this.num(x));
      if (vals.length === 0 || vals.length > 2500) throw new ScpiError(-223, 'Too much data');
      if (vals.some((v) => Math.abs(v) > this.spec.maxVoltage)) throw new ScpiError(-222, 'Data out of range');
      this.list = vals;
      return undefined;
    });
    this.on(':TRIGger[:SEQuence]:COUNt', (a, q) => {
      if (q) return String(this.triggerCount);
      const n = Math.round(this.num(a));
      if (!(n >= 1 && n <= 2500)) throw new ScpiError(-222, 'Data out of range');
      this.triggerCount = n;
      return undefined;
    });
    this.on('[:SOURce]:DELay', (a, q) => {
      if (q) return formatScpiNumber(this.sourceDelay);
      const d = this.num(a);
      if (!(d >= 0 && d <= 1000)) throw new ScpiError(-222, 'Data out of range');
      this.sourceDelay = d;
      return undefined;
    });
    this.on(':INITiate[:IMMediate]', () => {
      if (!this.output) throw new ScpiError(-221, 'Settings conflict; output is off');
      if (this.sweeping) throw new ScpiError(-213, 'Init ignored');
      this.startSweep();
      return undefined;
    });
    this.on(':FETCh', (_a, q) => (q ? (this.buffer.length ? this.buffer.join(',') : undefined) : undefined));
  }

  /** Runs the loaded list (or the fixed level) triggerCount times in the background, as the instrument's own trigger model does. */
  private startSweep(): void {
    this.sweeping = true;
    this.sweepAbort = false;
    this.buffer = [];
    const levels = this.sourceMode === 'LIST' && this.list.length ? this.list : [this.level];
    void (async () => {
      for (let k = 0; k < this.triggerCount && !this.sweepAbort && this.output; k++) {
        this.wear(() => (this.level = levels[k % levels.length]));
        if (this.realTime && this.sourceDelay > 0) await new Promise((r) => setTimeout(r, this.sourceDelay * 1000));
        else await new Promise((r) => setImmediate(r));
        if (this.sweepAbort || !this.output) break;
        this.buffer.push(await this.measure());
      }
      this.sweeping = false;
    })();
  }

  private stopSweep(): void {
    this.sweepAbort = true;
  }

  /**
   * The bias across the device now: the level in voltage mode; in current mode the voltage at which
   * it draws the forced current (bisection within the voltage compliance), or the compliance itself
   * when it cannot draw that much.
   */
  private deviceBias(): { v: number; atLimit: boolean } {
    if (this.sourceFunction === 'VOLT') return { v: this.level, atLimit: false };
    const target = this.currentLevel;
    const s = Math.sign(target) || 1;
    const vc = this.voltageCompliance * s;
    if (Math.abs(this.device.current(vc)) < Math.abs(target)) return { v: vc, atLimit: true };
    let lo = 0;
    let hi = vc;
    for (let k = 0; k < 80; k++) {
      const mid = 0.5 * (lo + hi);
      if (Math.abs(this.device.current(mid)) >= Math.abs(target)) hi = mid;
      else lo = mid;
    }
    return { v: hi, atLimit: false };
  }

  /**
   * Brings the device's wear up to now at the bias it has had since the last change (wall-clock
   * time while the output is on), then applies the change.
   */
  private wear(change: () => void = () => undefined): void {
    const now = performance.now() + this.skewMs;
    if (this.output && this.device.spec.wearout) this.device.age(this.deviceBias().v, (now - this.wearAt) / 1000);
    this.wearAt = now;
    change();
  }

  /** One source-measure point: the reply is "<voltage>,<current>" in NR3. */
  private async measure(): Promise<string> {
    if (!this.output) throw new ScpiError(-221, 'Settings conflict; output is off');
    const period = (this.nplc / this.spec.lineFrequency) * 1000;
    if (this.realTime && period >= 1) await new Promise((r) => setTimeout(r, period));
    if (this.faults.readDelayMs) await new Promise((r) => setTimeout(r, this.faults.readDelayMs));
    this.wear();
    if (this.sourceFunction === 'CURR') return this.measureForced();
    let v = this.level;
    this.applied.push(v);
    if (this.applied.length > this.recordLimit) this.applied.splice(0, this.recordLimit >> 1);
    let i = this.device.current(v);
    this.tripped = Math.abs(i) >= this.compliance;
    if (this.tripped) {
      // At compliance the source can no longer hold V: find the bias where |I| equals the limit.
      let lo = 0;
      let hi = v;
      for (let k = 0; k < 60; k++) {
        const mid = 0.5 * (lo + hi);
        if (Math.abs(this.device.current(mid)) >= this.compliance) hi = mid;
        else lo = mid;
      }
      v = lo;
      i = Math.sign(this.level || 1) * this.compliance;
    }
    this.device.stress(this.level);
    let range = this.range;
    if (this.autoRange) {
      range = this.spec.minRange;
      while (range < Math.abs(i) && range < 1) range *= 10;
    }
    const sigma = this.spec.gain * Math.abs(i) + this.spec.rangeOffset * range;
    const iMeas = this.tripped ? i : i + sigma * this.normal();
    const vMeas = v + (1e-5 * Math.abs(v) + 1e-5) * this.normal();
    this.readingsServed++;
    if (this.faults.readingReply !== undefined) return this.faults.readingReply;
    return this.formatReading(vMeas, iMeas);
  }

  /** A reading in current mode: the forced current and the voltage it took (or the voltage compliance). */
  private measureForced(): string {
    const { v, atLimit } = this.deviceBias();
    this.applied.push(v);
    if (this.applied.length > this.recordLimit) this.applied.splice(0, this.recordLimit >> 1);
    this.tripped = atLimit;
    const i = atLimit ? this.device.current(v) : this.currentLevel;
    this.device.stress(v);
    const iMeas = i * (1 + this.spec.gain * this.normal());
    const vMeas = v + (1e-5 * Math.abs(v) + 1e-5) * this.normal();
    this.readingsServed++;
    if (this.faults.readingReply !== undefined) return this.faults.readingReply;
    return this.formatReading(vMeas, iMeas);
  }

  /** A reading's elements in the order :FORM:ELEM chose; TIME is the instrument clock when it was taken, s. */
  private formatReading(v: number, i: number): string {
    const t = (this.wearAt - this.clockZero) / 1000;
    return this.elements
      .map((e) =>
        e === 'VOLT'
          ? formatScpiNumber(v)
          : e === 'CURR'
            ? formatScpiNumber(i)
            : e === 'TIME'
              ? formatScpiNumber(t)
              : String(this.tripped ? SimulatedSmu.STATUS_COMPLIANCE : 0),
      )
      .join(',');
  }

  /** Whether the instrument has stopped answering (the hang fault). */
  get isHung(): boolean {
    return this.hung;
  }

  /** Readings served so far. */
  get readings(): number {
    return this.readingsServed;
  }

  private pushError(code: number, text: string): void {
    if (this.errors.length >= 10) {
      this.errors[9] = { code: -350, text: 'Queue overflow' };
      return;
    }
    this.errors.push({ code, text });
  }

  /**
   * Handles one program message (one line, possibly several ';'-separated units) and returns the
   * response line, or undefined when nothing is queried. Errors go to the queue, as on hardware.
   */
  async handleLine(line: string): Promise<string | undefined> {
    if (this.hung) return undefined;
    this.log.push(line);
    if (this.log.length > this.recordLimit) this.log.splice(0, this.recordLimit >> 1);
    const out: string[] = [];
    let path: string[] = [];
    for (const rawUnit of line.split(';')) {
      const unit = rawUnit.trim();
      if (!unit) continue;
      const m = /^([^\s]+)(?:\s+(.*))?$/.exec(unit);
      if (!m) continue;
      let header = m[1];
      const arg = m[2];
      const query = header.endsWith('?');
      if (query) header = header.slice(0, -1);
      let tokens: string[];
      if (header.startsWith('*')) tokens = [header];
      else if (header.startsWith(':')) tokens = header.slice(1).split(':');
      else tokens = [...path, ...header.split(':')];
      if (!header.startsWith('*')) path = tokens.slice(0, -1);
      const found = this.commands.find((c) => matches(c.pat, tokens));
      if (!found) {
        this.pushError(-113, 'Undefined header');
        continue;
      }
      try {
        const r = await found.fn(arg, query);
        if (query && r !== undefined) out.push(r);
        else if (query) this.pushError(-113, 'Undefined header');
      } catch (e) {
        if (e instanceof ScpiError) this.pushError(e.code, e.message);
        else throw e;
      }
    }
    if (out.length === 0) return undefined;
    this.replies++;
    return out.join(';');
  }

  /** Applies fault injection to a reply on its way out; returns the bytes to send. */
  frame(reply: string, isReading: boolean): { bytes: string; disconnect: boolean } {
    let bytes = `${reply}\n`;
    const f = this.faults;
    if (isReading && f.strayAfterReadings !== undefined && this.readingsServed === f.strayAfterReadings) bytes += `${reply}\n`;
    if (isReading && f.hangAfterReadings !== undefined && this.readingsServed >= f.hangAfterReadings) this.hung = true;
    if (f.dropTerminatorEvery && this.replies % f.dropTerminatorEvery === 0) bytes = reply;
    if (f.garbageEvery && this.replies % f.garbageEvery === 0) bytes = `\u0007#@!\u00ff${bytes}`;
    const disconnect = isReading && f.disconnectAfterReadings !== undefined && this.readingsServed >= f.disconnectAfterReadings;
    return { bytes, disconnect };
  }

  get slowReplyMs(): number {
    return this.faults.slowReplyMs ?? 0;
  }
}
