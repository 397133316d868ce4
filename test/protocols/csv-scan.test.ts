/**
 * The byte-level CSV scanner against the definition it replaces: a field is a number when its
 * trimmed text matches the strict decimal syntax, and its value is what ECMAScript's Number()
 * gives (the correctly rounded double; ECMA-262 §7.1.4.1.1). The reference table reader below is
 * that definition written the plain way (split into lines and fields, a regular expression and
 * Number() per field); random files must read the same, errors included.
 */
import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { parseDecimal } from '../../protocols/csv-scan.js';
import { CsvError, detectDelimiter, parseCsvTable, parseNumberField, splitFields } from '../../protocols/csv-table.js';

const enc = new TextEncoder();

function scan(text: string): number {
  const b = enc.encode(text);
  return parseDecimal(b, 0, b.length);
}

/** Exact decimal expansion of a finite double (BigInt arithmetic). */
function exactDecimal(x: number): { digits: bigint; exp10: number } {
  const view = new DataView(new ArrayBuffer(8));
  view.setFloat64(0, Math.abs(x));
  const hi = view.getUint32(0);
  const lo = view.getUint32(4);
  const e = (hi >>> 20) & 0x7ff;
  let m = (BigInt(hi & 0xfffff) << 32n) | BigInt(lo);
  if (e > 0) m |= 1n << 52n;
  const p = (e === 0 ? 1 : e) - 1075; // x = m · 2^p
  return p >= 0 ? { digits: m << BigInt(p), exp10: 0 } : { digits: m * 5n ** BigInt(-p), exp10: p };
}

/** The exact midpoint between x > 0 and the next double up, rounded to `sig` significant digits. */
function nearHalfway(x: number, sig: number): string {
  const a = exactDecimal(x);
  const next = exactDecimal(nextUp(x));
  // Bring both to the same power of ten (the smaller one), then average.
  const e = Math.min(a.exp10, next.exp10);
  const da = a.digits * 10n ** BigInt(a.exp10 - e);
  const db = next.digits * 10n ** BigInt(next.exp10 - e);
  const mid = da + db; // the midpoint times 2, at 10^e
  const s = (mid * 5n).toString(); // times 10 / 2: the midpoint at 10^(e−1)
  const cut = s.slice(0, sig);
  return `${cut[0]}.${cut.slice(1)}e${s.length - 1 + e - 1}`;
}

function nextUp(x: number): number {
  const view = new DataView(new ArrayBuffer(8));
  view.setFloat64(0, x);
  view.setBigUint64(0, view.getBigUint64(0) + 1n);
  return view.getFloat64(0);
}

const randomDouble = fc.double({ noNaN: true, noDefaultInfinity: true });

