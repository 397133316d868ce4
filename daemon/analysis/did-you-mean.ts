/**
 * "Did you mean …?" for a name a person typed that is not known (a scenario, a plan or config
 * field): the one place the close-match rule lives, so every message suggests alike.
 */

/** Edit distance (Levenshtein: insertions, deletions, substitutions), letters compared case-blind. */
export function editDistance(a: string, b: string): number {
  const d = Array.from({ length: b.length + 1 }, (_, j) => j);
  for (let i = 1; i <= a.length; i++) {
    let prev = d[0];
    d[0] = i;
    for (let j = 1; j <= b.length; j++) {
      const t = d[j];
      d[j] = Math.min(d[j] + 1, d[j - 1] + 1, prev + (a[i - 1].toLowerCase() === b[j - 1].toLowerCase() ? 0 : 1));
      prev = t;
    }
  }
  return d[b.length];
}

/**
 * The known name a typed one most likely meant, or undefined: the nearest within an edit distance
 * of 2 (and fewer edits than the typed name has letters, so a short unrelated name is not offered),
 * else the one known name that the typed one begins or that begins the typed one (three letters at
 * least; several such names suggest none). Ties go to the first in `known`.
 */
export function closestName(typed: string, known: readonly string[]): string | undefined {
  let best: { name: string; d: number } | undefined;
  for (const name of known) {
    const d = editDistance(typed, name);
    if (d <= 2 && d < typed.length && (best === undefined || d < best.d)) best = { name, d };
  }
  if (best) return best.name;
  const t = typed.toLowerCase();
  if (t.length < 3) return undefined;
  const prefixed = known.filter((name) => {
    const n = name.toLowerCase();
    return n.startsWith(t) || t.startsWith(n);
  });
  return prefixed.length === 1 ? prefixed[0] : undefined;
}

/** " (did you mean 'x'?)" for a close known name, else '' — to append to a message naming `typed`. */
export function didYouMean(typed: string, known: readonly string[]): string {
  const c = closestName(typed, known);
  return c === undefined ? '' : ` (did you mean '${c}'?)`;
}
