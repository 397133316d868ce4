/**
 * Per-device results of breakdown tests (voltage or current ramps, constant-voltage or
 * constant-current stress) and the identity of a device under test. The results file is what the
 * tests write beside a session's journal and what `plumbline weibull` and `plumbline lot` read; it
 * is plain CSV so pandas or a spreadsheet reads it without our code.
 *
 * File `device-results.csv` in the session folder:
 *   line 1  header: the column names below, in this order (readers also accept any order and
 *           extra columns, which they ignore)
 *   line 2  units row: the SI unit of each column, empty for text columns
 *   then    one row per device and test
 * Lines starting with '#' are comments. Numbers are written with full precision (shortest
 * round-trip form); an empty numeric cell means "not measured".
 *
 * Columns:
 *   device              text  the device's name (unique within the session)
 *   wafer, site         text  where it sits; x, y: the site's position on the wafer map (die
 *                             column and row, or mm from the centre; any consistent grid)
 *   test                text  voltage-ramp | current-ramp | constant-voltage | constant-current
 *   polarity            text  positive | negative: the sign of the stress (the bias the gate was
 *                             driven to). Breakdown under the two polarities is not one population
 *                             (charge injected from the other electrode), so readers keep them apart.
 *                             Files without the column are read as of unknown polarity.
 *   outcome             text  breakdown — the device broke down (a failure);
 *                             survived — it reached the end of the test intact (right-censored:
 *                               the breakdown columns then hold the value it reached);
 *                             initial-failure — it failed the check at the use condition before
 *                               the test (JEDEC JESD35-A classifies these apart);
 *                             invalid — the test did not give a result (instrument fault, abort)
 *   criterion           text  the breakdown criterion that fired (e.g. current-jump, slope-change,
 *                             compliance, bias-collapse) or why the test ended
 *   breakdown_voltage   V     the bias at breakdown (or reached)
 *   breakdown_field     V/m   breakdown_voltage over the thickness (flat-band corrected if known)
 *   charge_to_breakdown C/m^2 ∫J dt up to breakdown
 *   charge_to_breakdown_uncertainty C/m^2  its standard uncertainty: the breakdown moment lies
 *                             between the last intact reading and the one that showed it, so half
 *                             that interval's charge (and half of any stress pause's edges)
 *   time_to_breakdown   s     from the start of stress to breakdown
 *   area                m^2   device area
 *   thickness           m     film thickness
 *   temperature         K     device temperature during the test
 *   leakage_before      A     current at the use condition before the test
 *   leakage_after       A     the same after the test (stress-induced leakage)
 *   leakage_floor       A     the noise floor σ of the run's null readings (at zero bias, or with
 *                             the current against the bias): a leakage under three times it is
 *                             at the floor, the limit of detection (IUPAC; Long & Winefordner 1983);
 *                             empty when the run read too few null readings to tell
 *   tags                text  free tags, separated by ';'
 */
import { INPUT_RANGE } from '../daemon/analysis/analyze.js';
import { CsvError, splitFields } from './csv-table.js';

export const DEVICE_RESULTS_FILE = 'device-results.csv';

/** The identity of a device under test, carried by a run and journaled in its session event. */
export interface DeviceIdentity {
  readonly device?: string;
  readonly wafer?: string;
  readonly site?: string;
  /** The site's position on the wafer map (die column and row, or any consistent grid). */
  readonly x?: number;
  readonly y?: number;
  /** m². */
  readonly area?: number;
  /** m. */
  readonly thickness?: number;
  /** K. */
  readonly temperature?: number;
  readonly tags?: readonly string[];
}

export const DEVICE_FIELDS = ['device', 'wafer', 'site', 'x', 'y', 'area', 'thickness', 'temperature', 'tags'] as const;

/** Later values win; tags are replaced when given. */
export function mergeIdentity(base: DeviceIdentity, change: DeviceIdentity | undefined): DeviceIdentity {
  if (!change) return base;
  const out: Record<string, unknown> = { ...base };
  for (const [k, v] of Object.entries(change)) if (v !== undefined && v !== null) out[k] = v;
  return out as DeviceIdentity;
}

