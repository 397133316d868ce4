/** Small dense matrices (a handful of rows): what the fits and the adaptive planner invert. */

/** Inverse of a small matrix (Gauss–Jordan); undefined when singular. */
export function invertSmall(a: number[][]): number[][] | undefined {
  const n = a.length;
  const m = a.map((r, k) => [...r, ...Array.from({ length: n }, (_x, j) => (j === k ? 1 : 0))]);
  for (let col = 0; col < n; col++) {
    let piv = col;
    for (let r = col + 1; r < n; r++) if (Math.abs(m[r][col]) > Math.abs(m[piv][col])) piv = r;
    if (!(Math.abs(m[piv][col]) > 0)) return undefined;
    [m[col], m[piv]] = [m[piv], m[col]];
    const p = m[col][col];
    for (let j = 0; j < 2 * n; j++) m[col][j] /= p;
    for (let r = 0; r < n; r++) {
      if (r === col) continue;
      const f = m[r][col];
      for (let j = 0; j < 2 * n; j++) m[r][j] -= f * m[col][j];
    }
  }
  return m.map((r) => r.slice(n));
}
