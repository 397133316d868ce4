/**
 * Reads a whole CSV table of numbers with a header row (the offline input of `plumbline fit`).
 * Comma, semicolon or tab separated (taken from the header line); lines starting with '#' and
 * blank lines are skipped. Every error names the file, the line and the column.
 */
import { didYouMean } from '../daemon/analysis/did-you-mean.js';
import { isAsciiBlank, type ScanCursor, scanInto } from './csv-scan.js';

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
  readonly lines: Int32Array;
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

const utf8 = new TextDecoder('utf-8', { ignoreBOM: true });
const NEWLINE = 10;
const QUOTE = 34;
const HASH = 35;

/**
 * `minColumns`: 2 for x–y data (the default); 1 for a list of values. Takes the file's text or,
 * faster, its bytes (UTF-8): data lines are scanned byte by byte straight into typed arrays; a
 * line with a double quote or a non-ASCII byte is decoded and split as text, with the same result.
 */
export function parseCsvTable(input: string | Uint8Array, file: string, minColumns = 2): CsvTable {
  const bytes = typeof input === 'string' ? new TextEncoder().encode(input) : input;
  const size = bytes.length;
  // The header: the first line that is neither blank nor a comment.
  let pos = 0;
  let lineNo = 0;
  let headerLine: string | undefined;
  while (pos < size || (pos === size && lineNo === 0)) {
    const end = lineEnd(bytes, pos);
    lineNo++;
    const text = decodeLine(bytes, pos, end);
    pos = end + 1;
    const t = text.trim();
    if (t === '' || t.startsWith('#')) continue;
    headerLine = text;
    break;
  }
  if (headerLine === undefined) throw new CsvError(file, undefined, undefined, 'the file is empty: expected a header row and data rows');
  const headerAt = lineNo;
  const delimiter = detectDelimiter(headerLine);
  const headers = splitFields(headerLine, delimiter).map((h) => h.trim());
  if (headers.length < minColumns) {
    throw new CsvError(file, headerAt, undefined, `the header row has ${headers.length} column; at least ${minColumns} (x and y) are needed`);
  }
  headers.forEach((h, k) => {
    if (h === '') throw new CsvError(file, headerAt, `#${k + 1}`, 'empty column name in the header row');
    if (NUMBER.test(h)) throw new CsvError(file, headerAt, h, 'the first row looks like data; a header row with column names is required');
  });

  // Room for every remaining line, from the shortest mean line length of three samples (the start,
  // the middle and near the end), with a margin; grown by half should that fall short. At the end
  // the columns are views of these arrays when they are mostly filled.
  let perLine = Infinity;
  for (const at of [pos, pos + ((size - pos) >> 1), pos + Math.floor(0.9 * (size - pos))]) {
    let from = at;
    if (from > pos) from = lineEnd(bytes, from) + 1;
    let to = from;
    let sampled = 0;
    while (sampled < 64 && to < size) {
      to = lineEnd(bytes, to) + 1;
      sampled++;
    }
    if (sampled > 0) perLine = Math.min(perLine, (Math.min(to, size) - from) / sampled);
  }
  // A data line holds at least a digit per field, the delimiters and the line break.
  const width = headers.length;
  const most = Math.ceil((size - pos) / (2 * width)) + 16;
  let capacity = Math.min(most, Math.max(16, Math.ceil((1.15 * (size - pos)) / (Number.isFinite(perLine) ? perLine : 8)) + 64));
  let cols = headers.map(() => new Float64Array(capacity));
  let lines = new Int32Array(capacity);
  const firstText: CsvTable['firstText'] = headers.map(() => undefined);
  const sep = delimiter.charCodeAt(0);
  const at: ScanCursor = { end: 0, value: 0 };
  let rows = 0;

  while (pos < size) {
    lineNo++;
    if (rows === capacity) {
      capacity = Math.ceil(capacity * 1.5);
      cols = cols.map((c) => grow(c, capacity));
      lines = grow(lines, capacity);
    }
    const start = pos;
    // Blank or comment line? (Decided on ASCII; anything else is left to the text path.)
    let j = start;
    while (j < size && bytes[j] !== NEWLINE && isAsciiBlank(bytes[j])) j++;
    if (j === size || bytes[j] === NEWLINE || bytes[j] === HASH) {
      pos = lineEnd(bytes, j) + 1;
      continue;
    }
    // Fields: a number read in place, blanks around it; anything else is a text field, and a
    // double quote or a non-ASCII byte sends the whole line to the text path.
    let k = 0;
    let i = start;
    let slow = bytes[j] >= 128;
    while (!slow) {
      const fieldStart = i;
      // Blanks inside a line (the delimiter is a field boundary even when it is a tab).
      while (i < size && isFieldBlank(bytes[i], sep)) i++;
      scanInto(bytes, i, size, at);
      let v = at.value;
      i = at.end;
      while (i < size && isFieldBlank(bytes[i], sep)) i++;
      let c = i < size ? bytes[i] : NEWLINE;
      if (c !== sep && c !== NEWLINE) v = Number.NaN;
      if (Number.isNaN(v)) {
        // Text: find the field's end.
        while (c !== sep && c !== NEWLINE && c !== QUOTE && c < 128) c = ++i < size ? bytes[i] : NEWLINE;
        if (c === QUOTE || c >= 128) {
          slow = true;
          break;
        }
        if (k < width && firstText[k] === undefined) firstText[k] = { line: lineNo, text: latin1(bytes, fieldStart, i).trim() };
      }
      if (k < width) cols[k][rows] = v;
      k++;
      i++;
      if (c === NEWLINE) break;
    }
    if (slow) {
      const end = lineEnd(bytes, i);
      if (textRow(bytes, start, end, delimiter, headers, file, lineNo, cols, rows, firstText)) lines[rows++] = lineNo;
      pos = end + 1;
      continue;
    }
    if (k !== width) throw new CsvError(file, lineNo, undefined, `expected ${width} fields (${headers.join(', ')}), found ${k}`);
    lines[rows++] = lineNo;
    pos = i;
  }
  if (rows === 0) throw new CsvError(file, undefined, undefined, 'no data rows after the header');
  // Keep the arrays when they are mostly full; copy when comment lines left much of them empty.
  const trim = <T extends Float64Array | Int32Array>(a: T): T => (rows > capacity / 2 ? a.subarray(0, rows) : a.slice(0, rows)) as T;
  return { file, headers, columns: cols.map(trim), lines: trim(lines), firstText };
}

