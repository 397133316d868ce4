import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { LineFramer } from '../../protocols/line-framer.js';
import { parseReading, RejectCounter } from '../../protocols/reading-parser.js';
import { formatScpiNumber, parseScpiNumber } from '../../protocols/scpi-numbers.js';
import { ScpiSession } from '../../protocols/scpi-session.js';
import { duplexPair } from '../../protocols/transport.js';

async function frame(chunks: string[], maxLine = 4096, terminator: 'lf' | 'crlf' | 'cr' = 'lf'): Promise<{ lines: string[]; overlong: number }> {
  const f = new LineFramer({ maxLine, terminator });
  const lines: string[] = [];
  f.on('data', (l: string) => lines.push(l));
  for (const c of chunks) f.write(c);
  f.end();
  await new Promise((r) => f.on('end', r));
  return { lines, overlong: f.overlong };
}

describe('SCPI numbers (IEEE 488.2 NR1/NR2/NR3; SCPI 1999 vol. 1 special values)', () => {
  it('parses the three numeric forms', () => {
    expect(parseScpiNumber('-12')).toEqual({ value: -12, flag: 'ok' });
    expect(parseScpiNumber('0.0125')).toEqual({ value: 0.0125, flag: 'ok' });
    expect(parseScpiNumber(' +1.25E-02 ')).toEqual({ value: 0.0125, flag: 'ok' });
  });
  it('9.91E37 is not-a-number and ±9.9E37 is overflow, never a value', () => {
    expect(parseScpiNumber('9.91E37').flag).toBe('nan');
    expect(parseScpiNumber('+9.9E37')).toEqual({ value: Infinity, flag: 'overflow' });
    expect(parseScpiNumber('-9.9E37')).toEqual({ value: -Infinity, flag: 'overflow' });
  });
  it('rejects locale text, units and empty fields', () => {
    for (const bad of ['', '1,5', '1.0V', 'NaN', 'Infinity', '0x10', '--1']) expect(parseScpiNumber(bad).flag).toBe('malformed');
  });
  it('formats NR3 and refuses non-finite values', () => {
    expect(formatScpiNumber(0.5)).toBe('5.000000000E-1');
    expect(() => formatScpiNumber(Number.NaN)).toThrowError(RangeError);
  });
});

describe('line framing', () => {
  it('reassembles lines split across chunks and strips CR', async () => {
    const { lines } = await frame(['1.0E+00,2', '.0E-09\r\n3', '.0E+00,4.0E-09\n']);
    expect(lines).toEqual(['1.0E+00,2.0E-09', '3.0E+00,4.0E-09']);
  });
  it('discards an overlong line up to its terminator and counts it', async () => {
    const { lines, overlong } = await frame(['x'.repeat(50), 'y'.repeat(50), '\nok\n'], 64);
    expect(lines).toEqual(['ok']);
    expect(overlong).toBe(1);
  });
  it('rejects a bad maxLine with a TypeError naming the option', () => {
    expect(() => new LineFramer({ maxLine: 0 })).toThrowError(/maxLine/);
  });
});

describe('CR-terminated links', () => {
  it('splits on CR, also when CR and a following LF land in different chunks', async () => {
    expect((await frame(['1.0E0,2.0E-9\r3.0E0,', '4.0E-9\r'], 4096, 'cr')).lines).toEqual(['1.0E0,2.0E-9', '3.0E0,4.0E-9']);
    expect((await frame(['a\r', '\nb\r\n', 'c\r'], 4096, 'cr')).lines).toEqual(['a', 'b', 'c']);
  });

  it('an LF-only reply on a CR link is one overlong line, reported as such', async () => {
    const r = await frame([`${'x'.repeat(50)}\n`, `${'y'.repeat(50)}\n`], 64, 'cr');
    expect(r.lines).toEqual([]);
    expect(r.overlong).toBe(1);
  });
});

