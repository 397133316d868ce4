/**
 * One journal batch as it travels over the broker: a stretch of a session's journal, every
 * sequence number from `from` to `to` accounted for (an event, a reading, or a listed hole).
 *
 * Layout (binary, so readings keep every bit and cost no number formatting):
 *   bytes 0–3   'PLB1'
 *   bytes 4–7   header length H (uint32, little-endian); 8 + H is a multiple of 8
 *   8 … 8+H     header: JSON (BatchHeader), padded with spaces
 *   then        `readings` records of 56 bytes, exactly as in readings.f64: seven little-endian
 *               doubles seq, sweep, k, t (ms), v (V), i (A), flags
 */
import type { WireEvent } from '../../protocols/wire.js';
import { RECORD_BYTES } from '../journal/journal.js';

export const BATCH_MAGIC = 'PLB1';

export interface BatchHeader {
  readonly v: 1;
  readonly station: string;
  readonly session: string;
  /** First and last sequence number covered (inclusive). */
  readonly from: number;
  readonly to: number;
  readonly readings: number;
  readonly events: readonly WireEvent[];
  /** Sequence numbers in from..to that the journal does not hold (damaged lines), if any. */
  readonly holes?: readonly number[];
  /** Sent again because a subscriber asked for it. */
  readonly replay?: boolean;
  /** Wall-clock ms when the station sent it. */
  readonly sentAt: number;
}

export class BatchError extends Error {
  readonly code = 'BAD_BATCH';
}

/**
 * Builds a batch message. `eventLines` are the events' journal lines (JSON text, as written), so
 * they are passed through without being parsed and printed again.
 */
export function encodeBatch(h: Omit<BatchHeader, 'events' | 'v'>, eventLines: readonly string[], records: Uint8Array): Buffer {
  if (records.length !== h.readings * RECORD_BYTES) throw new BatchError(`batch: ${records.length} bytes of readings for ${h.readings} readings`);
  const head = JSON.stringify({ v: 1, ...h, events: [] as never[] });
  // Splice the event lines into the empty array without re-serialising them.
  const json = `${head.slice(0, head.lastIndexOf('[]'))}[${eventLines.join(',')}]${head.slice(head.lastIndexOf('[]') + 2)}`;
  const jbytes = Buffer.from(json, 'utf8');
  const padded = Math.ceil((8 + jbytes.length) / 8) * 8 - 8;
  const out = Buffer.allocUnsafe(8 + padded + records.length);
  out.write(BATCH_MAGIC, 0, 'latin1');
  out.writeUInt32LE(padded, 4);
  jbytes.copy(out, 8);
  out.fill(0x20, 8 + jbytes.length, 8 + padded);
  out.set(records, 8 + padded);
  return out;
}

/** Reads a batch message; the records are a view into `msg` (56 bytes each). */
export function decodeBatch(msg: Buffer): { header: BatchHeader; records: Buffer } {
  if (msg.length < 8 || msg.toString('latin1', 0, 4) !== BATCH_MAGIC) throw new BatchError('not a plumbline batch (bad magic)');
  const h = msg.readUInt32LE(4);
  if (8 + h > msg.length) throw new BatchError('batch header runs past the message');
  let header: BatchHeader;
  try {
    header = JSON.parse(msg.toString('utf8', 8, 8 + h)) as BatchHeader;
  } catch (e) {
    throw new BatchError(`batch header is not JSON: ${(e as Error).message}`);
  }
  if (
    header.v !== 1 ||
    typeof header.from !== 'number' ||
    typeof header.to !== 'number' ||
    !Array.isArray(header.events) ||
    typeof header.session !== 'string'
  ) {
    throw new BatchError('batch header lacks v, from, to, session or events');
  }
  const records = msg.subarray(8 + h);
  if (records.length !== header.readings * RECORD_BYTES) throw new BatchError(`batch says ${header.readings} readings but carries ${records.length} bytes`);
  return { header, records };
}

/** The seq of record `r` in a records buffer. */
export function recordSeq(records: Buffer, r: number): number {
  return records.readDoubleLE(r * RECORD_BYTES);
}
