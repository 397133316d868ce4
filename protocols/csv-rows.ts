/**
 * Maps lines of a CSV written by another program to readings, with a configurable column mapping
 * (by header name or 1-based position). The header is taken from the first non-comment line; a
 * repeated header (the file was truncated and restarted) is recognised and skipped. A malformed
 * row is rejected with its line number and reason, never thrown.
 */
import { detectDelimiter, parseNumberField, splitFields } from './csv-table.js';
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

export type RowResult =
  | { kind: 'header' }
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

  constructor(private readonly mapping: ColumnMapping = {}) {}

  reset(): void {
    this.headers = undefined;
  }

  private resolve(spec: string | undefined, dflt: number, what: string): number {
    if (spec === undefined) return dflt;
    const h = this.headers as string[];
    const byName = h.findIndex((x) => x.toLowerCase() === spec.toLowerCase());
    if (byName >= 0) return byName;
    if (/^\d+$/.test(spec) && Number(spec) >= 1 && Number(spec) <= h.length) return Number(spec) - 1;
    throw new Error(`${what} column '${spec}' is not in the header (${h.join(', ')})`);
  }

  map(line: string): RowResult {
    const t = line.trim();
    if (t === '' || t.startsWith('#')) return { kind: 'skip' };
    if (!this.headers) {
      this.delimiter = detectDelimiter(line);
      const fields = splitFields(line, this.delimiter).map((f) => f.trim());
      if (fields.every((f) => !Number.isNaN(parseNumberField(f)))) {
        // No header: positions only.
        this.headers = fields.map((_, k) => `c${k + 1}`);
      } else {
        this.headers = fields;
        this.vi = this.resolve(this.mapping.voltage, 0, 'voltage');
        this.ii = this.resolve(this.mapping.current, 1, 'current');
        this.ci = this.mapping.compliance !== undefined ? this.resolve(this.mapping.compliance, -1, 'compliance') : -1;
        this.ti = this.mapping.temperature !== undefined ? this.resolve(this.mapping.temperature, -1, 'temperature') : -1;
        return { kind: 'header' };
      }
    }
    const fields = splitFields(line, this.delimiter);
    if (fields.map((f) => f.trim()).join(',') === this.headers.join(',')) return { kind: 'header' };
    if (fields.length !== this.headers.length) {
      return { kind: 'rejected', reason: `expected ${this.headers.length} fields, found ${fields.length}` };
    }
    const v = parseNumberField(fields[this.vi]);
    const i = parseNumberField(fields[this.ii]);
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
