/**
 * Turns one response line into a reading: fields separated by commas in a configurable order
 * (e.g. ["voltage", "current"], or ["current", "voltage", "time", "status"]). Never throws: a line
 * it cannot use is rejected with a reason, and the caller counts the reasons.
 */
import { parseScpiNumber } from './scpi-numbers.js';

export type ReadingField = 'voltage' | 'current' | 'time' | 'status' | 'ignore';

export interface Reading {
  readonly v: number;
  readonly i: number;
  /** Instrument time stamp if the dialect reports one, s. */
  readonly t?: number;
  /** Status word if reported. */
  readonly status?: number;
  /** Set when the current field was the SCPI overflow value (the reading is then ±Infinity). */
  readonly overflow: boolean;
  /** Set when the voltage field was the SCPI overflow value (the bias is then ±Infinity). */
  readonly voltageOverflow: boolean;
}

export type RejectReason = 'empty' | 'too long' | 'field count' | 'not a number' | 'not-a-number value';

/** Plain words for each reason, for cautions and the journal. */
export const REJECT_MEANING: Record<RejectReason, string> = {
  empty: 'an empty reply',
  'too long': 'a reply longer than the parser accepts',
  'field count': 'a reply with the wrong number of comma-separated fields',
  'not a number': 'a field that is not a number',
  'not-a-number value': "the instrument's not-a-number value (9.91E37)",
};

export type ParseResult = { ok: true; reading: Reading } | { ok: false; reason: RejectReason };

export const MAX_LINE = 4096;

export function parseReading(line: string, fields: readonly ReadingField[]): ParseResult {
  if (line.length > MAX_LINE) return { ok: false, reason: 'too long' };
  const t = line.trim();
  if (t.length === 0) return { ok: false, reason: 'empty' };
  const parts = t.split(',');
  if (parts.length !== fields.length) return { ok: false, reason: 'field count' };
  let v = Number.NaN;
  let i = Number.NaN;
  let time: number | undefined;
  let status: number | undefined;
  let overflow = false;
  let voltageOverflow = false;
  for (let k = 0; k < fields.length; k++) {
    const f = fields[k];
    if (f === 'ignore') continue;
    const n = parseScpiNumber(parts[k]);
    if (n.flag === 'malformed') return { ok: false, reason: 'not a number' };
    if (n.flag === 'nan') return { ok: false, reason: 'not-a-number value' };
    if (f === 'voltage') {
      v = n.value;
      voltageOverflow = n.flag === 'overflow';
    } else if (f === 'current') {
      i = n.value;
      overflow = n.flag === 'overflow';
    } else if (f === 'time') time = n.value;
    else if (f === 'status') status = n.value;
  }
  return { ok: true, reading: { v, i, t: time, status, overflow, voltageOverflow } };
}

/** Counts rejections by reason (the fuzz test and the pipeline use it). */
export class RejectCounter {
  readonly counts: Partial<Record<RejectReason, number>> = {};
  total = 0;
  add(reason: RejectReason): void {
    this.counts[reason] = (this.counts[reason] ?? 0) + 1;
    this.total++;
  }
}
