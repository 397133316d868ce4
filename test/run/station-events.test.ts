/**
 * One event stream from the live chain to every subscriber, outliving sessions: a subscriber that
 * throws on every event (a broken page connection, a bad plug-in) neither stops nor slows the run,
 * the output still goes off at the end, and the next session's events arrive on the same stream.
 */
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { parseConfig } from '../../daemon/run/config.js';
import { Station } from '../../daemon/run/station.js';
import type { WireEvent } from '../../protocols/wire.js';
import { tempDir } from '../helpers/daemon.js';

describe("the station's event stream", () => {
  it('a throwing subscriber does not reach the run; two sessions arrive on one stream', async () => {
    const st = new Station(
      parseConfig(
        {
          instrument: { kind: 'simulator', scenario: 'oxide-fn', realTime: false, seed: 1 },
          limits: { maxVoltage: 12, maxCompliance: 2e-3, maxPower: 1.5e-2, rampDelay: 0, rampStep: 2 },
          drift: { enabled: false },
        },
        'test',
      ),
      join(tempDir(), 'data'),
    );
    let thrown = 0;
    st.events$.subscribe(() => {
      thrown++;
      throw new Error('a subscriber that always fails');
    });
    const seen: WireEvent[] = [];
    st.events$.subscribe((e) => seen.push(e));
    for (let k = 0; k < 2; k++) {
      const h = await st.startRun({ plan: { start: 0, stop: 9, points: 10, compliance: 1e-3 } });
      const r = await h.done;
      expect(r.outcome).toBe('completed');
      expect(r.outputOffConfirmed).toBe(true);
    }
    expect(st.simulator?.output).toBe(false);
    expect(thrown).toBe(seen.length);
    expect(seen.filter((e) => e.type === 'session')).toHaveLength(2);
    expect(seen.filter((e) => e.type === 'reading')).toHaveLength(20);
    // The snapshot holds the second session's events.
    expect(st.snapshot().events.filter((e) => e.type === 'session')).toHaveLength(1);
  });
});