describe('SCPI session pacing and the priority path', () => {
  it('keeps at least commandDelayMs between messages (a slow serial parser)', async () => {
    const [a, b] = duplexPair();
    const arrivals: number[] = [];
    b.on('data', () => arrivals.push(performance.now()));
    const s = new ScpiSession(a, { commandDelayMs: 25 });
    for (let k = 0; k < 4; k++) await s.write(`:SOUR:VOLT ${k}`);
    await new Promise((r) => setTimeout(r, 20));
    expect(arrivals).toHaveLength(4);
    for (let k = 1; k < 4; k++) expect(arrivals[k] - arrivals[k - 1]).toBeGreaterThanOrEqual(24);
    s.close();
  });

  it('urgent() writes ahead of queued commands and of a pending query; cancelQueued() drops the queue', async () => {
    const [a, b] = duplexPair();
    const lines: string[] = [];
    b.setEncoding('latin1');
    b.on('data', (d: string) => lines.push(...d.split('\n').filter(Boolean)));
    const s = new ScpiSession(a, { timeoutMs: 500 });
    const pending = s.query(':READ?');
    const queued = s.write(':SOUR:VOLT 5');
    await new Promise((r) => setImmediate(r));
    s.cancelQueued('test abort');
    expect(await s.urgent([':ABOR', ':OUTP OFF'])).toBe(true);
    b.write('1.0E0,1.0E-9\n');
    expect(await pending).toBe('1.0E0,1.0E-9');
    // The queued level command is dropped when its turn comes, never written.
    await expect(queued).rejects.toThrow(/test abort/);
    await new Promise((r) => setTimeout(r, 10));
    expect(lines).toEqual([':READ?', ':ABOR', ':OUTP OFF']);
    s.close();
  });

  it('a line with no query waiting is reported as stray; a late reply after a timeout is discarded', async () => {
    const [a, b] = duplexPair();
    const s = new ScpiSession(a, { timeoutMs: 30 });
    const stray: string[] = [];
    s.onStray = (l) => stray.push(l);
    b.write('unasked\n');
    await new Promise((r) => setTimeout(r, 10));
    expect(stray).toEqual(['unasked']);
    await expect(s.query(':READ?')).rejects.toThrow(/no reply to ':READ\?' within 30 ms/);
    b.write('late reply\n');
    await new Promise((r) => setTimeout(r, 10));
    expect(stray).toEqual(['unasked']);
    expect(s.discarded).toBe(1);
    s.close();
  });
});

describe('property-based fuzzing of the reading parser and framer (fast-check)', () => {
  it('parseReading never throws on arbitrary text, and every rejection carries a reason', () => {
    const counter = new RejectCounter();
    fc.assert(
      fc.property(fc.string({ maxLength: 200 }), (s) => {
        const r = parseReading(s, ['voltage', 'current']);
        if (!r.ok) {
          expect(typeof r.reason).toBe('string');
          counter.add(r.reason);
        } else {
          expect(Number.isNaN(r.reading.v)).toBe(false);
        }
      }),
      { numRuns: 2000 },
    );
    const sum = Object.values(counter.counts).reduce((a, b) => a + (b ?? 0), 0);
    expect(sum).toBe(counter.total);
  });

  it('random bytes, huge lines and arbitrary chunk splits: framing equals splitting the whole text', async () => {
    await fc.assert(
      fc.asyncProperty(
        fc.array(fc.oneof(fc.string({ maxLength: 40 }), fc.constant('\n'), fc.constant('\r\n'), fc.string({ minLength: 100, maxLength: 300 })), {
          maxLength: 30,
        }),
        fc.array(fc.integer({ min: 1, max: 50 }), { minLength: 1, maxLength: 10 }),
        async (pieces, cuts) => {
          const text = pieces.join('');
          const chunks: string[] = [];
          let pos = 0;
          let k = 0;
          while (pos < text.length) {
            const n = cuts[k++ % cuts.length];
            chunks.push(text.slice(pos, pos + n));
            pos += n;
          }
          const max = 120;
          const got = await frame(chunks, max);
          const parts = text.split('\n');
          const expected = parts
            .filter((p, idx) => (idx < parts.length - 1 || p.length > 0) && p.length <= max)
            .map((p) => (p.endsWith('\r') ? p.slice(0, -1) : p));
          const expectedOverlong = parts.filter((p) => p.length > max).length;
          expect(got.lines).toEqual(expected);
          expect(got.overlong).toBe(expectedOverlong);
          for (const line of got.lines) parseReading(line, ['voltage', 'current']);
        },
      ),
      { numRuns: 500 },
    );
  });

  it('valid readings survive: formatted pairs parse back to 10 significant digits', () => {
    fc.assert(
      fc.property(fc.double({ min: -200, max: 200, noNaN: true }), fc.double({ min: -1, max: 1, noNaN: true }), (v, i) => {
        const r = parseReading(`${formatScpiNumber(v)},${formatScpiNumber(i)}`, ['voltage', 'current']);
        expect(r.ok).toBe(true);
        if (r.ok) {
          // NR3 with 10 significant digits: relative rounding error at most 5e-10 (plus the ulp).
          expect(Math.abs(r.reading.v - v)).toBeLessThanOrEqual(5.000001e-10 * Math.abs(v));
          expect(Math.abs(r.reading.i - i)).toBeLessThanOrEqual(5.000001e-10 * Math.abs(i));
        }
      }),
    );
  });
});
