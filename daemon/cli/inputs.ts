/**
 * Command-line options shared by the analysis commands (fit, rank, later refit): physical inputs
 * with units, window, accuracy model, compliance limit, and the CSV columns to read.
 */
import { existsSync, readFileSync } from 'node:fs';
import { createRequire } from 'node:module';
import { dirname, join, resolve } from 'node:path';
import type { Command } from 'commander';
import type { AccuracySpec } from '../analysis/accuracy.js';
import { INPUT_RANGE, type IVData, type WindowNames, type WindowRequest, windowAcrossBranches } from '../analysis/analyze.js';
import { fmt, type Inputs } from '../analysis/mechanism.js';
import { getMechanism, MODEL_IDS } from '../analysis/mechanisms/index.js';
import { columnIdentifiers, setExpressionEngine } from '../analysis/mechanisms/custom.js';
import { readCsvTable } from '../../protocols/csv-file.js';
import { chooseColumns, type ColumnOptions, columnScale } from '../../protocols/csv-columns.js';
import { CsvError, notNumberText, requireNumeric, type CsvTable } from '../../protocols/csv-table.js';
import { parseQuantity, QuantityError } from '../quantity.js';
import { UsageError } from './usage.js';

export interface AnalysisOptions {
  x?: string;
  y?: string;
  from?: string;
  to?: string;
  auto?: boolean;
  all?: boolean;
  sweep?: string;
  allSweeps?: boolean;
  thickness?: string;
  area?: string;
  temperature?: string;
  massRatio?: string;
  permittivity?: string;
  refractiveIndex?: string;
  flatBand?: string;
  richardson?: string;
  accuracy?: string;
  compliance?: string;
  json?: boolean;
}

/** Adds the shared options to a command. */
export function withAnalysisOptions(cmd: Command): Command {
  return cmd
    .option(
      '--x <col>',
      'x column, by header name or 1-based position (default: a column named voltage, bias or V, with or without a unit such as _V or (mV), else the first); a unit in the header is converted to V',
    )
    .option(
      '--y <col>',
      'y column (default: a column named current or I, with or without a unit such as _A or (mA), else the next one); a unit in the header is converted to A',
    )
    .option('--from <x>', "fit window start, in the x column's own values")
    .option('--to <x>', "fit window end, in the x column's own values")
    .option('--auto', 'choose the fit window automatically (the default for mechanisms of the current)')
    .option('--all', 'fit every usable point (above the noise floor, below compliance, one branch)')
    .option('--sweep <n>', 'a file with a sweep column (an exported points.csv): analyse sweep n')
    .option('--all-sweeps', 'a file with a sweep column: pool every sweep into one analysis (say so explicitly)')
    .option('--thickness <q>', 'film thickness, e.g. "8 nm" (bare number: metres)')
    .option('--area <q>', 'device area, e.g. "1e-4 cm^2" (bare number: m^2)')
    .option('--temperature <q>', 'temperature, e.g. "300 K" or "25 degC" (default 300 K)')
    .option('--mass-ratio <r>', 'tunnelling effective-mass ratio m*/m0 (default 0.5)')
    .option('--permittivity <r>', 'relative permittivity (static), for SCLC mobility')
    .option('--refractive-index <r>', 'refractive index n; the dynamic permittivity is checked against n^2')
    .option('--flat-band <q>', 'flat-band / offset voltage subtracted from the bias, e.g. "-0.9 V"')
    .option('--richardson <q>', 'Richardson constant, e.g. "120 A/(cm^2 K^2)" (default: free-electron value)')
    .option('--accuracy <spec>', 'instrument accuracy "GAIN,OFFSET", e.g. "0.1%,1e-12 A": weights the fit')
    .option('--compliance <q>', 'current compliance limit; readings at >= 99 % of it are excluded, e.g. "1 mA"')
    .option('--json', 'print exactly one JSON object');
}

/** A value written without a unit. */
const BARE = /^\s*[-+]?(\d+\.?\d*|\.\d+)(e[-+]?\d+)?\s*$/i;

