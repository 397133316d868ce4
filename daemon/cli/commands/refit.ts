/**
 * `plumbline refit`: every sweep of a session analysed again (the journal is not changed).
 */
import { resolve } from 'node:path';
import type { Command } from 'commander';
import { sessionDirs, withArchiveSessions, type ArchiveSessionOptions } from '../lab.js';
import { formatInputs } from '../../../protocols/display-units.js';
import { formatSweepFit, notPlausibleLine } from '../format.js';
import { formatNumber } from '../../../protocols/number-format.js';

/** "sweep 2", "sweeps 1, 2, 3", "sweeps 1, 2, 3, 4, 5 … 40". */
function sweepList(list: readonly number[]): string {
  return `sweep${list.length > 1 ? 's' : ''} ${list.length > 6 ? `${list.slice(0, 5).join(', ')} … ${list.at(-1)}` : list.join(', ')}`;
}

export function registerRefit(program: Command): void {
  withArchiveSessions(
    program
      .command('refit')
      .description('analyse every sweep of a session again with another model, window or inputs (the journal is not changed; results go to a new file)')
      .argument('[session-dir]', 'a session folder')
      .option('--model <id>', "model (default: the session's)")
      .option('--from <V>', 'fit window start, V')
      .option('--to <V>', 'fit window end, V')
      .option('--auto', 'choose the fit window automatically')
      .option('--thickness <q>', 'film thickness, e.g. "8 nm"')
      .option('--area <q>', 'device area, e.g. "1e-4 cm^2"')
      .option('--temperature <q>', 'temperature, e.g. "300 K"')
      .option('--mass-ratio <r>', 'tunnelling effective-mass ratio m*/m0')
      .option('--permittivity <r>', 'relative permittivity (static)')
      .option('--refractive-index <r>', 'refractive index')
      .option('--flat-band <q>', 'flat-band voltage, e.g. "-0.9 V"')
      .option('--richardson <q>', 'Richardson constant, e.g. "120 A/(cm^2 K^2)"')
      .option('--out <file>', 'results file (default SESSION_DIR/refit-MODEL-TIME.json)')
      .option('--json', 'print one JSON object'),
    false,
  ).action(async (dir: string | undefined, o: Record<string, string | boolean | undefined>) => {
    const [d] = await sessionDirs(dir, o as ArchiveSessionOptions, true);
    const { refitSession } = await import('../../journal/refit.js');
    const { readInputs, readWindow, WINDOW_OPTIONS } = await import('../inputs.js');
    const inputs = Object.fromEntries(Object.entries(readInputs(o as never)).filter(([, v]) => v !== undefined));
    const window = o.auto || o.from !== undefined || o.to !== undefined ? readWindow(o as never) : undefined;
    const r = refitSession(
      d,
      { model: o.model as string | undefined, window, inputs },
      o.out !== undefined ? resolve(String(o.out)) : undefined,
      WINDOW_OPTIONS,
    );
    if (o.json) {
      process.stdout.write(`${JSON.stringify(r)}\n`);
      return;
    }
    process.stdout.write(`refit of ${r.sweeps.length} sweep(s) with model ${r.request.model} → ${r.file}\n`);
    // Which inputs were used, and from where (the options, the session's settings, or defaults).
    const words = { given: 'given', session: "the session's", default: 'assumed', note: "from the sweep's note" } as const;
    const used = Object.entries(r.inputs)
      .filter(([k]) => k !== 'temperature')
      .map(([k, v]) => `${formatInputs({ [k]: v.value })} (${words[v.source]})`);
    // The temperature with its value, per source: "300 K assumed for 8 sweeps"; notes may give
    // each sweep its own, shown as their range.
    const said = { given: 'given', session: 'from the session', default: 'assumed', note: "from the sweeps' notes" } as const;
    const temps = new Map<keyof typeof said, number[]>();
    for (const sw of r.sweeps) temps.set(sw.temperature.source, [...(temps.get(sw.temperature.source) ?? []), sw.temperature.value]);
    if ('temperature' in r.inputs || [...temps.keys()].some((k) => k !== 'default')) {
      const kelvin = (values: number[]) => {
        const lo = Math.min(...values);
        const hi = Math.max(...values);
        return lo === hi ? `${formatNumber(lo, 5)} K` : `${formatNumber(lo, 5)}–${formatNumber(hi, 5)} K`;
      };
      const count = (n: number) => `${n} sweep${n === 1 ? '' : 's'}`;
      used.push(`temperature ${[...temps.entries()].map(([src, values]) => `${kelvin(values)} ${said[src]} for ${count(values.length)}`).join(', ')}`);
    }
    if (used.length) process.stdout.write(`inputs: ${used.join('; ')}\n`);
    // Each sweep as `run` prints its fits (formatSweepFit: the NOT PLAUSIBLE mark included).
    for (const sw of r.sweeps) {
      const label = `  sweep ${String(sw.sweep).padStart(3)}`;
      const p = sw.fit ? formatSweepFit(label, sw.fit) : `${label}: no fit: ${sw.error}`;
      const t = sw.temperature.source === 'note' ? ` (T = ${formatNumber(sw.temperature.value, 5)} K from its note)` : '';
      process.stdout.write(`${p}${t}\n`);
    }
    // Warnings once each, with the sweeps they concern.
    const warned = new Map<string, number[]>();
    for (const sw of r.sweeps) for (const w of sw.warnings) warned.set(w, [...(warned.get(w) ?? []), sw.sweep]);
    for (const [w, list] of warned) process.stdout.write(`warning (${sweepList(list)}): ${w}\n`);
    // As fit's last line: the sweeps whose parameters do not describe the device, the warnings above saying why.
    const implausible = r.sweeps.filter((sw) => sw.fit && !sw.fit.plausible).map((sw) => sw.sweep);
    if (implausible.length) process.stdout.write(`${notPlausibleLine(sweepList(implausible))}\n`);
  });
}
