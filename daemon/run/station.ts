/**
 * The station: one instrument, its hard limits, the data folder and at most one run at a time.
 * The REST API, the page, `plumbline run` and signal handlers all act through this object; the
 * instrument is reached only through the run's GuardedSource.
 */
import { join } from 'node:path';
import type { Duplex } from 'node:stream';
import { config as rxjsConfig, Subject } from 'rxjs';
import { loadDialect, type Dialect } from '../../protocols/dialect.js';
import { ScpiSession } from '../../protocols/scpi-session.js';
import { openSerial, openTcp, duplexPair } from '../../protocols/transport.js';
import type { RunOutcome, Snapshot, WireEvent } from '../../protocols/wire.js';
import { parseDeviceIdentity, type DeviceIdentity } from '../../protocols/device-results.js';
import { SmuDriver } from '../instrument/smu-driver.js';
import { JournalWriter } from '../journal/journal.js';
import { listSessions, recoverAll, scanJournal, type RecoveryReport } from '../journal/reader.js';
import type { PlotView } from '../analysis/plot.js';
import { parameterNames } from '../analysis/analyze.js';
import { LiveChain } from '../pipeline/chain.js';
import { RecentEvents } from '../pipeline/recent.js';
import { analysisSchema, type AnalysisSettings, zodMessage } from '../pipeline/settings.js';
import { SimulatedSmu } from '../simulator/instrument.js';
import { findScenario, type Scenario } from '../simulator/scenarios.js';
import { attachInstrument } from '../simulator/serve.js';
import { dialectOf, type StationConfig } from './config.js';
import { checkPlan, GuardedSource } from './guard.js';
import { checkPlanSize, describePlan, isStressPlan, parsePlan, planCompliance, planShape, type Plan } from './plan.js';
import { RunController, type RunResult } from './runner.js';

// One stream of events from the chain to every subscriber (snapshot, websocket hub, terminal, lab
// publisher). A subscriber that throws must never reach the run: rxjs reports such errors here
// instead of throwing them from a timer (which would end the process).
// At most one report every 10 s (a broken subscriber fails on every reading).
let subscriberErrors = 0;
let lastReport = -Infinity;
rxjsConfig.onUnhandledError = (err: unknown) => {
  subscriberErrors++;
  const now = performance.now();
  if (now - lastReport < 10_000) return;
  lastReport = now;
  process.stderr.write(
    `plumbline: a subscriber of the event stream failed (${subscriberErrors} time(s) so far; the run is not affected): ${(err as Error)?.stack ?? String(err)}\n`,
  );
};

const TERMINATOR = { lf: '\n', crlf: '\r\n', cr: '\r' } as const;

export class StationError extends Error {
  constructor(
    message: string,
    readonly status = 409,
  ) {
    super(message);
    this.name = 'StationError';
  }
}

export interface RunHandle {
  readonly session: string;
  readonly dir: string;
  readonly plan: Plan;
  readonly done: Promise<RunResult>;
}

export class Station {
  /** Every event of every run, after the journal has it. */
  readonly events$ = new Subject<WireEvent>();
  /** Linearized views for pages (not journaled: derived from the readings). */
  readonly views$ = new Subject<{ session: string; sweep: number; final: boolean; view: PlotView }>();
  private views = new Map<number, { sweep: number; final: boolean; view: PlotView }>();
  readonly scenario: Scenario | undefined;
  private sim: SimulatedSmu | undefined;
  /** The seed of the simulated device now on the chuck (see connect). */
  private simSeed: number | undefined;
  private controller: RunController | undefined;
  private chain: LiveChain | undefined;
  private current: { session: string; dir: string } | undefined;
  private readonly recent = new RecentEvents();
  private analysis: AnalysisSettings;
  readonly recovered: RecoveryReport[];

  /**
   * `simulatorRecords`: how many lines the built-in simulator keeps in its records (`log`,
   * `received`, `applied`; tests read them). Few by default: they are kept long enough to age into
   * the old generation, and a long run would carry them.
   */
  constructor(
    readonly config: StationConfig,
    readonly dataDir: string,
    private readonly options: { simulatorRecords?: number } = {},
  ) {
    if (config.instrument.kind === 'simulator') {
      this.scenario = findScenario(config.instrument.scenario);
    }
    this.analysis = config.analysis ?? this.scenarioAnalysis();
    this.recovered = recoverAll(dataDir);
    // The snapshot buffer is the stream's first subscriber: a page connecting at any moment gets
    // everything up to the last event it will then receive live.
    this.events$.subscribe({ next: (e) => this.recent.add(e), error: () => undefined });
  }