/**
 * A bare number is read in SI, so "--thickness 7" is 7 m: refused, with the unit it most likely
 * meant, when the value is beyond where such samples lie (the fit's own input ranges, INPUT_RANGE).
 */
export function bareCheck(text: string | undefined, value: number | undefined, name: string, input: 'thickness' | 'area', guess: string): void {
  const r = INPUT_RANGE[input];
  if (text === undefined || value === undefined || !BARE.test(text) || value <= r.hi) return;
  const t = text.trim();
  throw new QuantityError(
    name,
    `${name} '${t}': a bare number is read in ${r.si} (${t} ${r.symbol}), far beyond any sample measured this way; did you mean "${t} ${guess}"? Write the unit, e.g. ${name} "${t} ${guess}"`,
  );
}

export function readInputs(o: AnalysisOptions): Inputs {
  const q = (v: string | undefined, kind: Parameters<typeof parseQuantity>[1], name: string) => (v === undefined ? undefined : parseQuantity(v, kind, name));
  const thickness = q(o.thickness, 'length', '--thickness');
  const area = q(o.area, 'area', '--area');
  bareCheck(o.thickness, thickness, '--thickness', 'thickness', 'nm');
  bareCheck(o.area, area, '--area', 'area', 'um^2');
  return {
    thickness,
    area,
    temperature: q(o.temperature, 'temperature', '--temperature'),
    massRatio: q(o.massRatio, 'number', '--mass-ratio'),
    permittivity: q(o.permittivity, 'number', '--permittivity'),
    refractiveIndex: q(o.refractiveIndex, 'number', '--refractive-index'),
    flatBand: q(o.flatBand, 'voltage', '--flat-band'),
    richardson: q(o.richardson, 'richardson', '--richardson'),
  };
}

export function readWindow(o: AnalysisOptions, xIsTemperature = false): WindowRequest | undefined {
  const manual = o.from !== undefined || o.to !== undefined;
  const chosen = [o.auto ? '--auto' : '', o.all ? '--all' : '', manual ? '--from/--to' : ''].filter(Boolean);
  if (chosen.length > 1) {
    throw new QuantityError(chosen[0], `${chosen.join(' and ')}: give one way of choosing the window (--auto, --all, or --from/--to)`);
  }
  if (o.auto) return 'auto';
  if (o.all) return 'all';
  if (!manual) return undefined;
  const kind = xIsTemperature ? 'temperature' : 'voltage';
  return {
    from: o.from === undefined ? undefined : parseQuantity(o.from, kind, '--from'),
    to: o.to === undefined ? undefined : parseQuantity(o.to, kind, '--to'),
  };
}

/** The command line's names for a window's ends. */
export const WINDOW_OPTIONS: WindowNames = { from: '--from', to: '--to', write: (from, to) => `--from ${fmt(from)} --to ${fmt(to)}` };

/**
 * Refuses (exit 2) a --from/--to window that reaches across zero bias for a mechanism read on one
 * polarity (windowAcrossBranches, the rule the settings and the fit apply too); `model` undefined:
 * every ranked mechanism. Models the analysis does not know (the diode-curve fits) and the custom model (its x is any expression) are not checked.
 */
export function checkWindowSide(model: string | undefined, window: WindowRequest | undefined, flatBand: number | undefined): void {
  if (model !== undefined && (!MODEL_IDS.includes(model) || model === 'custom')) return;
  const across = windowAcrossBranches(model === undefined ? undefined : getMechanism(model), window, flatBand ?? 0, WINDOW_OPTIONS);
  if (across) throw new UsageError(across);
}