/**
 * A line that needs decoding (a double quote or a non-ASCII byte), split as text into row `row`:
 * false for a blank or comment line. (Not a closure of the byte loop: its counters stay in registers.)
 */
function textRow(
  bytes: Uint8Array,
  start: number,
  end: number,
  delimiter: string,
  headers: string[],
  file: string,
  lineNo: number,
  cols: Float64Array[],
  row: number,
  firstText: CsvTable['firstText'],
): boolean {
  const line = decodeLine(bytes, start, end);
  const t = line.trim();
  if (t === '' || t.startsWith('#')) return false;
  const fields = splitFields(line, delimiter);
  const width = headers.length;
  if (fields.length !== width) {
    throw new CsvError(file, lineNo, undefined, `expected ${width} fields (${headers.join(', ')}), found ${fields.length}`);
  }
  for (let k = 0; k < width; k++) {
    const v = parseNumberField(fields[k]);
    if (Number.isNaN(v) && firstText[k] === undefined) firstText[k] = { line: lineNo, text: fields[k].trim() };
    cols[k][row] = v;
  }
  return true;
}

/** A blank byte inside a line: not the delimiter (a tab may be one), not the line break. */
function isFieldBlank(c: number, sep: number): boolean {
  return c !== sep && c !== NEWLINE && isAsciiBlank(c);
}

/** Index of the newline ending the line that starts at `from` (or the end of the bytes). */
function lineEnd(bytes: Uint8Array, from: number): number {
  const i = bytes.indexOf(NEWLINE, from);
  return i < 0 ? bytes.length : i;
}

/** One line as text, without its line break (a CR before the LF is part of the break). */
function decodeLine(bytes: Uint8Array, start: number, end: number): string {
  return utf8.decode(bytes.subarray(start, end > start && bytes[end - 1] === 13 && end < bytes.length ? end - 1 : end));
}

function grow<T extends Float64Array | Int32Array>(a: T, capacity: number): T {
  const b = new (a.constructor as new (n: number) => T)(capacity);
  b.set(a);
  return b;
}

function latin1(bytes: Uint8Array, start: number, end: number): string {
  let s = '';
  for (let i = start; i < end; i++) s += String.fromCharCode(bytes[i]);
  return s;
}

/** Units an instrument export writes in a row of their own under the header. */
const UNIT_CELL = /^\(?\[?(?:[fpnuµmkM]?(?:A|V|s|Ω|ohm|Ohm|W|S|F|Hz)|K|°C|C|%|A\/cm\^?2|A\/m\^?2)\]?\)?$/;

/**
 * Why a cell is not a number, in the words that help: a decimal comma, or a units row under the
 * header (the first data row, every cell of it a unit), else plainly.
 */
export function notNumberText(table: CsvTable, text: string, line: number): string {
  if (/^[+-]?\d*,\d+(?:[eE][+-]?\d+)?$/.test(text.trim()))
    return `'${text}' is written with a decimal comma: numbers are read with a decimal point ('${text.trim().replace(',', '.')}'); save the file with points (columns may stay separated by ';')`;
  const unitsRow = table.firstText.every((f) => f !== undefined && f.line === line && UNIT_CELL.test(f.text.trim()));
  if (line === table.lines[0] && unitsRow)
    return `'${text}' looks like a units row under the header: put each unit in its column's name instead (e.g. 'I (A)', 'V (V)') and delete line ${line}`;
  return `'${text}' is not a number`;
}

/** Throws, naming the file, line and column, if column k holds a cell that is not a number. */
export function requireNumeric(table: CsvTable, k: number): void {
  const t = table.firstText[k];
  if (t) throw new CsvError(table.file, t.line, table.headers[k], notNumberText(table, t.text, t.line));
}

/** Finds a column of a table by header name (case-insensitive) or 1-based position (`findColumn`). */
export function columnIndex(table: CsvTable, spec: string, option: string): number {
  return findColumn(table.headers, spec, option, table.file);
}

/**
 * A column named by the user: its header name (case-blind) or 1-based position. One that is not
 * there is refused naming the option, the header's columns and a close name if there is one.
 */
export function findColumn(headers: readonly string[], spec: string, option: string, file: string): number {
  const byName = headers.findIndex((h) => h.toLowerCase() === spec.trim().toLowerCase());
  if (byName >= 0) return byName;
  if (/^\d+$/.test(spec.trim())) {
    const k = Number(spec) - 1;
    if (k >= 0 && k < headers.length) return k;
  }
  throw new CsvError(file, undefined, spec, `${option}: no such column (columns: ${headers.join(', ')})${didYouMean(spec.trim(), headers)}`);
}
