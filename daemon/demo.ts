/**
 * The fit demo: an invented device (our own scenario, "wafer PL-07, site C3": a 7 nm thermal oxide
 * on silicon, 100 µm × 100 µm gate) swept from 0 to 9 V, its current computed by the Fowler–Nordheim
 * forward model plus a leakage floor and seeded instrument noise. Ranks the mechanisms and fits
 * Fowler–Nordheim with an automatic window.
 */
import { analyze } from './analysis/analyze.js';
import { fowlerNordheim } from './analysis/mechanisms/fowler-nordheim.js';
import { rankMechanisms } from './analysis/ranking.js';
import { formatFit, formatRanking } from './cli/format.js';

/** Small seeded generator (mulberry32) and a Box–Muller normal deviate. */
export function seededNormal(seed: number): () => number {
  let s = seed >>> 0;
  const uniform = () => {
    s = (s + 0x6d2b79f5) >>> 0;
    let t = s;
    t = Math.imul(t ^ (t >>> 15), t | 1);
    t ^= t + Math.imul(t ^ (t >>> 7), t | 61);
    return ((t ^ (t >>> 14)) >>> 0) / 4294967296;
  };
  return () => Math.sqrt(-2 * Math.log(1 - uniform())) * Math.cos(2 * Math.PI * uniform());
}

export function demoSweep(): { v: Float64Array; i: Float64Array; inputs: { thickness: number; area: number; massRatio: number } } {
  const inputs = { thickness: 7e-9, area: 1e-8, massRatio: 0.42 };
  const normal = seededNormal(7);
  const v = new Float64Array(91);
  const i = new Float64Array(91);
  for (let k = 0; k < v.length; k++) {
    v[k] = k * 0.1;
    const j = v[k] > 0 ? fowlerNordheim(v[k] / inputs.thickness, 3.1, inputs.massRatio) : 0;
    const ideal = j * inputs.area + 2e-14 * v[k];
    i[k] = ideal * (1 + 0.01 * normal()) + 5e-15 * normal();
  }
  return { v, i, inputs };
}

export function runDemo(): void {
  const { v, i, inputs } = demoSweep();
  process.stdout.write('plumbline fit demo — invented device: wafer PL-07 site C3, 7 nm oxide, 1e-8 m^2 gate\n');
  process.stdout.write('(the simulated instrument and live page replace this demo as they land)\n\n');
  process.stdout.write('Ranking of the mechanisms between 5 V and 9 V:\n');
  process.stdout.write(`${formatRanking(rankMechanisms({ x: v, y: i }, { inputs, window: { from: 5, to: 9 } }))}\n\n`);
  process.stdout.write(`${formatFit(analyze({ x: v, y: i }, { model: 'fowler-nordheim', inputs, window: 'auto' }))}\n`);
}