describe('parseDecimal: the strict decimal syntax, correctly rounded (Number() as reference)', () => {
  it('fixed cases: syntax edges, exact powers, the ends of the double range, halfway points', () => {
    const cases = [
      '',
      '.',
      '+',
      '-',
      '1',
      '-0',
      '+0',
      '0',
      '00',
      '1.',
      '.5',
      '+.5',
      '-.5',
      '1e',
      '1e+',
      '1e5',
      '1.e5',
      '.e5',
      '1E-3',
      '9007199254740993',
      '9007199254740992',
      '9007199254740991',
      '1.7976931348623157e308',
      '1.7976931348623159e308',
      '2e308',
      '5e-324',
      '2e-324',
      '1e-320',
      '2.2250738585072014e-308',
      '2.2250738585072011e-308',
      '123456789012345678901234',
      '0.1',
      '1e22',
      '1e23',
      '123456789e30',
      '1e-22',
      '1e-23',
      '1.0000000000000002',
      '1.00000000000000011102230246251565404236316680908203125',
      '1e0000000000000000000005',
      '1e-0000000000000000005',
      '1,2',
      '1.2.3',
      '--1',
      '0x10',
      'Infinity',
      'NaN',
      '1e5x',
      '1 2',
      '12345678901234567',
      '1234567890123456789',
      '12345678901234567890',
      '0.000000000000000000000000000001234567890123456789',
      '1.234567E-09',
      '-4.999999E+01',
      '+9.9E37',
    ];
    for (const t of cases) {
      const expected = parseNumberField(t);
      expect(Object.is(scan(t), expected), `${JSON.stringify(t)}: ${scan(t)} against ${expected}`).toBe(true);
    }
  });

  it('random doubles written shortest, with 7, 16, 17 and 18 digits, and in fixed notation', () => {
    fc.assert(
      fc.property(randomDouble, fc.integer({ min: 0, max: 12 }), (x, fixed) => {
        const forms = [String(x), x.toPrecision(7), x.toPrecision(16), x.toPrecision(17), x.toPrecision(18), x.toExponential(18)];
        if (Math.abs(x) < 1e15) forms.push(x.toFixed(fixed));
        for (const t of forms) {
          if (!Object.is(scan(t), Number(t))) return false;
        }
        return true;
      }),
      { numRuns: 20000 },
    );
  });

  it('decimals within a few units of the 19th digit of a halfway point between two doubles', () => {
    fc.assert(
      fc.property(fc.double({ min: 1e-280, max: 1e280, noNaN: true }), fc.integer({ min: 16, max: 21 }), (x, sig) => {
        const t = nearHalfway(x, sig);
        return Object.is(scan(t), Number(t));
      }),
      { numRuns: 20000 },
    );
  });
});

/** The plain definition: lines, fields, trim, regex, Number(). */
function referenceTable(text: string, file: string, minColumns = 2) {
  const raw = text.split(/\r?\n/);
  const headerAt = raw.findIndex((l) => l.trim() !== '' && !l.trim().startsWith('#'));
  if (headerAt < 0) throw new CsvError(file, undefined, undefined, 'the file is empty: expected a header row and data rows');
  const delimiter = detectDelimiter(raw[headerAt]);
  const headers = splitFields(raw[headerAt], delimiter).map((h) => h.trim());
  if (headers.length < minColumns) {
    throw new CsvError(file, headerAt + 1, undefined, `the header row has ${headers.length} column; at least ${minColumns} (x and y) are needed`);
  }
  headers.forEach((h, k) => {
    if (h === '') throw new CsvError(file, headerAt + 1, `#${k + 1}`, 'empty column name in the header row');
    if (!Number.isNaN(parseNumberField(h)))
      throw new CsvError(file, headerAt + 1, h, 'the first row looks like data; a header row with column names is required');
  });
  const columns: number[][] = headers.map(() => []);
  const lines: number[] = [];
  const firstText: ({ line: number; text: string } | undefined)[] = headers.map(() => undefined);
  for (let i = headerAt + 1; i < raw.length; i++) {
    const t = raw[i].trim();
    if (t === '' || t.startsWith('#')) continue;
    const fields = splitFields(raw[i], delimiter);
    if (fields.length !== headers.length) {
      throw new CsvError(file, i + 1, undefined, `expected ${headers.length} fields (${headers.join(', ')}), found ${fields.length}`);
    }
    fields.forEach((f, k) => {
      const v = parseNumberField(f);
      if (Number.isNaN(v) && firstText[k] === undefined) firstText[k] = { line: i + 1, text: f.trim() };
      columns[k].push(v);
    });
    lines.push(i + 1);
  }
  if (lines.length === 0) throw new CsvError(file, undefined, undefined, 'no data rows after the header');
  return { headers, columns, lines, firstText };
}

function outcome(read: () => { headers: string[]; columns: ArrayLike<number>[]; lines: ArrayLike<number>; firstText: unknown }) {
  try {
    const t = read();
    return { headers: t.headers, columns: t.columns.map((c) => Array.from(c)), lines: Array.from(t.lines), firstText: t.firstText };
  } catch (e) {
    return { error: (e as Error).message };
  }
}

