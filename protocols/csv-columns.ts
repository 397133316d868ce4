/**
 * Which columns of a CSV header hold the bias, the current and the compliance flag, and the units
 * their names carry: the one set of header rules for a whole file read at once (`fit`, `rank`,
 * `solar`: daemon/cli/inputs.ts) and for lines followed as they are written (`watch`: csv-rows.ts).
 */
import { parseQuantity } from '../daemon/quantity.js';
import { CsvError, findColumn } from './csv-table.js';

/** Bias and current units with an SI prefix, as instrument files write them. */
const PREFIXED = /^[fpnuµmk]?[AV]$/;

/**
 * The scale of a bias (V) or current (A) unit with an SI prefix, by the project's quantity reader;
 * undefined for any other unit. 'µ' is read as 'u'.
 */
export function unitScale(unit: string, kind: 'voltage' | 'current'): number | undefined {
  if (!PREFIXED.test(unit) || !unit.endsWith(kind === 'voltage' ? 'V' : 'A')) return undefined;
  return parseQuantity(`1 ${unit.replace('µ', 'u')}`, kind, unit);
}

/** A header's name and unit: "Current (mA)", "I [mA]" and "I_mA" give name and unit; "current" gives the name alone. */
export function headerUnit(header: string): { name: string; unit?: string } {
  const h = header.trim();
  const br = /^(.*?)\s*[([]\s*([^()[\]]+?)\s*[)\]]$/.exec(h);
  if (br) return { name: br[1], unit: br[2] };
  const us = /^(.*?)_([A-Za-zµ]+)$/.exec(h);
  if (us && PREFIXED.test(us[2])) return { name: us[1], unit: us[2] };
  return { name: h };
}

/** The options that name the bias and current columns, for messages (`fit`: --x/--y; `watch`: --voltage/--current). */
export interface ColumnOptions {
  readonly bias: string;
  readonly current: string;
  /** The two columns in the command's words, e.g. 'x and y'. */
  readonly pair: string;
}

/**
 * The bias, current and compliance columns. Named ones are found by `findColumn`; without a name,
 * a column named as a bias (voltage_V, voltage, bias, V, with or without a unit) and one named as a
 * current (current_A, current, I), as our export and most instrument files name them, else the
 * first column and the next one; a column named `compliance`, if any.
 */
export function chooseColumns(
  headers: readonly string[],
  named: { bias?: string; current?: string },
  options: ColumnOptions,
  file: string,
): { bias: number; current: number; compliance: number } {
  const byName = (re: RegExp) => headers.findIndex((h) => re.test(headerUnit(h).name));
  const biasDefault = byName(/^(voltage|bias|V)$/i);
  const currentDefault = byName(/^(current|I)$/i);
  const bias = named.bias !== undefined ? findColumn(headers, named.bias, options.bias, file) : Math.max(biasDefault, 0);
  const current =
    named.current !== undefined
      ? findColumn(headers, named.current, options.current, file)
      : currentDefault >= 0
        ? currentDefault
        : bias === 1 && headers.length > 2
          ? 2
          : 1;
  return { bias, current, compliance: headers.findIndex((h) => /^compliance$/i.test(h)) };
}

/**
 * The factor that takes a column's values to V (bias) or A (current) from the unit in its header
 * (1 without one, or with a unit that is not a bias or current unit), and the unit read. A bias
 * column in amperes or a current column in volts is refused: the columns are swapped.
 */
export function columnScale(header: string, role: 'bias' | 'current', options: ColumnOptions, file: string): { scale: number; unit?: string } {
  const { unit } = headerUnit(header);
  if (unit === undefined) return { scale: 1 };
  const kind = role === 'bias' ? 'voltage' : 'current';
  const f = unitScale(unit, kind);
  if (f === undefined && unitScale(unit, kind === 'voltage' ? 'current' : 'voltage') !== undefined) {
    throw new CsvError(
      file,
      undefined,
      header,
      `the ${role} column is in ${unit}: are ${options.pair} swapped? name them with ${options.bias} (bias) and ${options.current} (current)`,
    );
  }
  return f === undefined ? { scale: 1 } : { scale: f, unit };
}