export function readAccuracy(o: AnalysisOptions): AccuracySpec | undefined {
  if (o.accuracy === undefined) return undefined;
  const parts = o.accuracy.split(',');
  if (parts.length !== 2) throw new QuantityError('--accuracy', `--accuracy '${o.accuracy}': expected "GAIN,OFFSET", e.g. "0.1%,1e-12 A"`);
  const g = parts[0].trim();
  const gain = g.endsWith('%') ? parseQuantity(g.slice(0, -1), 'number', '--accuracy gain') / 100 : parseQuantity(g, 'number', '--accuracy gain');
  const offset = parseQuantity(parts[1], 'current', '--accuracy offset');
  if (!(gain >= 0) || !(offset >= 0) || gain + offset === 0) {
    throw new QuantityError('--accuracy', `--accuracy '${o.accuracy}': gain and offset must be non-negative and not both zero`);
  }
  return { gain, offset };
}

export function readCompliance(o: AnalysisOptions): number | undefined {
  return o.compliance === undefined ? undefined : parseQuantity(o.compliance, 'current', '--compliance');
}

/** The options that name fit's columns, for messages. */
const FIT_COLUMNS: ColumnOptions = { bias: '--x', current: '--y', pair: 'x and y' };

/**
 * Loads the CSV and picks x, y and an optional compliance column. A file with a `sweep` column
 * holding more than one sweep (an exported points.csv) must say which one (--sweep N) or that they
 * are to be pooled (--all-sweeps): pooling is never silent. `notes` says what was chosen.
 */
