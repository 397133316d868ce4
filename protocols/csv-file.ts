/** A CSV table read from a file's bytes (no string of the whole file is made). */
import { readFileSync } from 'node:fs';
import { CsvError, type CsvTable, parseCsvTable } from './csv-table.js';
import { fileProblem } from './file-problem.js';

/** Reads and parses a CSV file; an unreadable file is a CsvError naming it. */
export function readCsvTable(file: string, minColumns = 2): CsvTable {
  let bytes: Uint8Array;
  try {
    bytes = readFileSync(file);
  } catch (e) {
    throw new CsvError(file, undefined, undefined, fileProblem(file, e));
  }
  return parseCsvTable(bytes, file, minColumns);
}