  private scenarioAnalysis(): AnalysisSettings {
    const s = this.scenario;
    if (!s) return analysisSchema.parse({ model: 'ohmic' });
    return analysisSchema.parse({
      model: s.analysis.model,
      window: s.analysis.from !== undefined || s.analysis.to !== undefined ? { from: s.analysis.from, to: s.analysis.to } : 'auto',
      inputs: s.device.inputs,
      ...(s.analysis.solar ? { solar: s.analysis.solar } : {}),
    });
  }

  /** The plan used when a run is started without one. */
  defaultPlan(repeat?: number): Plan {
    const base =
      this.config.plan ??
      (this.scenario
        ? {
            kind: 'linear',
            start: this.scenario.sweep.start,
            stop: this.scenario.sweep.stop,
            points: this.scenario.sweep.points,
            compliance: this.scenario.sweep.compliance,
            repeat: 10,
          }
        : undefined);
    if (!base) throw new StationError('no plan given and the station config has no default plan', 400);
    return parsePlan({ ...base, ...(repeat !== undefined ? { repeat } : {}) }, 'default plan');
  }

  get running(): boolean {
    return this.controller !== undefined || this.passive || this.starting;
  }

  /** How the last run of this process ended (also when its journal could not record it). */
  private last: { session: string; outcome: RunOutcome; reason: string; outputOffConfirmed: boolean } | undefined;

  get lastRun(): { session: string; outcome: RunOutcome; reason: string; outputOffConfirmed: boolean } | null {
    return this.last ?? null;
  }

  /** Set from the first check of startRun until the run is registered (or has failed to start). */
  private starting = false;

  private passive = false;

  /** Whether this station drives an instrument (false while it watches a passive source). */
  get hasControl(): boolean {
    return !this.passive;
  }

  /**
   * A session fed by a passive source (a file or stream another program writes: `plumbline
   * watch`, and the page benchmark): the same chain, journal and page, with no control of the
   * instrument. The caller feeds `chain.startSweep / reading / endSweep` and ends with `close`.
   */
  openPassive(
    label: string,
    detail: string,
    options: { sweeps?: number; pointsPerSweep?: number; complianceLimit?: number } = {},
  ): { chain: LiveChain; session: string; dir: string; close(outcome: RunOutcome, reason: string): void } {
    if (this.running) throw new StationError(`a run is in progress (session ${this.current?.session})`);
    const { chain, id, dir } = this.newSession(label, {
      complianceLimit: options.complianceLimit,
      sweeps: options.sweeps ?? 0,
      pointsPerSweep: options.pointsPerSweep ?? 0,
      control: false,
    });
    chain.emit({
      type: 'session',
      id,
      startedAt: new Date(Date.now() - (performance.now() - chain.options.journal.t0)).toISOString(),
      source: { kind: 'passive', detail, control: false },
      instrument: 'unknown (passive source)',
      plan: null,
      analysis: this.analysis,
      drift: this.config.drift,
      limits: this.config.limits,
    });
    chain.emit({
      type: 'caution',
      kind: 'passive-source',
      message: `Readings come from ${detail}. plumbline does not control this instrument: it cannot turn the output off or abort the sweep; use the instrument's own controls.`,
    });
    this.passive = true;
    return {
      chain,
      session: id,
      dir,
      close: (outcome, reason) => {
        chain.end(outcome, reason);
        this.passive = false;
        this.chain = undefined;
      },
    };
  }