export function loadData(file: string, o: AnalysisOptions): { table: CsvTable; data: IVData; notes: string[]; firstSeq?: number } {
  // Read as bytes: numbers are scanned in place, no string of the whole file is made.
  const table = readCsvTable(file);
  // Without --x/--y: the columns named as a bias and a current (chooseColumns), else the first two.
  const chosen = chooseColumns(table.headers, { bias: o.x, current: o.y }, FIT_COLUMNS, file);
  const xi = chosen.bias;
  const yi = chosen.current;
  const ci = chosen.compliance;
  const si = table.headers.findIndex((h) => /^sweep$/i.test(h));
  // Only the columns in use must be numbers (an exported points.csv carries a text session column).
  for (const [k, option] of [
    [xi, o.x === undefined ? '--x' : ''],
    [yi, o.y === undefined ? '--y' : ''],
  ] as const) {
    const t = table.firstText[k];
    // A column chosen by default whose first value is text is the wrong column: say which there are.
    // A bad cell further down is just a bad cell (requireNumeric below names it).
    if (t && option && t.line === table.lines[0]) {
      // A decimal comma or a units row is not the wrong column: say what it is.
      const why = notNumberText(table, t.text, t.line);
      if (why !== `'${t.text}' is not a number`) throw new CsvError(file, t.line, table.headers[k], why);
      throw new CsvError(
        file,
        t.line,
        table.headers[k],
        `'${t.text}' is not a number: name the columns to use with --x and --y (columns: ${table.headers.join(', ')})`,
      );
    }
  }
  for (const k of [xi, yi, ...(ci >= 0 ? [ci] : []), ...(si >= 0 && si !== xi && si !== yi ? [si] : [])]) requireNumeric(table, k);
  const columns: Record<string, Float64Array> = {};
  columnIdentifiers(table.headers).forEach((ids, k) => ids.forEach((id) => (columns[id] = table.columns[k])));
  const notes: string[] = [];
  let keep: number[] | undefined;
  if (si < 0 || si === xi || si === yi) {
    if (o.sweep !== undefined) throw new UsageError(`--sweep ${o.sweep}: ${file} has no sweep column`);
  } else {
    const sw = table.columns[si];
    const ids = [...new Set(Array.from(sw))].sort((a, b) => a - b);
    const range = ids.length > 1 ? `${ids[0]}–${ids[ids.length - 1]}` : String(ids[0]);
    if (o.sweep !== undefined) {
      if (o.allSweeps) throw new UsageError('--sweep and --all-sweeps: give one of them');
      const n = Number(o.sweep);
      if (!Number.isFinite(n) || !ids.includes(n))
        throw new UsageError(`--sweep ${o.sweep}: ${file} has no sweep ${o.sweep} (its sweep column holds ${ids.length} sweeps, ${range})`);
      keep = [];
      for (let k = 0; k < sw.length; k++) if (sw[k] === n) keep.push(k);
      notes.push(`sweep ${n} of ${ids.length} in the file`);
    } else if (ids.length > 1) {
      if (!o.allSweeps) {
        throw new UsageError(
          `${file} holds ${ids.length} sweeps (column '${table.headers[si]}', ${range}): choose one with --sweep N, or pool them all with --all-sweeps`,
        );
      }
      notes.push(`${ids.length} sweeps of the file pooled into one analysis (--all-sweeps)`);
    }
  }
  const pick = (a: Float64Array) => (keep ? Float64Array.from(keep, (k) => a[k]) : a);
  if (keep) for (const id of Object.keys(columns)) columns[id] = pick(columns[id]);
  // A unit in a header (Current (mA), I_mA, V [mV]) is read: the values go to the analysis in SI.
  // A bias column in amperes or a current column in volts is refused: the columns are swapped.
  // SCPI's special values (IEEE 488.2 / SCPI: 9.91e37 not a number, ±9.9e37 over range), as an
  // instrument's own file may hold them, are not readings: they become NaN (left out as 'not a
  // finite number') and are counted in a note, before any unit scaling could disguise them.
  let special = 0;
  const readings = (k: number): Float64Array => {
    const a = pick(table.columns[k]);
    let out: Float64Array | undefined;
    for (let j = 0; j < a.length; j++) {
      if (Math.abs(a[j]) >= 9.8e37) {
        out ??= Float64Array.from(a);
        out[j] = Number.NaN;
        special++;
      }
    }
    return out ?? a;
  };
  const scaled = (k: number, role: 'bias' | 'current'): Float64Array => {
    const h = table.headers[k];
    const { scale, unit } = columnScale(h, role, FIT_COLUMNS, file);
    if (scale === 1) return readings(k);
    notes.push(`column '${h}' read in ${unit} and converted to ${role === 'bias' ? 'V' : 'A'}`);
    return Float64Array.from(readings(k), (v) => v * scale);
  };
  notes.push(`columns used: x = '${table.headers[xi]}', y = '${table.headers[yi]}'`);
  const qi = table.headers.findIndex((h) => /^seq$/i.test(h));
  const seqs = qi >= 0 && !table.firstText[qi] ? pick(table.columns[qi]) : undefined;
  const x = scaled(xi, 'bias');
  const y = scaled(yi, 'current');
  if (special > 0)
    notes.push(`${special} value(s) were the SCPI over-range or not-a-number codes (±9.9e37, 9.91e37): not readings, left out as 'not a finite number'`);
  return {
    table,
    firstSeq: seqs && seqs.length > 0 ? seqs[0] : undefined,
    data: {
      x,
      y,
      compliance: ci >= 0 && ci !== xi && ci !== yi ? pick(table.columns[ci]) : undefined,
      columns,
    },
    notes,
  };
}

/** Loads mathjs (slow to import) only for the custom model. */
export function enableExpressions(): void {
  setExpressionEngine(createRequire(import.meta.url)('mathjs') as typeof import('mathjs'));
}

/** The analysis a station recorded for an exported file: its model, window and inputs (SI). */
export interface RecordedAnalysis {
  readonly model?: string;
  readonly window?: WindowRequest;
  readonly inputs: Inputs;
  /** The session.json it came from. */
  readonly source: string;
  readonly notes: string[];
}

const INPUT_KEYS = ['thickness', 'area', 'temperature', 'massRatio', 'permittivity', 'refractiveIndex', 'flatBand', 'richardson'] as const;

/**
 * An exported points.csv sits beside the session.json of its export: the model, window and inputs
 * the station analysed it with are read from there, so a fit of the export needs no retyping (an
 * option on the command line takes precedence). The settings in force for a sweep are the
 * session's first ones, changed by every settings change journaled before the sweep's first reading
 * (the file's `seq` column). Anything else beside the file is left alone, with a note.
 */
