/**
 * Reads a whole CSV table of numbers with a header row (the offline input of `plumbline fit`).
 * Comma, semicolon or tab separated (taken from the header line); lines starting with '#' and
 * blank lines are skipped. Every error names the file, the line and the column.
 */
export class CsvError extends Error {
  readonly code = 'CSV_MALFORMED';
  constructor(
    readonly file: string,
    readonly line: number | undefined,
    readonly column: string | undefined,
    detail: string,
  ) {
    super(`${file}${line !== undefined ? `, line ${line}` : ''}${column !== undefined ? `, column '${column}'` : ''}: ${detail}`);
    this.name = 'CsvError';
  }
}

export interface CsvTable {
  readonly file: string;
  readonly headers: string[];
  /** One array per column, in header order. */
  readonly columns: Float64Array[];
  /** Source line (1-based) of each data row. */
  readonly lines: number[];
  /**
   * The first cell of each column that is not a number (its line and text), or undefined: text
   * columns (a session name, a comment) are allowed as long as nothing uses them as numbers.
   */
  readonly firstText: ({ line: number; text: string } | undefined)[];
}

const NUMBER = /^[+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?$/;

/** Parses one numeric CSV field strictly; returns NaN when it is not a plain decimal number. */
export function parseNumberField(field: string): number {
  const t = field.trim();
  return NUMBER.test(t) ? Number(t) : Number.NaN;
}

export function detectDelimiter(headerLine: string): string {
  if (headerLine.includes('\t')) return '\t';
  if (headerLine.includes(';') && !headerLine.includes(',')) return ';';
  return ',';
}

/** Splits a line on the delimiter, honouring double quotes around fields. */
export function splitFields(line: string, delimiter: string): string[] {
  if (!line.includes('"')) return line.split(delimiter);
  const out: string[] = [];
  let cur = '';
  let quoted = false;
  for (let i = 0; i < line.length; i++) {
    const c = line[i];
    if (c === '"') {
      if (quoted && line[i + 1] === '"') {
        cur += '"';
        i++;
      } else quoted = !quoted;
    } else if (c === delimiter && !quoted) {
      out.push(cur);
      cur = '';
    } else cur += c;
  }
  out.push(cur);
  return out;
}

/** `minColumns`: 2 for x–y data (the default); 1 for a list of values. */
export function parseCsvTable(text: string, file: string, minColumns = 2): CsvTable {
  const rawLines = text.split(/\r?\n/);
  let headerAt = -1;
  for (let i = 0; i < rawLines.length; i++) {
    const t = rawLines[i].trim();
    if (t === '' || t.startsWith('#')) continue;
    headerAt = i;
    break;
  }
  if (headerAt < 0) throw new CsvError(file, undefined, undefined, 'the file is empty: expected a header row and data rows');
  const delimiter = detectDelimiter(rawLines[headerAt]);
  const headers = splitFields(rawLines[headerAt], delimiter).map((h) => h.trim());
  if (headers.length < minColumns) {
    throw new CsvError(file, headerAt + 1, undefined, `the header row has ${headers.length} column; at least ${minColumns} (x and y) are needed`);
  }
  headers.forEach((h, k) => {
    if (h === '') throw new CsvError(file, headerAt + 1, `#${k + 1}`, 'empty column name in the header row');
    if (NUMBER.test(h)) throw new CsvError(file, headerAt + 1, h, 'the first row looks like data; a header row with column names is required');
  });
  const cols: number[][] = headers.map(() => []);
  const lines: number[] = [];
  const firstText: CsvTable['firstText'] = headers.map(() => undefined);
  for (let i = headerAt + 1; i < rawLines.length; i++) {
    const t = rawLines[i].trim();
    if (t === '' || t.startsWith('#')) continue;
    const fields = splitFields(rawLines[i], delimiter);
    if (fields.length !== headers.length) {
      throw new CsvError(file, i + 1, undefined, `expected ${headers.length} fields (${headers.join(', ')}), found ${fields.length}`);
    }
    for (let k = 0; k < headers.length; k++) {
      const v = parseNumberField(fields[k]);
      if (Number.isNaN(v) && firstText[k] === undefined) firstText[k] = { line: i + 1, text: fields[k].trim() };
      cols[k].push(v);
    }
    lines.push(i + 1);
  }
  if (lines.length === 0) throw new CsvError(file, undefined, undefined, 'no data rows after the header');
  return { file, headers, columns: cols.map((c) => Float64Array.from(c)), lines, firstText };
}

/** Throws, naming the file, line and column, if column k holds a cell that is not a number. */
export function requireNumeric(table: CsvTable, k: number): void {
  const t = table.firstText[k];
  if (t) throw new CsvError(table.file, t.line, table.headers[k], `'${t.text}' is not a number`);
}

/** Finds a column by header name (case-insensitive) or 1-based position. */
export function columnIndex(table: CsvTable, spec: string, option: string): number {
  const byName = table.headers.findIndex((h) => h.toLowerCase() === spec.trim().toLowerCase());
  if (byName >= 0) return byName;
  if (/^\d+$/.test(spec.trim())) {
    const k = Number(spec) - 1;
    if (k >= 0 && k < table.headers.length) return k;
  }
  throw new CsvError(table.file, undefined, spec, `${option}: no such column (columns: ${table.headers.join(', ')})`);
}
