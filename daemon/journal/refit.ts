/**
 * `plumbline refit`: every sweep of a session analysed again with another model, window or inputs,
 * from the journaled readings. The journal is never touched; results go to a new JSON file.
 * Each sweep's temperature is, in this order: the one given, a note on the sweep ("T = 350 K",
 * as `plumbline watch --temperature-column` writes them), the session's analysis inputs; the result
 * says which, and carries every fit's warnings.
 */
import { writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { analyze, resolveInputs, type FitRequest, WINDOW_FIELDS, type WindowNames, windowAcrossBranches } from '../analysis/analyze.js';
import { AnalysisError } from '../analysis/errors.js';
import { getMechanism } from '../analysis/mechanisms/index.js';
import { READING_COLUMNS } from '../analysis/mechanism.js';
import { temperatureFromText } from '../analysis/temperature-series.js';
import type { FitSummary } from '../../protocols/wire.js';
import { summarizeFit } from '../pipeline/chain.js';
import { loadSession } from './sessions.js';

/** Where an input of a refit came from. */
export type InputSource = 'given' | 'note' | 'session' | 'default';

export interface RefitSweep {
  readonly sweep: number;
  readonly complete: boolean | null;
  /** The temperature this sweep was fitted at, K, and where it came from. */
  readonly temperature: { readonly value: number; readonly source: InputSource };
  readonly fit: FitSummary | null;
  readonly error: string | null;
  readonly warnings: readonly string[];
}

export interface RefitResult {
  readonly session: string;
  readonly request: FitRequest;
  /** Every input the model uses, SI, with where it came from (the temperature may vary per sweep). */
  readonly inputs: Record<string, { value: number; source: InputSource }>;
  readonly sweeps: RefitSweep[];
  readonly file: string;
}

/**
 * Refits every sweep; `override` replaces fields of the session's own analysis settings. A window
 * given that reaches across zero bias is refused before any work (BAD_WINDOW), its ends called
 * as `windowNames` says (the command line passes its options' names).
 */
export function refitSession(
  dir: string,
  override: Partial<Pick<FitRequest, 'model' | 'window' | 'inputs'>>,
  out?: string,
  windowNames: WindowNames = WINDOW_FIELDS,
): RefitResult {
  const s = loadSession(dir);
  const base = (s.analysis ?? {}) as { model?: string; window?: FitRequest['window']; inputs?: FitRequest['inputs'] };
  const given = override.inputs ?? {};
  const request: FitRequest = {
    model: override.model ?? base.model ?? 'ohmic',
    window: override.window ?? (override.model !== undefined && override.model !== base.model ? 'auto' : (base.window ?? 'auto')),
    inputs: { ...(base.inputs ?? {}), ...given },
    complianceLimit: s.complianceLimit,
  };
  const mech = getMechanism(request.model); // an unknown model is refused before any work (UNKNOWN_MODEL)
  const across = windowAcrossBranches(mech, override.window, request.inputs?.flatBand ?? 0, windowNames);
  if (across) throw new AnalysisError('BAD_WINDOW', across, 'window');
  const sourceOf = (k: string): InputSource => (k in given ? 'given' : base.inputs && k in base.inputs ? 'session' : 'default');
  const sweeps: RefitSweep[] = s.sweeps.map((sw) => {
    let T: { value: number; source: InputSource } | undefined;
    if (given.temperature !== undefined) T = { value: given.temperature, source: 'given' };
    else {
      for (const a of sw.annotations) {
        const t = temperatureFromText(`${a.text} ${a.tags.join(' ')}`);
        if (t !== undefined) T = { value: t, source: 'note' };
      }
    }
    T ??=
      request.inputs?.temperature !== undefined ? { value: request.inputs.temperature, source: sourceOf('temperature') } : { value: 300, source: 'default' };
    try {
      const r = analyze(
        { x: sw.v, y: sw.i, compliance: sw.c, breakdown: sw.b },
        { ...request, columns: READING_COLUMNS, inputs: { ...request.inputs, temperature: T.value } },
      );
      return { sweep: sw.sweep, complete: sw.complete, temperature: T, fit: summarizeFit(r), error: null, warnings: r.warnings };
    } catch (e) {
      return { sweep: sw.sweep, complete: sw.complete, temperature: T, fit: null, error: (e as Error).message, warnings: [] };
    }
  });
  // The inputs the model uses, as resolved (defaults included), with their origin.
  const inputs: RefitResult['inputs'] = {};
  try {
    const resolved = resolveInputs(mech, request.inputs);
    for (const k of [...mech.requires, ...mech.uses]) {
      const v = (resolved as unknown as Record<string, number | undefined>)[k];
      if (v !== undefined) inputs[k] = { value: v, source: resolved.assumed.includes(k) ? 'default' : sourceOf(k) };
    }
  } catch {
    /* a missing required input: every sweep carries the error */
  }
  const stamp = new Date()
    .toISOString()
    .replace(/[-:]/g, '')
    .replace(/\.\d+Z$/, 'Z');
  const file = out ?? join(s.dir, `refit-${request.model}-${stamp}.json`);
  const result = { session: s.id, request, inputs, sweeps, file };
  writeFileSync(file, `${JSON.stringify(result, null, 2)}\n`);
  return result;
}
