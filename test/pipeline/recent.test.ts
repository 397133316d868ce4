/**
 * The snapshot buffer a page gets on connect: bounded however long the run, and still holding what
 * the page draws — the session's own events, the last 100 sweeps whole, the drift points of the
 * last 2,000 sweeps, the first caution of each kind, the latest progress note, in journal order.
 */
import { describe, expect, it } from 'vitest';
import { RecentEvents } from '../../daemon/pipeline/recent.js';
import type { WireEvent } from '../../protocols/wire.js';

/** A session of `sweeps` short sweeps as the chain emits it (with rejected replies and notes). */
function* session(sweeps: number): Generator<WireEvent> {
  let seq = 0;
  const ev = (e: object) => ({ seq: ++seq, t: seq, ...e }) as unknown as WireEvent;
  yield ev({
    type: 'session',
    id: 's',
    startedAt: '',
    source: { kind: 'simulator', detail: '', control: true },
    instrument: 'sim',
    plan: null,
    analysis: {},
    drift: {},
    limits: {},
  });
  yield ev({ type: 'output', on: true, confirmed: true, reason: 'run started' });
  yield ev({ type: 'caution', kind: 'output-on', message: 'terminals live' });
  for (let s = 1; s <= sweeps; s++) {
    yield ev({ type: 'sweep-start', sweep: s, planned: 3, label: '' });
    for (let k = 0; k < 3; k++) yield ev({ type: 'reading', sweep: s, k, v: k, i: 1e-9 * k, flags: 0 });
    yield ev({ type: 'progress', sweep: s, sweeps, point: 3, points: 3, eta: null });
    if (s % 3 === 0) yield ev({ type: 'caution', kind: 'compliance', sweep: s, message: 'at compliance' });
    if (s % 7 === 0) yield ev({ type: 'rejected', raw: 'garbage', reason: 'not a number' });
    yield ev({ type: 'sweep-end', sweep: s, points: 3, complete: true });
    yield ev({ type: 'fit', sweep: s, final: true, fit: null });
    yield ev({ type: 'drift', sweep: s, parameter: 'p', value: 1, method: 'ewma' });
    if (s === 10) yield ev({ type: 'annotation', text: 'probe re-landed', tags: [], sweep: 10, source: 'test' });
    if (s === 20) yield ev({ type: 'decision', action: 'warn', reason: 'drift warning', sweep: 20 });
  }
}

function fill(sweeps: number): { recent: RecentEvents; last: number } {
  const recent = new RecentEvents();
  let last = 0;
  for (const e of session(sweeps)) {
    recent.add(e);
    last = e.seq;
  }
  return { recent, last };
}

describe('the snapshot buffer (RecentEvents)', () => {
  it('stays bounded: over 50,000 sweeps it never holds more than twice what it keeps', () => {
    const recent = new RecentEvents();
    let most = 0;
    let n = 0;
    for (const e of session(50_000)) {
      recent.add(e);
      if (++n % 997 === 0) most = Math.max(most, recent.nonReadings().length);
    }
    // Kept: 100 sweeps × (start, end, fit, a third of a caution), 2,000 drift points, 1,000
    // rejected replies, the session's own; up to twice that between two compactions.
    expect(most).toBeLessThan(2 * (100 * 4 + 2_000 + 1_000 + 10));
    expect(most).toBeGreaterThan(100 * 3 + 2_000);
  });

  it("keeps the session's own events, the last 100 sweeps whole, 2,000 drift points, the first caution of each kind and the latest progress, in order", () => {
    const sweeps = 20_000;
    const { recent, last } = fill(sweeps);
    const ev = recent.nonReadings();
    expect(ev.map((e) => e.seq)).toEqual([...ev.map((e) => e.seq)].sort((x, y) => x - y));
    const of = (type: string) => ev.filter((e) => e.type === type);
    expect(of('session')).toHaveLength(1);
    expect(of('output')).toHaveLength(1);
    expect(of('annotation')).toHaveLength(1);
    expect(of('decision')).toHaveLength(1);
    // The last 100 sweeps whole; nothing per sweep from long before.
    for (const type of ['sweep-start', 'sweep-end', 'fit']) {
      const s = of(type).map((e) => (e as { sweep: number }).sweep);
      for (let k = sweeps - 99; k <= sweeps; k++) expect(s, `${type} of sweep ${k}`).toContain(k);
      expect(Math.min(...s), type).toBeGreaterThan(sweeps - 2 * 100 * 4);
    }
    const drift = of('drift').map((e) => (e as { sweep: number }).sweep);
    for (let k = sweeps - 1_999; k <= sweeps; k++) expect(drift.includes(k), `drift of sweep ${k}`).toBe(true);
    // Cautions: the session's, the first of each kind, and those of the kept sweeps.
    const cautions = of('caution') as { kind: string; sweep?: number }[];
    expect(cautions.filter((c) => c.kind === 'output-on')).toHaveLength(1);
    expect(cautions.find((c) => c.kind === 'compliance')?.sweep).toBe(3);
    expect(cautions.filter((c) => c.kind === 'compliance' && (c.sweep as number) > sweeps - 100)).toHaveLength(33);
    // One progress note: the latest.
    const progress = of('progress') as { sweep: number }[];
    expect(progress).toHaveLength(1);
    expect(progress[0].sweep).toBe(sweeps);
    expect(of('rejected').length).toBeLessThanOrEqual(2_000);
    expect(recent.lastSeq).toBe(last);
    // Readings: the ring holds the most recent ones.
    expect(recent.readings().at(-1)?.[1]).toBe(sweeps);
  });
});
