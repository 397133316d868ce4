/**
 * The README's description of readings.f64 lists every flag bit a journaled reading can carry, as
 * FLAG in protocols/wire.ts defines them (a bit added there and not documented fails here), and no
 * bit that FLAG does not have.
 */
import { readFileSync } from 'node:fs';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { FLAG } from '../../protocols/wire.js';
import { PROJECT_ROOT } from '../helpers/reference.js';

describe('README: the reading flags', () => {
  it('lists every bit of FLAG, and only those', () => {
    const readme = readFileSync(join(PROJECT_ROOT, 'README.md'), 'utf8').replace(/\s+/g, ' ');
    const start = readme.indexOf('The flags are a sum of bits');
    expect(start, 'the sentence on readings.f64 flags').toBeGreaterThan(0);
    const end = readme.indexOf('An over-range value is stored', start);
    expect(end).toBeGreaterThan(start);
    const text = readme.slice(start, end);
    // "1 at compliance, 2 current over range, …": a number followed by its words.
    const listed = [...text.matchAll(/(?:^|[:,] )(\d+) [a-z]/g)].map((m) => Number(m[1])).sort((a, b) => a - b);
    const bits = Object.values(FLAG).sort((a, b) => a - b);
    expect(listed).toEqual(bits);
    // Each is a single bit, so a reading's flags are their sum.
    for (const b of bits) expect(b & (b - 1)).toBe(0);
  });
});