const cell = fc.oneof(
  randomDouble.map(String),
  randomDouble.map((x) => x.toPrecision(17)),
  fc.integer({ min: -1000, max: 1000 }).map(String),
  fc.constantFrom('', ' ', '1.', '.5', '+3', '-0', '1e', '1E+3', 'abc', 'NaN', ' 2.5 ', '\t7\t', '"4"', '"a,b"', '"x""y"', '1e999', '\u00a01\u00a0', 'µA', '#'),
);
const lineBreak = fc.constantFrom('\n', '\r\n', '\r');
const blankOrComment = fc.constantFrom('', '   ', '\t', '# a comment', '  # indented', '\u00a0', '\u00a0# after a no-break space', '\r');

describe('parseCsvTable: bytes scanned directly, the same table (and the same errors) as the plain reader', () => {
  it('random files: numbers in every notation, text, quotes, blanks, comments, CRLF, a BOM, wrong field counts', () => {
    fc.assert(
      fc.property(
        fc.constantFrom(',', ';', '\t'),
        fc.integer({ min: 1, max: 4 }),
        fc.array(fc.tuple(fc.oneof(fc.array(cell, { minLength: 1, maxLength: 5 }), blankOrComment), lineBreak), { maxLength: 12 }),
        fc.boolean(),
        fc.boolean(),
        (sep, width, rows, bom, finalBreak) => {
          const names = ['V', 'I', 'T', 'note'].slice(0, width);
          let text = `${bom ? '\ufeff' : ''}# header follows\n${names.join(sep === ';' ? ';' : sep)}\n`;
          rows.forEach(([r, br], k) => {
            // Most rows have the right width, so the files get past the first row.
            const fields = typeof r === 'string' ? null : k % 3 === 2 ? r : names.map((_, j) => r[j % r.length]);
            text += (fields ? fields.join(sep) : r) + (k < rows.length - 1 || finalBreak ? br : '');
          });
          const file = 'random.csv';
          const expected = outcome(() => referenceTable(text, file, 1));
          const fromText = outcome(() => parseCsvTable(text, file, 1));
          const fromBytes = outcome(() => parseCsvTable(enc.encode(text), file, 1));
          expect(fromText).toEqual(expected);
          expect(fromBytes).toEqual(expected);
        },
      ),
      { numRuns: 3000 },
    );
  });

  it('errors name the file, the line and the column as before', () => {
    const msg = (text: string) => outcome(() => parseCsvTable(enc.encode(text), 'f.csv')) as { error: string };
    expect(msg('').error).toBe('f.csv: the file is empty: expected a header row and data rows');
    expect(msg('# only\n\n').error).toBe('f.csv: the file is empty: expected a header row and data rows');
    expect(msg('V\n1\n').error).toBe('f.csv, line 1: the header row has 1 column; at least 2 (x and y) are needed');
    expect(msg('V,,I\n').error).toBe("f.csv, line 1, column '#2': empty column name in the header row");
    expect(msg('#c\n0.5,1e-9\n').error).toBe("f.csv, line 2, column '0.5': the first row looks like data; a header row with column names is required");
    expect(msg('V,I\n0.1,1e-9\r\n0.2\n').error).toBe('f.csv, line 3: expected 2 fields (V, I), found 1');
    expect(msg('V,I\n0.1,1e-9,3\n').error).toBe('f.csv, line 2: expected 2 fields (V, I), found 3');
    expect(msg('V,I\n# c\n').error).toBe('f.csv: no data rows after the header');
    const t = parseCsvTable(enc.encode('V,I\n1,2\n\n3,abc \n'), 'f.csv');
    expect(t.firstText).toEqual([undefined, { line: 4, text: 'abc' }]);
    expect(Array.from(t.lines)).toEqual([2, 4]);
  });
});