  private newSession(
    label: string,
    o: { complianceLimit?: number; sweeps: number; pointsPerSweep: number; control?: boolean; watches?: boolean },
  ): { chain: LiveChain; id: string; dir: string } {
    const { writer, id } = JournalWriter.create(this.dataDir, label);
    const dir = join(this.dataDir, id);
    const watches = o.watches ?? true;
    const chain = new LiveChain({
      journal: writer,
      analysis: this.analysis,
      drift: watches ? this.config.drift : { ...this.config.drift, enabled: false },
      breakdown: watches ? this.config.breakdown : { ...this.config.breakdown, enabled: false },
      complianceLimit: o.complianceLimit,
      hazardVoltage: this.config.limits.hazardVoltage,
      sweeps: o.sweeps,
      pointsPerSweep: o.pointsPerSweep,
      control: o.control ?? true,
      events: this.events$,
      // Views only for a page server (it subscribes to the station's views): a headless run
      // computes none.
      viewsWanted: () => this.views$.observed,
    });
    this.recent.clear();
    this.views = new Map();
    chain.views$.subscribe({
      next: (v) => {
        this.views.set(v.sweep, v);
        for (const k of this.views.keys()) if (k < v.sweep - 2) this.views.delete(k);
        this.views$.next({ session: id, ...v });
      },
      error: () => undefined,
    });
    this.chain = chain;
    this.current = { session: id, dir };
    return { chain, id, dir };
  }

  get analysisSettings(): AnalysisSettings {
    return this.analysis;
  }

  get simulator(): SimulatedSmu | undefined {
    return this.sim;
  }

  get currentSession(): string | undefined {
    return this.current?.session;
  }

  private async connect(dialect: Dialect, device?: DeviceIdentity): Promise<{ driver: SmuDriver; session: ScpiSession; detail: string }> {
    const ic = this.config.instrument;
    const timeoutMs = this.config.timeoutMs ?? dialect.timeoutMs;
    let stream: Duplex;
    let detail: string;
    if (ic.kind === 'simulator') {
      const scenario = this.scenario as Scenario;
      // A named device under test is a device of its own on the simulated chuck: its seed mixes the
      // station's with the identity (wafer, site, device), so a lot of named devices spreads as a
      // real one does (its own Weibull-drawn charge to breakdown) and a name comes back the same.
      // A run without a name stays on the device on the chuck (at first, the one the station's seed
      // makes): the probe has not moved, and a destroyed device stays destroyed.
      const who =
        device && (device.device !== undefined || device.site !== undefined) ? [device.wafer ?? '', device.site ?? '', device.device ?? ''].join('/') : '';
      const seed = who ? mixSeed(ic.seed, who) : (this.simSeed ?? ic.seed);
      if (!this.sim || this.simSeed !== seed) {
        this.sim = new SimulatedSmu({
          device: scenario.device,
          seed,
          realTime: ic.realTime,
          faults: ic.faults,
          recordLimit: this.options.simulatorRecords ?? 1_000,
        });
        this.simSeed = seed;
      }
      const [client, inst] = duplexPair();
      attachInstrument(this.sim, inst);
      stream = client;
      detail = `built-in simulated instrument, scenario ${scenario.name}: ${scenario.description}`;
    } else if (ic.kind === 'tcp') {
      stream = await openTcp(ic.host, ic.port, timeoutMs);
      detail = `TCP ${ic.host}:${ic.port}`;
    } else {
      stream = await openSerial({
        path: ic.path,
        baudRate: ic.baudRate,
        dataBits: ic.dataBits,
        parity: ic.parity,
        stopBits: ic.stopBits,
        rtscts: ic.rtscts,
        xonxoff: ic.xonxoff,
      });
      detail = `serial ${ic.path} at ${ic.baudRate} baud, ${ic.dataBits}${ic.parity[0].toUpperCase()}${ic.stopBits}${ic.rtscts ? ', RTS/CTS' : ''}${ic.xonxoff ? ', XON/XOFF' : ''}`;
    }
    const link: { writeTerminator?: keyof typeof TERMINATOR; readTerminator?: 'lf' | 'crlf' | 'cr'; commandDelayMs?: number } =
      ic.kind === 'simulator' ? {} : ic;
    const session = new ScpiSession(stream, {
      timeoutMs,
      terminator: link.writeTerminator ? TERMINATOR[link.writeTerminator] : dialect.terminator,
      readTerminator: link.readTerminator ?? dialect.readTerminator,
      commandDelayMs: link.commandDelayMs ?? dialect.commandDelayMs,
      errorQuery: dialect.commands.errorQuery,
      // An instrument-paced block comes back as one line of every reading.
      maxLine: dialect.paced ? Math.max(4096, dialect.paced.maxPoints * dialect.readFields.length * 24) : 4096,
    });
    return { driver: new SmuDriver(session, dialect), session, detail };
  }

  private describeInstrument(): string {
    const ic = this.config.instrument;
    return ic.kind === 'tcp' ? `TCP ${ic.host}:${ic.port}` : ic.kind === 'serial' ? `serial ${ic.path}` : 'simulator';
  }

