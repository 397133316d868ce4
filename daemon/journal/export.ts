/**
 * `plumbline export`: a session journal to plain files any spreadsheet or pandas reads without our
 * code. points.csv streams (bounded memory); sweeps.csv and session.json are small.
 */
import { closeSync, copyFileSync, existsSync, mkdirSync, openSync, writeFileSync, writeSync } from 'node:fs';
import { basename, join, resolve } from 'node:path';
import { FLAG, type FitSummary, type WireEvent } from '../../protocols/wire.js';
import { DEVICE_RESULTS_FILE, mergeIdentity, type DeviceIdentity } from '../../protocols/device-results.js';
import { noRunEndNote, scanJournal, type BadLine } from './reader.js';
import { requireSessionFolder } from './journal.js';

export const POINTS_HEADER = ['session', 'sweep', 'point', 'seq', 't_ms', 'voltage_V', 'current_A', 'compliance', 'overflow', 'voltage_overflow', 'breakdown'];

/**
 * A unit as a column-name tag that reads as the unit and survives any CSV reader or data-frame
 * attribute: m^2/(V*s) → m2_per_V_s, A/(m^2*K^2) → A_per_m2_K2, m^-3 → per_m3, eV → eV; no tag for
 * a dimensionless value ('' or '1'). Units nested deeper than one quotient fall back to a plain
 * rewrite (/ → _per_, * → _, ^ and brackets dropped).
 */
