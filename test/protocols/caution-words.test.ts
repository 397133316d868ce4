/**
 * Cautions that speak of something under way, read once the run has ended: in the past, with the
 * instrument's answer to its output query, and never claiming more than that answer.
 */
import { describe, expect, it } from 'vitest';
import { checkAfterTestSentence, OUTPUT_BEING_TURNED_OFF, settledCaution } from '../../protocols/caution-words.js';

const LIVE = `Breakdown: current jump ×40 at 8.8 V. ${OUTPUT_BEING_TURNED_OFF}. Treat the device as broken; follow your lab's rules before touching the fixture.`;
const TEST = `Breakdown (current-jump): current jump. The output was turned off (the instrument confirms it). The device is destroyed.${checkAfterTestSentence(1.5)} Follow your lab's rules before touching the fixture.`;

describe('a caution after the run has ended', () => {
  it('confirmed off: the sentences under way are in the past; the rest, the lab rules included, word for word', () => {
    expect(settledCaution(LIVE, { sent: true, confirmed: true })).toBe(
      "Breakdown: current jump ×40 at 8.8 V. The output was turned off; confirmed by the instrument. Treat the device as broken; follow your lab's rules before touching the fixture.",
    );
    expect(settledCaution(TEST, { sent: true, confirmed: true })).toBe(
      "Breakdown (current-jump): current jump. The output was turned off (the instrument confirms it). The device is destroyed. The check after the test at the use voltage 1.5 V came next; the run has ended since. The output was turned off; confirmed by the instrument. Follow your lab's rules before touching the fixture.",
    );
  });

  it('not confirmed: says so and that the terminals are live, never that the output is off', () => {
    for (const end of [
      { sent: true, confirmed: false },
      { sent: false, confirmed: false },
    ]) {
      const t = settledCaution(LIVE, end);
      expect(t).not.toMatch(/being turned off|was turned off/);
      expect(t).toMatch(/did not confirm it off: treat the terminals as live\./i);
    }
  });

  it('a message with neither sentence is left as it is', () => {
    const m = 'Compliance reached at 9 V: the instrument no longer holds the programmed bias.';
    expect(settledCaution(m, { confirmed: true })).toBe(m);
  });
});
