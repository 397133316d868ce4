/**
 * Caution sentences that speak of something under way when the daemon journals them — the output
 * being turned off at a breakdown, the output to go on once more for the check after a breakdown
 * test — and how a viewer words them once the run has ended and the instrument has answered its
 * output query. The daemon builds its messages from these pieces, so the page finds them again in
 * any caution it is shown, live or read back from a journal.
 */

/** The breakdown watch's sentence while the station turns the output off (no final stop). */
export const OUTPUT_BEING_TURNED_OFF = 'The output is being turned off';

const CHECK_AFTER_HEAD = ' The output goes on once more, at the use voltage ';
const CHECK_AFTER_TAIL = ' V, for the check after the test, and off again: keep away from the fixture until the run has ended.';

/** A breakdown test's sentence that the output will go on again for the use-condition check after it (leading space). */
export function checkAfterTestSentence(useVoltage: number): string {
  return `${CHECK_AFTER_HEAD}${useVoltage}${CHECK_AFTER_TAIL}`;
}

/** How the output ended a run: the last output event, the one that asked the instrument. */
export interface OutputEnd {
  /** Whether the off command reached the transport. */
  readonly sent?: boolean | undefined;
  /** Whether the instrument answered its output query with "off". */
  readonly confirmed: boolean;
}

/** The output's end state in words (no final stop), from the instrument's answer. */
export function outputEndWords(o: OutputEnd): string {
  if (o.confirmed) return 'The output was turned off; confirmed by the instrument';
  if (o.sent === false) return 'The output off could NOT be sent and the instrument did not confirm it off: treat the terminals as live';
  return 'An output off was sent, but the instrument did NOT confirm it off: treat the terminals as live';
}

/**
 * A caution's message as it reads once the run has ended with the output in state `end`: the
 * sentences of something under way are put in the past (with the instrument's answer), the rest —
 * the breakdown itself, the lab's rules — stays word for word.
 */
export function settledCaution(message: string, end: OutputEnd): string {
  let out = message.split(`${OUTPUT_BEING_TURNED_OFF}.`).join(`${outputEndWords(end)}.`);
  for (;;) {
    const a = out.indexOf(CHECK_AFTER_HEAD);
    if (a < 0) break;
    const b = out.indexOf(CHECK_AFTER_TAIL, a);
    if (b < 0) break;
    const v = out.slice(a + CHECK_AFTER_HEAD.length, b);
    const off = outputEndWords(end);
    out = `${out.slice(0, a)} The check after the test at the use voltage ${v} V came next; the run has ended since. ${off}.${out.slice(b + CHECK_AFTER_TAIL.length)}`;
  }
  return out;
}
