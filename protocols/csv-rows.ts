/**
 * Maps lines of a CSV written by another program to readings, with a configurable column mapping
 * (by header name or 1-based position). The header is taken from the first non-comment line and
 * read by the same rules as a whole file (csv-columns.ts: the bias and current columns by name,
 * units in their names converted to V and A); a column the mapping names that the header lacks
 * throws a CsvError (the mapping is wrong for every row). A repeated header (the file was
 * truncated and restarted) is recognised and skipped. A malformed row is rejected with its line
 * number and reason, never thrown.
 */
import { chooseColumns, type ColumnOptions, columnScale } from './csv-columns.js';
import { CsvError, detectDelimiter, findColumn, parseNumberField, splitFields } from './csv-table.js';
import type { Reading } from './reading-parser.js';

export interface ColumnMapping {
  /** Header name or 1-based position of the voltage column (default: first). */
  readonly voltage?: string;
  /** Header name or 1-based position of the current column (default: second). */
  readonly current?: string;
  /** Optional column with a compliance flag (non-zero = at compliance). */
  readonly compliance?: string;
  /** Optional column with the device temperature, K. */
  readonly temperature?: string;
}

/** The columns a mapper reads, once it has seen the header (or the first row of a file without one). */
export interface ColumnsInUse {
  readonly voltage: ColumnInUse;
  readonly current: ColumnInUse;
  readonly compliance?: string;
  readonly temperature?: string;
  /** False when the first row was data: the columns are known by position only. */
  readonly header: boolean;
}

export interface ColumnInUse {
  /** Its header name, or "column N" without a header. */
  readonly name: string;
  /** The unit its name carries (mV, nA …), undefined for none: its values are read as V or A. */
  readonly unit?: string;
  /** The factor to V or A. */
  readonly scale: number;
}

/** The options of `watch` that name the columns, for messages. */
export const WATCH_COLUMNS: ColumnOptions = { bias: '--voltage', current: '--current', pair: 'the voltage and current columns' };

/** One line for people: the columns in use and their units. */
export function describeColumns(c: ColumnsInUse): string {
  const one = (role: string, x: ColumnInUse, si: string) =>
    `${role} '${x.name}' ${x.unit === undefined ? `(no unit in its name: read as ${si})` : x.scale === 1 ? `(${si})` : `(in ${x.unit}, converted to ${si})`}`;
  const extra = [
    c.compliance !== undefined ? `compliance flag '${c.compliance}'` : '',
    c.temperature !== undefined ? `temperature '${c.temperature}' (K)` : '',
  ].filter(Boolean);
  return `columns: ${one('voltage', c.voltage, 'V')}, ${one('current', c.current, 'A')}${extra.length ? `, ${extra.join(', ')}` : ''}${c.header ? '' : ' — no header line: columns by position'}`;
}

export type RowResult =
  | { kind: 'header'; columns: ColumnsInUse }
  | { kind: 'skip' }
  | { kind: 'reading'; reading: Reading; compliance: boolean; temperature?: number }
  | { kind: 'rejected'; reason: string };

export class CsvRowMapper {
  private headers: string[] | undefined;
  private delimiter = ',';
  private vi = 0;
  private ii = 1;
  private ci = -1;
  private ti = -1;
  private vScale = 1;
  private iScale = 1;
  private inUse: ColumnsInUse | undefined;

  /** `where`: the source's name for messages (a file, "standard input"). */
  constructor(
    private readonly mapping: ColumnMapping = {},
    private readonly where = 'the input',
  ) {}

  reset(): void {
    this.headers = undefined;
  }

  /** The columns in use once the first row has been read. */
  get columns(): ColumnsInUse | undefined {
    return this.inUse;
  }

  /** Columns of a file without a header: by position only. */
  private position(spec: string | undefined, dflt: number, option: string, width: number): number {
    if (spec === undefined) return dflt;
    const k = /^\d+$/.test(spec.trim()) ? Number(spec) - 1 : -1;
    if (k >= 0 && k < width) return k;
    throw new CsvError(
      this.where,
      undefined,
      spec,
      `${option}: no such column: the first row is data, not a header, so columns are named by position (1–${width})`,
    );
  }

