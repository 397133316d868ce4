/**
 * Order statistics without a full sort: Hoare's FIND (quickselect; Hoare 1961, Algorithm 65),
 * expected O(n) against the O(n log n) of sorting a million residuals to take their median.
 * The arrays are rearranged in place. Values must not be NaN (the callers' residuals are finite);
 * an array holding NaN is sorted instead, which puts NaN last as a typed-array sort does.
 */

/**
 * Rearranges a[lo..hi] so that a[k] holds the value a sorted array would hold there, everything
 * before it ≤ a[k] and everything after it ≥ a[k]. Returns a[k].
 */
export function selectInPlace(a: Float64Array, k: number, lo = 0, hi = a.length - 1): number {
  if (k < lo || k > hi) throw new RangeError(`selectInPlace: k = ${k} outside ${lo}…${hi}`);
  for (let j = lo; j <= hi; j++) {
    if (Number.isNaN(a[j])) {
      a.subarray(lo, hi + 1).sort();
      return a[k];
    }
  }
  while (hi > lo) {
    // Median of three as the pivot: sorted or reversed input stays linear.
    const mid = (lo + hi) >> 1;
    if (a[mid] < a[lo]) swap(a, mid, lo);
    if (a[hi] < a[lo]) swap(a, hi, lo);
    if (a[hi] < a[mid]) swap(a, hi, mid);
    const pivot = a[mid];
    let i = lo;
    let j = hi;
    while (i <= j) {
      while (a[i] < pivot) i++;
      while (a[j] > pivot) j--;
      if (i <= j) {
        swap(a, i, j);
        i++;
        j--;
      }
    }
    // Now a[lo..j] ≤ pivot ≤ a[i..hi], and a[j+1..i-1] equal the pivot.
    if (k <= j) hi = j;
    else if (k >= i) lo = i;
    else return a[k];
  }
  return a[k];
}

function swap(a: Float64Array, i: number, j: number): void {
  const t = a[i];
  a[i] = a[j];
  a[j] = t;
}

/** The median (the mean of the two middle values for an even count); rearranges `a`. NaN for an empty array. */
export function medianInPlace(a: Float64Array): number {
  const n = a.length;
  if (n === 0) return Number.NaN;
  const m = n >> 1;
  const upper = selectInPlace(a, m);
  if (n % 2) return upper;
  // After the selection every value below index m is ≤ a[m]: the lower middle is their largest.
  let lower = a[0];
  for (let j = 1; j < m; j++) if (a[j] > lower) lower = a[j];
  return 0.5 * (lower + upper);
}