export const TEST_KINDS = ['voltage-ramp', 'current-ramp', 'constant-voltage', 'constant-current'] as const;
export type TestKind = (typeof TEST_KINDS)[number];
export type Outcome = 'breakdown' | 'survived' | 'initial-failure' | 'invalid';
export const OUTCOMES: readonly Outcome[] = ['breakdown', 'survived', 'initial-failure', 'invalid'];
export type Polarity = 'positive' | 'negative';
export const POLARITIES: readonly Polarity[] = ['positive', 'negative'];

export interface DeviceResult {
  readonly device: string;
  readonly wafer?: string;
  readonly site?: string;
  readonly x?: number;
  readonly y?: number;
  readonly test: string;
  readonly polarity?: Polarity;
  readonly outcome: Outcome;
  readonly criterion?: string;
  readonly breakdownVoltage?: number;
  readonly breakdownField?: number;
  readonly chargeToBreakdown?: number;
  readonly chargeToBreakdownUncertainty?: number;
  readonly timeToBreakdown?: number;
  readonly area?: number;
  readonly thickness?: number;
  readonly temperature?: number;
  readonly leakageBefore?: number;
  readonly leakageAfter?: number;
  /** The noise floor σ of the run's null readings, A (a leakage under 3σ is at the floor). */
  readonly leakageFloor?: number;
  readonly tags?: readonly string[];
}

interface Column {
  readonly name: string;
  readonly key: keyof DeviceResult;
  readonly unit: string;
  readonly kind: 'text' | 'number' | 'tags';
}

export const RESULT_COLUMNS: readonly Column[] = [
  { name: 'device', key: 'device', unit: '', kind: 'text' },
  { name: 'wafer', key: 'wafer', unit: '', kind: 'text' },
  { name: 'site', key: 'site', unit: '', kind: 'text' },
  { name: 'x', key: 'x', unit: '', kind: 'number' },
  { name: 'y', key: 'y', unit: '', kind: 'number' },
  { name: 'test', key: 'test', unit: '', kind: 'text' },
  { name: 'polarity', key: 'polarity', unit: '', kind: 'text' },
  { name: 'outcome', key: 'outcome', unit: '', kind: 'text' },
  { name: 'criterion', key: 'criterion', unit: '', kind: 'text' },
  { name: 'breakdown_voltage', key: 'breakdownVoltage', unit: 'V', kind: 'number' },
  { name: 'breakdown_field', key: 'breakdownField', unit: 'V/m', kind: 'number' },
  { name: 'charge_to_breakdown', key: 'chargeToBreakdown', unit: 'C/m^2', kind: 'number' },
  { name: 'charge_to_breakdown_uncertainty', key: 'chargeToBreakdownUncertainty', unit: 'C/m^2', kind: 'number' },
  { name: 'time_to_breakdown', key: 'timeToBreakdown', unit: 's', kind: 'number' },
  { name: 'area', key: 'area', unit: 'm^2', kind: 'number' },
  { name: 'thickness', key: 'thickness', unit: 'm', kind: 'number' },
  { name: 'temperature', key: 'temperature', unit: 'K', kind: 'number' },
  { name: 'leakage_before', key: 'leakageBefore', unit: 'A', kind: 'number' },
  { name: 'leakage_after', key: 'leakageAfter', unit: 'A', kind: 'number' },
  { name: 'leakage_floor', key: 'leakageFloor', unit: 'A', kind: 'number' },
  { name: 'tags', key: 'tags', unit: '', kind: 'tags' },
];