export function csvUnitTag(unit: string): string {
  const u = unit.replace(/\s+/g, '');
  if (u === '' || u === '1') return '';
  const factor = (f: string): { name: string; power: number } | null => {
    const m = /^([A-Za-z]+)(?:\^(-?\d+))?$/.exec(f);
    return m ? { name: m[1], power: m[2] === undefined ? 1 : Number(m[2]) } : null;
  };
  const pieces = u.split('/');
  const num: string[] = [];
  const den: string[] = [];
  let simple = true;
  pieces.forEach((piece, k) => {
    const inner = /^\((.*)\)$/.exec(piece)?.[1] ?? piece;
    if (/[()]/.test(inner)) simple = false;
    for (const f of inner.split(/[*·]/)) {
      const q = factor(f);
      if (!q) {
        simple = false;
        continue;
      }
      const up = (k === 0) === q.power > 0;
      const tag = `${q.name}${Math.abs(q.power) === 1 ? '' : Math.abs(q.power)}`;
      (up ? num : den).push(tag);
    }
  });
  if (!simple)
    return u
      .replace(/\//g, '_per_')
      .replace(/[*·]/g, '_')
      .replace(/[\^()]/g, '')
      .replace(/-/g, 'neg');
  return [num.join('_'), den.length ? `per_${den.join('_')}` : ''].filter(Boolean).join('_');
}

/** The units of a fitted line's slope, intercept and residuals from the axes of its plot (ln y on a log axis). */
export function lineUnits(axes: FitSummary['axes']): { slope: string; intercept: string; residual: string } {
  const x = axes.x.kind === 'log' ? '' : axes.x.unit;
  const xs = /[/*·]/.test(x) ? `(${x})` : x;
  const per = (top: string) => (x ? `${top || '1'}/${xs}` : top);
  if (axes.y.kind === 'log') return { slope: per(''), intercept: axes.y.unit ? `ln(${axes.y.unit})` : '', residual: '' };
  return { slope: per(axes.y.unit), intercept: axes.y.unit, residual: axes.y.unit };
}

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
  /** Set when the journal has no run end (still being written, or cut by a crash): what to say about it. */
  readonly unfinished: string | null;
}

export function exportSession(sessionDir: string, outDir = join(sessionDir, 'export')): ExportResult {
  const dir = resolve(sessionDir);
  const session = basename(dir);
  requireSessionFolder(dir); // before the export folder is made: a mistyped path leaves nothing behind
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
  let ended = false;
  let scan: ReturnType<typeof scanJournal>;
  try {
    scan = scanJournal(dir, (e) => {
      switch (e.type) {
        case 'reading': {
          readings++;
          const r = row(e.sweep);
          r.readings++;
          if (e.flags & FLAG.compliance) r.complianceReadings++;
          pending.push(
            `${qs},${e.sweep},${e.k},${e.seq},${e.t},${csvField(e.v)},${csvField(e.i)},${e.flags & FLAG.compliance ? 1 : 0},${e.flags & FLAG.overflow ? 1 : 0},${e.flags & FLAG.voltageOverflow ? 1 : 0},${e.flags & FLAG.breakdown ? 1 : 0}\n`,
          );
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
          timeline.push(e);
          break;
        case 'run-end':
          ended = true;
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
  const paramHeader = (k: string, u: string) => `${k}${csvUnitTag(u) ? `_${csvUnitTag(u)}` : ''}`;
  const header = [
    'session',
    'sweep',
    'readings',
    'compliance_readings',
    'complete',
    'note',
    'model',
    'window_from_V',
    'window_to_V',
    'fit_points',
    'slope',
    'slope_se',
    'intercept',
    'intercept_se',
    'r2',
    'residual_sd',
    'slope_unit',
    'intercept_unit',
    'plausible',
    'fit_error',
    ...[...paramCols].flatMap(([k, u]) => [paramHeader(k, u), `${k}_se`]),
    'drift_parameter',
    'drift_method',
    'drift_statistic',
    'drift_lower',
    'drift_upper',
    'drift_state',
    'annotations',
  ];
  const lines = [header.join(',')];
  for (const r of rows) {
    const f = r.fit;
    const d = r.drift;
    lines.push(
      [
        session,
        r.sweep,
        r.readings,
        r.complianceReadings,
        r.complete,
        r.note,
        f?.model,
        f?.window.from,
        f?.window.to,
        f?.line.n,
        f?.line.slope,
        f?.line.slopeStdErr,
        f?.line.intercept,
        f?.line.interceptStdErr,
        f?.line.r2,
        f?.line.residualStdDev,
        f ? lineUnits(f.axes).slope : undefined,
        f ? lineUnits(f.axes).intercept : undefined,
        f?.plausible,
        r.fitError,
        ...[...paramCols.keys()].flatMap((k) => [f?.parameters[k]?.value, f?.parameters[k]?.stdErr]),
        d?.parameter,
        d?.method,
        d?.statistic,
        d?.lower,
        d?.upper,
        d?.state,
        r.annotations.join(' | '),
      ]
        .map(csvField)
        .join(','),
    );
  }
  writeFileSync(join(outDir, 'sweeps.csv'), `${lines.join('\n')}\n`);
  meta.readings = readings;
  meta.sweeps = rows.length;
  meta.parameterUnits = Object.fromEntries(paramCols);
  // Every column's unit (SI; '' for a dimensionless number, null for text and codes), so no unit has
  // to be guessed from a column name. Line figures take their units from each row's own plot.
  const models = new Set(rows.map((r) => r.fit?.model).filter((m): m is string => m !== undefined));
  const oneLine = models.size === 1 ? rows.find((r) => r.fit)?.fit : undefined;
  const lu = oneLine ? lineUnits(oneLine.axes) : undefined;
  const perRow = (col: string) => `per row, in ${col}`;
  const driftParams = new Set(rows.map((r) => r.drift?.parameter).filter((p): p is string => p !== undefined));
  const driftUnit = driftParams.size === 1 ? (paramCols.get([...driftParams][0]) ?? null) : 'the unit of drift_parameter (parameterUnits)';
  meta.columns = {
    'points.csv': {
      session: null,
      sweep: '',
      point: '',
      seq: '',
      t_ms: 'ms',
      voltage_V: 'V',
      current_A: 'A',
      compliance: null,
      overflow: null,
      voltage_overflow: null,
      breakdown: null,
    },
    'sweeps.csv': {
      session: null,
      sweep: '',
      readings: '',
      compliance_readings: '',
      complete: null,
      note: null,
      model: null,
      window_from_V: 'V',
      window_to_V: 'V',
      fit_points: '',
      slope: lu?.slope ?? perRow('slope_unit'),
      slope_se: lu?.slope ?? perRow('slope_unit'),
      intercept: lu?.intercept ?? perRow('intercept_unit'),
      intercept_se: lu?.intercept ?? perRow('intercept_unit'),
      r2: '',
      residual_sd: lu?.residual ?? "the y axis of the row's plot (ln units when it is logarithmic)",
      slope_unit: null,
      intercept_unit: null,
      plausible: null,
      fit_error: null,
      ...Object.fromEntries(
        [...paramCols].flatMap(([k, u]) => [
          [paramHeader(k, u), u === '1' ? '' : u],
          [`${k}_se`, u === '1' ? '' : u],
        ]),
      ),
      drift_parameter: null,
      drift_method: null,
      drift_statistic: driftUnit,
      drift_lower: driftUnit,
      drift_upper: driftUnit,
      drift_state: null,
      annotations: null,
    },
  };
  meta.annotations = annotations;
  meta.settingChanges = settings;
  meta.timeline = timeline;
  meta.damagedLines = scan.bad;
  meta.tornTail = scan.tornTail;
  meta.tornReadingBytes = scan.tornReadingBytes;
  meta.device = device;
  const unfinished = ended ? null : noRunEndNote(dir);
  meta.unfinished = unfinished;
  writeFileSync(join(outDir, 'session.json'), `${JSON.stringify(meta, null, 2)}\n`);
  const files = ['points.csv', 'sweeps.csv', 'session.json'];
  // Breakdown tests' per-device results travel with the export unchanged (already plain CSV).
  if (existsSync(join(dir, DEVICE_RESULTS_FILE))) {
    copyFileSync(join(dir, DEVICE_RESULTS_FILE), join(outDir, DEVICE_RESULTS_FILE));
    files.push(DEVICE_RESULTS_FILE);
  }
  return { outDir, files: files.map((f) => join(outDir, f)), readings, sweeps: rows.length, badLines: scan.bad, unfinished };
}
