/**
 * Reading a finished (or running) session back for offline work: its sweeps' readings, the
 * analysis settings in force, fits, drift, annotations, cautions and decisions, a breakdown test's
 * result and the device's identity — one pass over the journal. Used by refit, report and the temperature series.
 */
import { basename, resolve } from 'node:path';
import type { FitSummary, SolarSummary, WireEvent } from '../../protocols/wire.js';
import { mergeIdentity, type DeviceIdentity } from '../../protocols/device-results.js';
import { FLAG } from '../../protocols/wire.js';
import { scanJournal, type BadLine } from './reader.js';

export interface SweepData {
  readonly sweep: number;
  readonly v: number[];
  readonly i: number[];
  /** 1 where the reading was at compliance. */
  readonly c: number[];
  /** 1 at the reading that showed a confirmed breakdown. */
  readonly b: number[];
  /** When each reading was taken, ms since the session started (the journal's clock). */
  readonly t: number[];
  /** What the sweep is, as the run named it at its start ("use-condition check before the test"; '' for a plain sweep). */
  label: string;
  complete: boolean | null;
  fit: FitSummary | null;
  fitError: string | null;
  /** A solar cell's figures of merit and diode fit (analysis option `solar`). */
  solar: SolarSummary | null;
  /** The analysis settings in force when the sweep's final fit was made. */
  analysis: unknown;
  drift: Extract<WireEvent, { type: 'drift' }> | null;
  annotations: Extract<WireEvent, { type: 'annotation' }>[];
}

export interface SessionData {
  readonly id: string;
  readonly dir: string;
  readonly session: Extract<WireEvent, { type: 'session' }> | null;
  /** The analysis settings last in force (session start, then setting changes). */
  readonly analysis: unknown;
  readonly complianceLimit: number | undefined;
  readonly sweeps: SweepData[];
  readonly annotations: Extract<WireEvent, { type: 'annotation' }>[];
  /** Analysis settings changes after the start, in time order. */
  readonly timelineSettings: Extract<WireEvent, { type: 'settings' }>[];
  /** Cautions, decisions, output changes, recovery and run end, in time order. */
  readonly timeline: WireEvent[];
  readonly runEnd: Extract<WireEvent, { type: 'run-end' }> | null;
  /** A breakdown test's result (the last `test-result` event), or null. */
  readonly testResult: Extract<WireEvent, { type: 'test-result' }> | null;
  /** An adaptive plan's figures per sweep (`adaptive-sweep` events), in order; empty for other plans. */
  readonly adaptive: Extract<WireEvent, { type: 'adaptive-sweep' }>[];
  /** The device under test: the session's device metadata with later corrections in notes applied (later values win). */
  readonly device: DeviceIdentity | null;
  readonly badLines: BadLine[];
}

export function loadSession(dirIn: string): SessionData {
  const dir = resolve(dirIn);
  const sweeps = new Map<number, SweepData>();
  const sweep = (n: number) => {
    let s = sweeps.get(n);
    if (!s) {
      s = {
        sweep: n,
        v: [],
        i: [],
        c: [],
        b: [],
        t: [],
        label: '',
        complete: null,
        fit: null,
        fitError: null,
        solar: null,
        analysis,
        drift: null,
        annotations: [],
      };
      sweeps.set(n, s);
    }
    return s;
  };
  let session: SessionData['session'] = null;
  let analysis: unknown = null;
  let complianceLimit: number | undefined;
  const annotations: SessionData['annotations'] = [];
  const timeline: WireEvent[] = [];
  const timelineSettings: SessionData['timelineSettings'] = [];
  let runEnd: SessionData['runEnd'] = null;
  let testResult: SessionData['testResult'] = null;
  const adaptive: SessionData['adaptive'] = [];
  let device: DeviceIdentity | null = null;
  const scan = scanJournal(dir, (e) => {
    switch (e.type) {
      case 'reading': {
        const s = sweep(e.sweep);
        s.v.push(e.v);
        s.i.push(e.i);
        s.c.push(e.flags & FLAG.compliance ? 1 : 0);
        s.b.push(e.flags & FLAG.breakdown ? 1 : 0);
        s.t.push(e.t);
        break;
      }
      case 'session':
        session = e;
        analysis = e.analysis;
        complianceLimit = (e.plan as { compliance?: number } | null)?.compliance;
        device = (e.device as DeviceIdentity | undefined) ?? null;
        break;
      case 'settings':
        analysis = e.analysis;
        timelineSettings.push(e);
        break;
      case 'sweep-start':
        sweep(e.sweep).label = e.label;
        break;
      case 'sweep-end':
        sweep(e.sweep).complete = e.complete;
        break;
      case 'fit':
        if (e.final) {
          sweep(e.sweep).fit = e.fit;
          sweep(e.sweep).fitError = e.error ?? null;
          sweep(e.sweep).solar = e.solar ?? null;
          sweep(e.sweep).analysis = analysis;
        }
        break;
      case 'drift':
        sweep(e.sweep).drift = e;
        break;
      case 'annotation':
        annotations.push(e);
        if (e.device) device = mergeIdentity(device ?? {}, e.device);
        if (e.sweep !== undefined) sweep(e.sweep).annotations.push(e);
        break;
      case 'test-result':
        testResult = e;
        break;
      case 'adaptive-sweep':
        adaptive.push(e);
        break;
      case 'run-end':
        runEnd = e;
        timeline.push(e);
        break;
      case 'caution':
      case 'decision':
      case 'output':
      case 'recovery':
        timeline.push(e);
        break;
      default:
        break;
    }
  });
  return {
    id: basename(dir),
    dir,
    session,
    analysis,
    complianceLimit,
    sweeps: [...sweeps.values()].sort((a, b) => a.sweep - b.sweep),
    annotations,
    timeline,
    timelineSettings,
    runEnd,
    testResult,
    adaptive,
    device,
    badLines: scan.bad,
  };
}