/** The quantities a Weibull analysis can take from the results, by short name. */
export const RESULT_QUANTITIES: Readonly<Record<string, { key: keyof DeviceResult; column: string; unit: string; title: string }>> = {
  field: { key: 'breakdownField', column: 'breakdown_field', unit: 'V/m', title: 'breakdown field' },
  voltage: { key: 'breakdownVoltage', column: 'breakdown_voltage', unit: 'V', title: 'breakdown voltage' },
  charge: { key: 'chargeToBreakdown', column: 'charge_to_breakdown', unit: 'C/m^2', title: 'charge to breakdown' },
  time: { key: 'timeToBreakdown', column: 'time_to_breakdown', unit: 's', title: 'time to breakdown' },
};

/** Finds a quantity by short name (field) or column name (breakdown_field). */
export function resultQuantity(name: string): (typeof RESULT_QUANTITIES)[string] | undefined {
  const n = name.trim().toLowerCase();
  return RESULT_QUANTITIES[n] ?? Object.values(RESULT_QUANTITIES).find((q) => q.column === n);
}

const csvCell = (s: string) => (/[",\n;]/.test(s) || s !== s.trim() ? `"${s.replace(/"/g, '""')}"` : s);

/** The file's text: header, units row, one row per result. */
export function formatDeviceResults(rows: readonly DeviceResult[]): string {
  const lines = [RESULT_COLUMNS.map((c) => c.name).join(','), RESULT_COLUMNS.map((c) => c.unit).join(',')];
  for (const r of rows) {
    lines.push(
      RESULT_COLUMNS.map((c) => {
        const v = r[c.key];
        if (v === undefined || v === null) return '';
        if (c.kind === 'tags') return csvCell((v as readonly string[]).join(';'));
        if (c.kind === 'number') return Number.isFinite(v as number) ? String(v) : '';
        return csvCell(String(v));
      }).join(','),
    );
  }
  return `${lines.join('\n')}\n`;
}

const NUMBER = /^[+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?$/;

/**
 * Reads a results file. Columns are found by name (any order, extra columns ignored); the units row
 * is checked against the SI units above, so a file in other units is refused rather than misread.
 * Every error names the file, line and column.
 */
export function parseDeviceResults(text: string, file: string): DeviceResult[] {
  const lines = text.split(/\r?\n/);
  const content: { n: number; text: string }[] = [];
  lines.forEach((t, k) => {
    if (t.trim() !== '' && !t.trim().startsWith('#')) content.push({ n: k + 1, text: t });
  });
  if (content.length === 0)
    throw new CsvError(file, undefined, undefined, 'the results file is empty: expected a header row, a units row and one row per device');
  const header = splitFields(content[0].text, ',').map((h) => h.trim().toLowerCase());
  const at = new Map<string, number>();
  header.forEach((h, k) => at.set(h, k));
  for (const need of ['device', 'outcome'])
    if (!at.has(need)) throw new CsvError(file, content[0].n, need, `no '${need}' column (columns: ${header.join(', ')})`);
  let start = 1;
  if (content.length > 1) {
    const units = splitFields(content[1].text, ',').map((u) => u.trim());
    const isUnits =
      units.every((u) => u === '' || !NUMBER.test(u)) && units.some((u) => u !== '') && !OUTCOMES.includes(units[at.get('outcome') as number] as Outcome);
    if (isUnits) {
      start = 2;
      for (const c of RESULT_COLUMNS) {
        const k = at.get(c.name);
        if (k === undefined || c.unit === '') continue;
        const u = (units[k] ?? '').replace(/\s+/g, '');
        if (u !== '' && u !== c.unit)
          throw new CsvError(file, content[1].n, c.name, `unit '${units[k]}' where the results format stores ${c.unit} (SI); convert the column`);
      }
    }
  }
  const rows: DeviceResult[] = [];
  for (const line of content.slice(start)) {
    const f = splitFields(line.text, ',');
    if (f.length !== header.length) throw new CsvError(file, line.n, undefined, `expected ${header.length} fields, found ${f.length}`);
    const row: Record<string, unknown> = {};
    for (const c of RESULT_COLUMNS) {
      const k = at.get(c.name);
      if (k === undefined) continue;
      const cell = f[k].trim();
      if (cell === '') continue;
      if (c.kind === 'number') {
        if (!NUMBER.test(cell)) throw new CsvError(file, line.n, c.name, `'${cell}' is not a number`);
        row[c.key] = Number(cell);
      } else if (c.kind === 'tags')
        row[c.key] = cell
          .split(';')
          .map((t) => t.trim())
          .filter((t) => t !== '');
      else row[c.key] = cell;
    }
    if (typeof row.device !== 'string') throw new CsvError(file, line.n, 'device', 'empty device name');
    if (!OUTCOMES.includes(row.outcome as Outcome))
      throw new CsvError(file, line.n, 'outcome', `'${row.outcome ?? ''}': expected one of ${OUTCOMES.join(', ')}`);
    if (row.polarity !== undefined && !POLARITIES.includes(row.polarity as Polarity))
      throw new CsvError(file, line.n, 'polarity', `'${row.polarity}': expected positive or negative (or an empty cell: not known)`);
    if (row.test === undefined) row.test = '';
    rows.push(row as unknown as DeviceResult);
  }
  return rows;
}

/** A device identity that does not validate: the message names the field. */
export class DeviceIdentityError extends Error {
  readonly code = 'BAD_DEVICE';
}

// biome-ignore lint/suspicious/noControlCharactersInRegex: the point is to refuse control characters in names
const TEXT = /^[^\u0000-\u001f]{1,64}$/;

/**
 * Checks a device identity from a run request, a plan file or an annotation (JSON): known fields
 * only, names and tags up to 64 printable characters, positions finite, area, thickness and
 * temperature positive and in SI (m², m, K). `where` prefixes the field in messages.
 */
export function parseDeviceIdentity(raw: unknown, where = 'device'): DeviceIdentity {
  if (typeof raw !== 'object' || raw === null || Array.isArray(raw))
    throw new DeviceIdentityError(`${where}: expected an object with ${DEVICE_FIELDS.join(', ')}`);
  const out: Record<string, unknown> = {};
  for (const [k, v] of Object.entries(raw)) {
    const f = `${where}.${k}`;
    if (!(DEVICE_FIELDS as readonly string[]).includes(k)) throw new DeviceIdentityError(`${f}: unknown field (expected ${DEVICE_FIELDS.join(', ')})`);
    if (v === undefined || v === null) continue;
    if (k === 'device' || k === 'wafer' || k === 'site') {
      if (typeof v !== 'string' || !TEXT.test(v)) throw new DeviceIdentityError(`${f}: expected a name of 1 to 64 printable characters`);
      out[k] = v;
    } else if (k === 'x' || k === 'y') {
      if (typeof v !== 'number' || !Number.isFinite(v)) throw new DeviceIdentityError(`${f}: expected a number (the site's column or row on the wafer map)`);
      out[k] = v;
    } else if (k === 'tags') {
      if (!Array.isArray(v) || v.length > 32 || !v.every((t) => typeof t === 'string' && TEXT.test(t)))
        throw new DeviceIdentityError(`${f}: expected up to 32 tags of 1 to 64 printable characters`);
      out[k] = [...v];
    } else {
      const unit = k === 'area' ? 'm^2' : k === 'thickness' ? 'm' : 'K';
      if (typeof v !== 'number' || !(v > 0) || !Number.isFinite(v)) throw new DeviceIdentityError(`${f}: expected a positive number in ${unit} (SI)`);
      // Beyond where such samples lie (the fit's own input ranges): most often a unit left off (7 for 7 nm is 7 m).
      const r = INPUT_RANGE[k as 'area' | 'thickness' | 'temperature'];
      if (v < r.lo || v > r.hi)
        throw new DeviceIdentityError(
          `${f}: ${v} ${unit} is outside ${r.what}, where such devices lie; the value is in ${unit} (SI) — was it given in another unit?`,
        );
      out[k] = v;
    }
  }
  return out as DeviceIdentity;
}
