/**
 * Colours shared by the page and the offline report (one place): a viridis-like sequential ramp for
 * sweep order or temperature (colour-blind safe; van der Walt & Smith's matplotlib colormap), and the
 * Okabe–Ito qualitative palette for categories. Every colour cue gets a second one (marker, dash, text).
 */
export const VIRIDIS = ['#440154', '#482878', '#3e4989', '#31688e', '#26828e', '#1f9e89', '#35b779', '#6ece58', '#b5de2b', '#fde725'] as const;

export const OKABE_ITO = {
  orange: '#E69F00',
  sky: '#56B4E9',
  green: '#009E73',
  yellow: '#F0E442',
  blue: '#0072B2',
  vermillion: '#D55E00',
  purple: '#CC79A7',
  black: '#000000',
} as const;

function rgb(h: string): number[] {
  return [1, 3, 5].map((k) => Number.parseInt(h.slice(k, k + 2), 16));
}

/** The sequential ramp at t in [0, 1], interpolated between its anchors. */
export function sequential(t: number): string {
  const x = Math.min(1, Math.max(0, t)) * (VIRIDIS.length - 1);
  const a = Math.floor(x);
  const b = Math.min(VIRIDIS.length - 1, a + 1);
  const f = x - a;
  const pa = rgb(VIRIDIS[a]);
  const pb = rgb(VIRIDIS[b]);
  const c = pa.map((v, k) => Math.round(v + (pb[k] - v) * f));
  return `rgb(${c[0]},${c[1]},${c[2]})`;
}

/**
 * The colour of sweep k of n on a chart of sweeps: the sequential ramp from its dark end to 85 %
 * of the way (a green-yellow), so the latest sweep, the one a person looks for, is never the pale
 * yellow end that nearly vanishes on a white plot.
 */
export function sweepColour(k: number, n: number): string {
  return sequential(0.85 * (n > 1 ? k / (n - 1) : 1));
}