  /**
   * Validates and starts a run; resolves once the session folder exists and the run is under way.
   * The instrument is claimed before the first await, so of two requests arriving together exactly
   * one starts a run and the other gets 409.
   */
  /**
   * Starts a run. `acknowledgeDestructive: false` refuses a breakdown test (voltage or current ramp,
   * constant-voltage stress: it destroys the device at high field) before anything reaches the
   * instrument; the API passes it from its request body, so a script must say it knows. Left out
   * (the CLI, where a person named the plan file), no acknowledgement is asked.
   */
  async startRun(options: { plan?: unknown; analysis?: unknown; label?: string; device?: unknown; acknowledgeDestructive?: boolean } = {}): Promise<RunHandle> {
    if (this.running) throw new StationError(`a run is in progress (session ${this.current?.session ?? '(starting)'}); stop or abort it first`);
    // A plan (file or request) may carry the device under test beside its sweep settings.
    const { device: planDevice, ...planRest } = (
      typeof options.plan === 'object' && options.plan !== null && !Array.isArray(options.plan) ? options.plan : {}
    ) as { device?: unknown };
    const plan = options.plan === undefined ? this.defaultPlan() : parsePlan(planDevice === undefined ? options.plan : planRest, 'plan');
    checkPlan(this.config.limits, plan);
    if (options.acknowledgeDestructive === false && isStressPlan(plan))
      throw new StationError(
        `body: field 'acknowledgeDestructive': this plan (${describePlan(plan)}) stresses the film until it breaks down, destroying the device, at high voltage; read the README's breakdown-test cautions, follow your lab's safety rules, and send "acknowledgeDestructive": true with the plan to start it`,
        400,
      );
    const device = this.parseDevice(planDevice, options.device);
    let analysis = options.analysis !== undefined ? this.parseAnalysis(options.analysis) : this.analysis;
    // The device's own area, thickness and temperature are the live fit's inputs for this run.
    const given = { area: device?.area, thickness: device?.thickness, temperature: device?.temperature };
    if (Object.values(given).some((v) => v !== undefined)) {
      analysis = { ...analysis, inputs: { ...analysis.inputs, ...Object.fromEntries(Object.entries(given).filter(([, v]) => v !== undefined)) } };
    }
    checkPlanSize(plan, this.dataDir);
    if (plan.kind === 'adaptive') {
      // A target the model does not give would sweep to the point budget: refused before the output goes on.
      const names = parameterNames(analysis.model, analysis.inputs);
      if (names && !names.includes(plan.target.parameter))
        throw new StationError(
          `plan: field 'target.parameter': '${plan.target.parameter}' is not a parameter of the ${analysis.model} fit (it gives ${names.join(', ')})`,
          400,
        );
    }
    let dialect: Dialect;
    try {
      dialect = loadDialect(dialectOf(this.config));
    } catch (e) {
      throw new StationError(`station config: ${(e as Error).message}`, 400);
    }
    if (plan.kind === 'current-ramp' && !dialect.commands.sourceCurrent) {
      throw new StationError(
        `plan: field 'kind': a current ramp forces current, and the dialect '${dialect.name}' has no current-sourcing commands (sourceCurrentMode, sourceCurrent, voltageCompliance)`,
        400,
      );
    }
    if ((plan.kind === 'linear' || plan.kind === 'log' || plan.kind === 'list') && plan.pacing === 'instrument') {
      if (!dialect.paced)
        throw new StationError(
          `plan: field 'pacing': the dialect '${dialect.name}' has no instrument-paced templates ("paced"); use pacing "station" or a dialect that has them (protection-status)`,
          400,
        );
      if (plan.blockPoints !== undefined && plan.blockPoints > dialect.paced.maxPoints)
        throw new StationError(
          `plan: field 'blockPoints': ${plan.blockPoints} is more than the ${dialect.paced.maxPoints} levels the dialect '${dialect.name}' says the instrument's list holds`,
          400,
        );
    }
    this.starting = true;
    let link: Awaited<ReturnType<Station['connect']>> | undefined;
    try {
      this.analysis = analysis;
      try {
        link = await this.connect(dialect, device);
      } catch (e) {
        throw new StationError(
          `cannot reach the instrument (${this.describeInstrument()}): ${(e as Error).message}; check the cable or address, and that nothing else holds the port`,
          502,
        );
      }
      const { driver, session, detail } = link;
      let idn: string;
      try {
        idn = await driver.identify();
      } catch (e) {
        throw new StationError(
          `the instrument did not answer '${dialect.commands.identify}' (${(e as Error).message}); check the connection and the dialect's terminators`,
          502,
        );
      }
      const label = options.label ?? this.scenario?.name ?? 'run';
      let created: ReturnType<Station['newSession']>;
      try {
        const shape = planShape(plan);
        // A breakdown test judges breakdown by its own criteria (and destroys the device on
        // purpose); the live breakdown and drift watches are for sweeps of devices meant to survive.
        const stress = isStressPlan(plan);
        created = this.newSession(label, {
          complianceLimit: planCompliance(plan),
          sweeps: shape.sweeps,
          pointsPerSweep: shape.pointsPerSweep,
          ...(stress ? { watches: false } : {}),
        });
      } catch (e) {
        const err = e as NodeJS.ErrnoException;
        throw new StationError(
          `cannot create the session folder under ${this.dataDir}: ${err.code === 'ENOSPC' ? 'no space left on the disk' : err.message}`,
          err.code === 'ENOSPC' ? 507 : 500,
        );
      }
      const { chain, id, dir } = created;
      chain.emit({
        type: 'session',
        id,
        startedAt: new Date(Date.now() - (performance.now() - chain.options.journal.t0)).toISOString(),
        source: { kind: this.config.instrument.kind, detail, control: true },
        instrument: idn,
        plan: { ...plan, description: describePlan(plan) },
        analysis: this.analysis,
        drift: this.config.drift,
        limits: this.config.limits,
        dialect: dialect.name,
        ...(device ? { device } : {}),
      });
      // A simulator that answers at once (--fast) also lets the ramps' waits pass on its own clock.
      const sim = this.config.instrument.kind === 'simulator' && !this.config.instrument.realTime ? this.sim : undefined;
      // The wait starts once the simulator has applied what was sent before it (commands travel
      // asynchronously): otherwise the time would be spent at the level before.
      const fastSettle = sim
        ? async (s: number) => {
            await driver.synchronize();
            sim.elapse(s);
          }
        : undefined;
      const source = new GuardedSource(driver, this.config.limits, fastSettle);
      const controller = new RunController(source, chain, plan, device, id);
      if (fastSettle) {
        // So do the run's own waits (a ramp's step time, a stress's sampling interval), and the
        // journal's clock follows the simulator's, so times and charges are the simulated ones.
        controller.settle = fastSettle;
        chain.options.journal.useInstrumentClock(() => (sim?.elapsedAtOnce ?? 0) * 1000);
      }
      // A journal that cannot be written stops the run at once (even between readings).
      chain.options.journal.onError = (err) => controller.abort(err.message, 'journal-fault');
      this.controller = controller;
      const done = controller
        .execute()
        .then((r) => {
          this.last = { session: id, outcome: r.outcome, reason: r.reason, outputOffConfirmed: r.outputOffConfirmed };
          return r;
        })
        .finally(() => {
          session.close();
          this.controller = undefined;
          this.chain = undefined;
        });
      return { session: id, dir, plan, done };
    } catch (e) {
      link?.session.close();
      throw e;
    } finally {
      this.starting = false;
    }
  }

