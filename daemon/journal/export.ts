/**
 * `plumbline export`: a session journal to plain files any spreadsheet or pandas reads without our
 * code. points.csv streams (bounded memory); sweeps.csv and session.json are small.
 */
import { closeSync, copyFileSync, existsSync, mkdirSync, openSync, writeFileSync, writeSync } from 'node:fs';
import { basename, join, resolve } from 'node:path';
import { FLAG, type FitSummary, type WireEvent } from '../../protocols/wire.js';
import { DEVICE_RESULTS_FILE, mergeIdentity, type DeviceIdentity } from '../../protocols/device-results.js';
import { scanJournal, type BadLine } from './reader.js';

export const POINTS_HEADER = ['session', 'sweep', 'point', 'seq', 't_ms', 'voltage_V', 'current_A', 'compliance', 'overflow', 'voltage_overflow', 'breakdown'];

function csvField(v: unknown): string {
  if (v === null || v === undefined) return '';
  if (typeof v === 'number') return Number.isFinite(v) ? String(v) : '';
  if (typeof v === 'boolean') return v ? '1' : '0';
  const s = String(v);
  return /[",\n\r]/.test(s) ? `"${s.replace(/"/g, '""')}"` : s;
}

interface SweepRow {
  sweep: number;
  readings: number;
  complianceReadings: number;
  complete: boolean | null;
  note: string;
  fit: FitSummary | null;
  fitError: string;
  drift: Extract<WireEvent, { type: 'drift' }> | null;
  annotations: string[];
}

export interface ExportResult {
  readonly outDir: string;
  readonly files: string[];
  readonly readings: number;
  readonly sweeps: number;
  readonly badLines: BadLine[];
}

export function exportSession(sessionDir: string, outDir = join(sessionDir, 'export')): ExportResult {
  const dir = resolve(sessionDir);
  const session = basename(dir);
  mkdirSync(outDir, { recursive: true });
  const pointsFile = join(outDir, 'points.csv');
  const fd = openSync(pointsFile, 'w');
  let pending: string[] = [];
  const flush = () => {
    if (pending.length) writeSync(fd, pending.join(''));
    pending = [];
  };
  pending.push(`${POINTS_HEADER.join(',')}\n`);
  const sweeps = new Map<number, SweepRow>();
  const row = (n: number): SweepRow => {
    let r = sweeps.get(n);
    if (!r) {
      r = { sweep: n, readings: 0, complianceReadings: 0, complete: null, note: '', fit: null, fitError: '', drift: null, annotations: [] };
      sweeps.set(n, r);
    }
    return r;
  };
  const meta: Record<string, unknown> = { session, format: 'plumbline session export 1' };
  const timeline: WireEvent[] = [];
  const annotations: WireEvent[] = [];
  const settings: WireEvent[] = [];
  let readings = 0;
  // The device identity as it stands: the session's, with later corrections (annotations) applied.
  let device: DeviceIdentity = {};
  const qs = csvField(session);
  let scan: ReturnType<typeof scanJournal>;
  try {
    scan = scanJournal(dir, (e) => {
      switch (e.type) {
        case 'reading': {
          readings++;
          const r = row(e.sweep);
          r.readings++;
          if (e.flags & FLAG.compliance) r.complianceReadings++;
          pending.push(`${qs},${e.sweep},${e.k},${e.seq},${e.t},${csvField(e.v)},${csvField(e.i)},${e.flags & FLAG.compliance ? 1 : 0},${e.flags & FLAG.overflow ? 1 : 0},${e.flags & FLAG.voltageOverflow ? 1 : 0},${e.flags & FLAG.breakdown ? 1 : 0}\n`);
          if (pending.length >= 4096) flush();
          break;
        }
        case 'session':
          meta.sessionEvent = e;
          device = mergeIdentity(device, e.device);
          break;
        case 'sweep-start':
          row(e.sweep);
          break;
        case 'sweep-end': {
          const r = row(e.sweep);
          r.complete = e.complete;
          r.note = e.note ?? '';
          break;
        }
        case 'fit':
          if (e.final) {
            row(e.sweep).fit = e.fit;
            row(e.sweep).fitError = e.error ?? '';
          }
          break;
        case 'drift':
          row(e.sweep).drift = e;
          break;
        case 'annotation':
          annotations.push(e);
          device = mergeIdentity(device, e.device);
          if (e.sweep !== undefined) row(e.sweep).annotations.push(e.text);
          break;
        case 'settings':
          settings.push(e);
          break;
        case 'caution':
        case 'decision':
        case 'output':
        case 'recovery':
        case 'run-end':
          timeline.push(e);
          break;
        default:
          break;
      }
    });
  } finally {
    flush();
    closeSync(fd);
  }

  // sweeps.csv: fixed columns, then one value/stdErr pair per parameter seen in any sweep.
  const rows = [...sweeps.values()].sort((a, b) => a.sweep - b.sweep);
  const paramCols = new Map<string, string>();
  for (const r of rows) for (const [k, p] of Object.entries(r.fit?.parameters ?? {})) if (!paramCols.has(k)) paramCols.set(k, p.unit);
  const unitTag = (u: string) => u.replace(/[^A-Za-z0-9]+/g, '');
  const header = [
    'session', 'sweep', 'readings', 'compliance_readings', 'complete', 'note', 'model', 'window_from', 'window_to', 'fit_points',
    'slope', 'slope_se', 'intercept', 'intercept_se', 'r2', 'residual_sd', 'plausible', 'fit_error',
    ...[...paramCols].flatMap(([k, u]) => [`${k}${u ? `_${unitTag(u)}` : ''}`, `${k}_se`]),
    'drift_parameter', 'drift_method', 'drift_statistic', 'drift_lower', 'drift_upper', 'drift_state', 'annotations',
  ];
  const lines = [header.join(',')];
  for (const r of rows) {
    const f = r.fit;
    const d = r.drift;
    lines.push([
      session, r.sweep, r.readings, r.complianceReadings, r.complete, r.note, f?.model, f?.window.from, f?.window.to, f?.line.n,
      f?.line.slope, f?.line.slopeStdErr, f?.line.intercept, f?.line.interceptStdErr, f?.line.r2, f?.line.residualStdDev, f?.plausible, r.fitError,
      ...[...paramCols.keys()].flatMap((k) => [f?.parameters[k]?.value, f?.parameters[k]?.stdErr]),
      d?.parameter, d?.method, d?.statistic, d?.lower, d?.upper, d?.state, r.annotations.join(' | '),
    ].map(csvField).join(','));
  }
  writeFileSync(join(outDir, 'sweeps.csv'), `${lines.join('\n')}\n`);
  meta.readings = readings;
  meta.sweeps = rows.length;
  meta.parameterUnits = Object.fromEntries(paramCols);
  meta.annotations = annotations;
  meta.settingChanges = settings;
  meta.timeline = timeline;
  meta.damagedLines = scan.bad;
  meta.tornTail = scan.tornTail;
  meta.tornReadingBytes = scan.tornReadingBytes;
  meta.device = device;
  writeFileSync(join(outDir, 'session.json'), `${JSON.stringify(meta, null, 2)}\n`);
  const files = ['points.csv', 'sweeps.csv', 'session.json'];
  // Breakdown tests' per-device results travel with the export unchanged (already plain CSV).
  if (existsSync(join(dir, DEVICE_RESULTS_FILE))) {
    copyFileSync(join(dir, DEVICE_RESULTS_FILE), join(outDir, DEVICE_RESULTS_FILE));
    files.push(DEVICE_RESULTS_FILE);
  }
  return { outDir, files: files.map((f) => join(outDir, f)), readings, sweeps: rows.length, badLines: scan.bad };
}
