/**
 * A station's state as one small message, rebuilt from its journal's events: what the lab page
 * shows and what a late subscriber gets (it is published retained).
 */
import type { FitSummary } from '../../protocols/wire.js';

export type StationState = 'running' | 'idle' | 'offline';

export interface StationStatus {
  readonly v: 1;
  readonly station: string;
  readonly name: string;
  readonly state: StationState;
  /** ISO 8601 time of this message. */
  readonly updated: string;
  /** The station's own page, when it serves one. */
  readonly page: string | null;
  /** The station's page needs its token for control (the lab page never has it). */
  readonly tokenRequired: boolean;
  readonly session: null | {
    readonly id: string;
    readonly startedAt: string | null;
    readonly source: { kind: string; detail: string; control: boolean } | null;
    readonly instrument: string | null;
    /** Device metadata from the session event, when the run carried any. */
    readonly device: unknown;
    readonly sweep: number;
    readonly sweeps: number;
    readonly point: number;
    readonly points: number;
    /** Seconds left (estimate), or null. */
    readonly eta: number | null;
    readonly readings: number;
    readonly outcome: string | null;
    readonly reason: string | null;
    readonly output: { on: boolean; confirmed: boolean } | null;
  };
  /** The latest fit (final of the last sweep, or live). */
  readonly fit: null | {
    sweep: number;
    final: boolean;
    model: string;
    title: string;
    parameters: FitSummary['parameters'];
    plausible: boolean;
    r2: number;
    warnings: readonly string[];
  };
  readonly drift: null | { sweep: number; parameter: string; state: string; statistic: number | null; lower: number | null; upper: number | null };
  /** The session's most recent cautions (newest last). */
  readonly cautions: readonly { kind: string; message: string; sweep?: number; seq: number }[];
  /** Recent sessions and how far the broker has acknowledged each (subscribers find gaps with it). */
  readonly sessions: readonly { id: string; acked: number; complete: boolean }[];
}

type Ev = Record<string, unknown> & { type: string; seq: number };

/** Builds the status from the events of the station's current session. */
export class StatusTracker {
  private session: { -readonly [K in keyof NonNullable<StationStatus['session']>]: NonNullable<StationStatus['session']>[K] } | null = null;
  private fit: StationStatus['fit'] = null;
  private drift: StationStatus['drift'] = null;
  private cautions: { kind: string; message: string; sweep?: number; seq: number }[] = [];
  /** Changed since the last message. */
  dirty = true;

  constructor(
    readonly station: string,
    readonly name: string,
    readonly page: string | null,
    readonly tokenRequired: boolean,
  ) {}

  get currentSession(): string | null {
    return this.session?.id ?? null;
  }

  /** Starts tracking a (new) session. */
  begin(id: string): void {
    this.session = {
      id,
      startedAt: null,
      source: null,
      instrument: null,
      device: null,
      sweep: 0,
      sweeps: 0,
      point: 0,
      points: 0,
      eta: null,
      readings: 0,
      outcome: null,
      reason: null,
      output: null,
    };
    this.fit = null;
    this.drift = null;
    this.cautions = [];
    this.dirty = true;
  }

  readings(n: number): void {
    if (this.session && n > 0) {
      this.session.readings += n;
      this.dirty = true;
    }
  }

  apply(e: Ev): void {
    const s = this.session;
    if (!s) return;
    this.dirty = true;
    switch (e.type) {
      case 'session':
        s.startedAt = (e.startedAt as string) ?? null;
        s.source = (e.source as NonNullable<StationStatus['session']>['source']) ?? null;
        s.instrument = (e.instrument as string) ?? null;
        s.device = e.device ?? null;
        {
          const plan = e.plan as { repeat?: number; points?: number } | null;
          if (plan && typeof plan.repeat === 'number') s.sweeps = plan.repeat;
        }
        break;
      case 'sweep-start':
        s.sweep = e.sweep as number;
        s.point = 0;
        if (typeof e.planned === 'number') s.points = e.planned;
        break;
      case 'progress':
        s.sweep = e.sweep as number;
        s.sweeps = e.sweeps as number;
        s.point = e.point as number;
        s.points = e.points as number;
        s.eta = (e.eta as number | null) ?? null;
        break;
      case 'fit': {
        const f = e.fit as FitSummary | null;
        if (f)
          this.fit = {
            sweep: e.sweep as number,
            final: e.final as boolean,
            model: f.model,
            title: f.title,
            parameters: f.parameters,
            plausible: f.plausible,
            r2: f.line.r2,
            warnings: f.warnings,
          };
        break;
      }
      case 'drift':
        this.drift = {
          sweep: e.sweep as number,
          parameter: e.parameter as string,
          state: e.state as string,
          statistic: e.statistic as number | null,
          lower: e.lower as number | null,
          upper: e.upper as number | null,
        };
        break;
      case 'caution':
        this.cautions.push({ kind: e.kind as string, message: e.message as string, ...(typeof e.sweep === 'number' ? { sweep: e.sweep } : {}), seq: e.seq });
        if (this.cautions.length > 8) this.cautions.shift();
        break;
      case 'output':
        s.output = { on: e.on as boolean, confirmed: e.confirmed as boolean };
        break;
      case 'run-end':
        s.outcome = e.outcome as string;
        s.reason = e.reason as string;
        s.eta = null;
        break;
      default:
        this.dirty = true;
    }
  }

  message(state: StationState, sessions: StationStatus['sessions']): StationStatus {
    this.dirty = false;
    const running = state !== 'offline' && this.session !== null && this.session.outcome === null && state === 'running';
    return {
      v: 1,
      station: this.station,
      name: this.name,
      state: state === 'offline' ? 'offline' : running ? 'running' : 'idle',
      updated: new Date().toISOString(),
      page: this.page,
      tokenRequired: this.tokenRequired,
      session: this.session ? { ...this.session } : null,
      fit: this.fit,
      drift: this.drift,
      cautions: [...this.cautions],
      sessions,
    };
  }
}