  /** The device identity of a run request: the plan's, overridden field by field by the request's. */
  private parseDevice(fromPlan: unknown, fromRequest: unknown): DeviceIdentity | undefined {
    try {
      const a = fromPlan === undefined ? undefined : parseDeviceIdentity(fromPlan, 'plan.device');
      const b = fromRequest === undefined ? undefined : parseDeviceIdentity(fromRequest, 'device');
      const merged = { ...(a ?? {}), ...(b ?? {}) };
      return Object.keys(merged).length ? merged : undefined;
    } catch (e) {
      throw new StationError((e as Error).message, 400);
    }
  }

  parseAnalysis(raw: unknown): AnalysisSettings {
    const r = analysisSchema.safeParse(raw);
    if (!r.success) throw new StationError(zodMessage(r.error, 'analysis', raw, analysisSchema), 400);
    return r.data;
  }

  setAnalysis(raw: unknown, source: string): AnalysisSettings {
    const a = this.parseAnalysis(raw);
    if (this.chain) {
      try {
        this.chain.setAnalysis(a, source);
      } catch (e) {
        throw new StationError(`analysis: ${(e as Error).message}`, 400);
      }
    }
    this.analysis = a;
    return a;
  }

  stop(reason = 'stop requested'): void {
    if (this.passive) throw new StationError('this session watches a passive source: plumbline cannot stop the instrument; use its own controls');
    if (!this.controller) throw new StationError('no run in progress');
    this.controller.stop(reason);
  }