export function recordedAnalysis(file: string, firstSeq?: number, pooled = false): RecordedAnalysis | undefined {
  const source = join(dirname(resolve(file)), 'session.json');
  if (!existsSync(source)) return undefined;
  const notUsed = (why: string): RecordedAnalysis => ({ inputs: {}, source, notes: [`${source} beside the file was not used: ${why}`] });
  let meta: unknown;
  try {
    meta = JSON.parse(readFileSync(source, 'utf8'));
  } catch (e) {
    return notUsed(`not readable as JSON (${(e as Error).message})`);
  }
  const m = meta as { format?: unknown; sessionEvent?: { analysis?: unknown }; settingChanges?: unknown };
  if (typeof m.format !== 'string' || !m.format.startsWith('plumbline session export')) return notUsed('not a session export of this program');
  let analysis = m.sessionEvent?.analysis as { model?: unknown; window?: unknown; inputs?: unknown } | undefined;
  const changes = Array.isArray(m.settingChanges) ? (m.settingChanges as { seq?: unknown; analysis?: unknown }[]) : [];
  const notes: string[] = [];
  if (changes.length > 0 && (firstSeq === undefined || pooled)) {
    notes.push(`the session's analysis settings changed ${changes.length} time(s): its first settings are used; give the inputs on the command line to choose`);
  } else {
    for (const c of changes)
      if (typeof c.seq === 'number' && c.seq < (firstSeq as number) && c.analysis && typeof c.analysis === 'object') analysis = c.analysis as typeof analysis;
  }
  if (!analysis || typeof analysis !== 'object') return notUsed('it records no analysis settings');
  const inputs: Record<string, number> = {};
  const given = (analysis.inputs ?? {}) as Record<string, unknown>;
  for (const k of INPUT_KEYS) if (typeof given[k] === 'number' && Number.isFinite(given[k])) inputs[k] = given[k] as number;
  const w = analysis.window as { from?: unknown; to?: unknown } | string | undefined;
  const window: WindowRequest | undefined =
    w === 'auto' || w === 'all'
      ? w
      : w && typeof w === 'object'
        ? { from: typeof w.from === 'number' ? w.from : undefined, to: typeof w.to === 'number' ? w.to : undefined }
        : undefined;
  return { model: typeof analysis.model === 'string' ? analysis.model : undefined, window, inputs, source, notes };
}

/** An input in the trade's unit, for notes. */
function showInput(k: string, v: number): string {
  switch (k) {
    case 'thickness':
      return `thickness ${+(v * 1e9).toPrecision(6)} nm`;
    case 'area':
      return `area ${+(v * 1e4).toPrecision(6)} cm²`;
    case 'temperature':
      return `temperature ${+v.toPrecision(6)} K`;
    case 'flatBand':
      return `flat band ${+v.toPrecision(6)} V`;
    case 'richardson':
      return `Richardson constant ${+(v * 1e-4).toPrecision(6)} A/(cm² K²)`;
    case 'massRatio':
      return `mass ratio ${+v.toPrecision(6)}`;
    default:
      return `${k} ${+v.toPrecision(6)}`;
  }
}

/**
 * The inputs for an analysis: those given as options, over those recorded with an exported file
 * (recordedAnalysis); a note says which recorded ones were taken.
 */
export function mergeInputs(given: Inputs, recorded: RecordedAnalysis | undefined, notes: string[]): Inputs {
  if (!recorded) return given;
  notes.push(...recorded.notes);
  const taken = Object.entries(recorded.inputs).filter(([k]) => given[k as keyof Inputs] === undefined);
  if (taken.length > 0) {
    notes.push(
      `inputs recorded with the session (${recorded.source}): ${taken.map(([k, v]) => showInput(k, v)).join(', ')}; an option given here takes precedence`,
    );
  }
  const out: Record<string, number | undefined> = { ...Object.fromEntries(taken) };
  for (const [k, v] of Object.entries(given)) if (v !== undefined) out[k] = v;
  return out as Inputs;
}