  /** Reads the header (or a first row of data) and fixes the columns; throws CsvError when the mapping does not fit it. */
  private choose(fields: string[], header: boolean): ColumnsInUse {
    const m = this.mapping;
    const w = this.where;
    const width = fields.length;
    if (header) {
      const c = chooseColumns(fields, { bias: m.voltage, current: m.current }, WATCH_COLUMNS, w);
      this.vi = c.bias;
      this.ii = c.current;
      this.ci = m.compliance !== undefined ? findColumn(fields, m.compliance, '--compliance-column', w) : c.compliance;
      this.ti = m.temperature !== undefined ? findColumn(fields, m.temperature, '--temperature-column', w) : -1;
    } else {
      this.vi = this.position(m.voltage, 0, '--voltage', width);
      this.ii = this.position(m.current, 1, '--current', width);
      this.ci = m.compliance !== undefined ? this.position(m.compliance, -1, '--compliance-column', width) : -1;
      this.ti = m.temperature !== undefined ? this.position(m.temperature, -1, '--temperature-column', width) : -1;
    }
    if (Math.max(this.vi, this.ii) >= width)
      throw new CsvError(w, undefined, undefined, `the first row has ${width} column(s): a voltage and a current column are needed`);
    const name = (k: number) => (header ? fields[k] : `column ${k + 1}`);
    const v = header ? columnScale(fields[this.vi], 'bias', WATCH_COLUMNS, w) : { scale: 1 };
    const i = header ? columnScale(fields[this.ii], 'current', WATCH_COLUMNS, w) : { scale: 1 };
    this.vScale = v.scale;
    this.iScale = i.scale;
    return {
      voltage: { name: name(this.vi), scale: v.scale, ...(v.unit !== undefined ? { unit: v.unit } : {}) },
      current: { name: name(this.ii), scale: i.scale, ...(i.unit !== undefined ? { unit: i.unit } : {}) },
      ...(this.ci >= 0 ? { compliance: name(this.ci) } : {}),
      ...(this.ti >= 0 ? { temperature: name(this.ti) } : {}),
      header,
    };
  }

  map(line: string): RowResult {
    const t = line.trim();
    if (t === '' || t.startsWith('#')) return { kind: 'skip' };
    if (!this.headers) {
      this.delimiter = detectDelimiter(line);
      const fields = splitFields(line, this.delimiter).map((f) => f.trim());
      if (fields.every((f) => !Number.isNaN(parseNumberField(f)))) {
        // No header: positions only.
        this.inUse = this.choose(fields, false);
        this.headers = fields.map((_, k) => `column ${k + 1}`);
      } else {
        this.inUse = this.choose(fields, true);
        this.headers = fields;
        return { kind: 'header', columns: this.inUse };
      }
    }
    const fields = splitFields(line, this.delimiter);
    if (fields.map((f) => f.trim()).join(',') === this.headers.join(',')) return { kind: 'header', columns: this.inUse as ColumnsInUse };
    if (fields.length !== this.headers.length) {
      return { kind: 'rejected', reason: `expected ${this.headers.length} fields, found ${fields.length}` };
    }
    const v = parseNumberField(fields[this.vi]) * this.vScale;
    const i = parseNumberField(fields[this.ii]) * this.iScale;
    if (Number.isNaN(v)) return { kind: 'rejected', reason: `column '${this.headers[this.vi]}': '${fields[this.vi].trim()}' is not a number` };
    if (Number.isNaN(i)) return { kind: 'rejected', reason: `column '${this.headers[this.ii]}': '${fields[this.ii].trim()}' is not a number` };
    const c = this.ci >= 0 ? parseNumberField(fields[this.ci]) : 0;
    let temperature: number | undefined;
    if (this.ti >= 0) {
      temperature = parseNumberField(fields[this.ti]);
      if (!(temperature > 0)) return { kind: 'rejected', reason: `column '${this.headers[this.ti]}': '${fields[this.ti].trim()}' is not a temperature in K` };
    }
    return {
      kind: 'reading',
      reading: { v, i, overflow: false, voltageOverflow: false },
      compliance: c !== 0 && !Number.isNaN(c),
      ...(temperature !== undefined ? { temperature } : {}),
    };
  }
}