  abort(reason = 'abort requested'): void {
    if (this.passive) throw new StationError("this session watches a passive source: plumbline cannot turn that instrument's output off; use its own controls");
    if (!this.controller) throw new StationError('no run in progress');
    this.controller.abort(reason);
  }

  /** Output off now from any state (signal handlers, fatal errors). Resolves when the run has ended. */
  async emergencyStop(reason: string, outcome: 'interrupted' | 'internal-error' = 'interrupted'): Promise<void> {
    const c = this.controller;
    if (!c) return;
    c.abort(reason, outcome);
    await Promise.race([new Promise((r) => setTimeout(r, 2000)), this.waitIdle()]);
  }

  private waitIdle(): Promise<void> {
    return new Promise((resolve) => {
      const poll = () => (this.controller ? setTimeout(poll, 10) : resolve());
      poll();
    });
  }

  /** Annotates the running session, or any session folder by id. */
  annotate(a: { text: string; tags?: string[]; sweep?: number; session?: string; device?: unknown }, source: string): WireEvent {
    const target = a.session ?? this.current?.session ?? listSessions(this.dataDir)[0];
    if (!target) throw new StationError('no session to annotate yet', 404);
    const device = a.device === undefined ? undefined : this.parseDevice(undefined, a.device);
    const ev = {
      type: 'annotation' as const,
      text: a.text,
      tags: a.tags ?? [],
      ...(a.sweep !== undefined ? { sweep: a.sweep } : {}),
      source,
      ...(device ? { device } : {}),
    };
    if (this.chain && this.current?.session === target) {
      const now = this.chain.sweepNumber;
      if (a.sweep !== undefined && a.sweep > now) {
        throw new StationError(`sweep ${a.sweep}: the running session is at sweep ${now}; a note is for a sweep already started`, 400);
      }
      return this.chain.emit(ev);
    }
    if (!listSessions(this.dataDir).includes(target)) throw new StationError(`no session '${target}' under ${this.dataDir}`, 404);
    return annotateFolder(join(this.dataDir, target), ev);
  }

  snapshot(): Snapshot {
    return {
      station: { control: !this.passive, hazardVoltage: this.config.limits.hazardVoltage, limits: this.config.limits },
      running: this.running,
      session: this.current?.session ?? null,
      lastSeq: this.recent.lastSeq,
      events: this.recent.nonReadings(),
      readings: this.recent.readings(),
      views: [...this.views.values()],
    };
  }
}

/** A seed from the station's seed and a device's name: FNV-1a over the name's UTF-16 units, folded into it. */
function mixSeed(seed: number, name: string): number {
  let h = 0x811c9dc5 ^ (seed >>> 0);
  for (let k = 0; k < name.length; k++) h = Math.imul(h ^ name.charCodeAt(k), 0x01000193) >>> 0;
  return h >>> 0 || 1;
}

/** Appends an annotation to a session folder (after its run, or from another process). */
export function annotateFolder(
  dir: string,
  ev: { type: 'annotation'; text: string; tags: string[]; sweep?: number; source: string; device?: DeviceIdentity },
): WireEvent {
  const sweeps = new Set<number>();
  const scan = scanJournal(dir, (e) => void (e.type === 'sweep-start' && sweeps.add(e.sweep)));
  if (ev.sweep !== undefined && !sweeps.has(ev.sweep)) {
    const list = [...sweeps].sort((x, y) => x - y);
    const has = list.length === 0 ? 'has no sweeps' : list.length === list[list.length - 1] ? `has sweeps 1–${list.length}` : `has sweeps ${list.join(', ')}`;
    throw new StationError(`sweep ${ev.sweep}: the session in ${dir} ${has}; nothing was added`, 400);
  }
  const w = JournalWriter.append(dir, scan.lastSeq, scan.lastT, scan.startedAt);
  try {
    return w.event(ev);
  } finally {
    w.close();
  }
}
