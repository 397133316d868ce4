/** The close-match rule behind every "did you mean": edit distance ≤ 2, else one shared prefix. */
import { describe, expect, it } from 'vitest';
import { closestName, didYouMean, editDistance } from '../../daemon/analysis/did-you-mean.js';

describe('did you mean', () => {
  it('edit distance counts insertions, deletions and substitutions', () => {
    // Levenshtein, Soviet Physics Doklady 10 (1966) 707; kitten → sitting takes 3 edits, the usual textbook example.
    expect(editDistance('kitten', 'sitting')).toBe(3);
    expect(editDistance('', 'abc')).toBe(3);
    expect(editDistance('points', 'points')).toBe(0);
    expect(editDistance('Points', 'points')).toBe(0);
  });

  it('offers the nearest name within two edits', () => {
    const scenarios = ['oxide-breakdown', 'oxide-fn-trapping', 'oxide-fn', 'oxide-tat', 'si-diode'];
    expect(closestName('oxide-fnn', scenarios)).toBe('oxide-fn');
    expect(closestName('si-dioed', scenarios)).toBe('si-diode');
    expect(closestName('ponts', ['start', 'stop', 'points', 'compliance'])).toBe('points');
    expect(didYouMean('ponts', ['start', 'stop', 'points'])).toBe(" (did you mean 'points'?)");
  });

  it('offers the one name sharing a prefix with the typed one, and none when several do or the name is short', () => {
    expect(closestName('compl', ['start', 'stop', 'compliance'])).toBe('compliance');
    expect(closestName('oxide-fn-trappingx2', ['oxide-fn', 'oxide-fn-trapping'])).toBe('oxide-fn-trapping');
    expect(closestName('oxide', ['oxide-fn', 'oxide-tat', 'si-diode'])).toBeUndefined();
    expect(closestName('ab', ['x', 'y', 'dual'])).toBeUndefined();
    expect(closestName('wavelength', ['start', 'stop', 'points'])).toBeUndefined();
    expect(didYouMean('wavelength', ['start'])).toBe('');
  });
});
