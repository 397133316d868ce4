/**
 * `plumbline refit`: every sweep of a session analysed again with another model, window or inputs,
 * from the journaled readings. The journal is never touched; results go to a new JSON file.
 */
import { writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { analyze, type FitRequest } from '../analysis/analyze.js';
import { getMechanism } from '../analysis/mechanisms/index.js';
import type { FitSummary } from '../../protocols/wire.js';
import { summarizeFit } from '../pipeline/chain.js';
import { loadSession } from './sessions.js';

export interface RefitResult {
  readonly session: string;
  readonly request: FitRequest;
  readonly sweeps: { sweep: number; complete: boolean | null; fit: FitSummary | null; error: string | null }[];
  readonly file: string;
}

/** Refits every sweep; `override` replaces fields of the session's own analysis settings. */
export function refitSession(dir: string, override: Partial<Pick<FitRequest, 'model' | 'window' | 'inputs'>>, out?: string): RefitResult {
  const s = loadSession(dir);
  const base = (s.analysis ?? {}) as { model?: string; window?: FitRequest['window']; inputs?: FitRequest['inputs'] };
  const request: FitRequest = {
    model: override.model ?? base.model ?? 'ohmic',
    window: override.window ?? (override.model !== undefined && override.model !== base.model ? 'auto' : base.window ?? 'auto'),
    inputs: { ...(base.inputs ?? {}), ...(override.inputs ?? {}) },
    complianceLimit: s.complianceLimit,
  };
  getMechanism(request.model); // an unknown model is refused before any work (UNKNOWN_MODEL)
  const sweeps = s.sweeps.map((sw) => {
    try {
      const r = analyze({ x: sw.v, y: sw.i, compliance: sw.c }, request);
      return { sweep: sw.sweep, complete: sw.complete, fit: summarizeFit(r), error: null };
    } catch (e) {
      return { sweep: sw.sweep, complete: sw.complete, fit: null, error: (e as Error).message };
    }
  });
  const stamp = new Date().toISOString().replace(/[-:]/g, '').replace(/\.\d+Z$/, 'Z');
  const file = out ?? join(s.dir, `refit-${request.model}-${stamp}.json`);
  const result = { session: s.id, request, sweeps, file };
  writeFileSync(file, `${JSON.stringify(result, null, 2)}\n`);
  return result;
}
