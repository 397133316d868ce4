/**
 * `plumbline tseries`: an Arrhenius plot of a fitted quantity across sweeps at several temperatures.
 */
import { resolve } from 'node:path';
import type { Command } from 'commander';
import { formatParameterText } from '../../../protocols/display-units.js';
import { formatNumber } from '../../../protocols/number-format.js';
import { UsageError } from '../usage.js';

export function registerTseries(program: Command): void {
  program
    .command('tseries')
    .description('Arrhenius plot of a fitted quantity across sweeps at several temperatures (trap depth, barrier, activation energy)')
    .argument('<session-dir>', 'a session folder')
    .option('--model <id>', "model fitted to each sweep (default: the session's)")
    .option('--quantity <q>', "intercept (the line's, a logarithm) or the name of a positive fitted parameter", 'intercept')
    .option('--temperatures <list>', 'temperature of each sweep in order, in K, comma separated (default: from notes "T = 350 K")')
    .option('--json', 'print one JSON object')
    .action(async (dir: string, o: { model?: string; quantity: string; temperatures?: string; json?: boolean }) => {
      const { temperatureSeries } = await import('../../journal/tseries.js');
      let temperatures: number[] | undefined;
      if (o.temperatures !== undefined) {
        temperatures = o.temperatures.split(',').map((t) => Number(t.trim().replace(/\s*K$/i, '')));
        const bad = temperatures.findIndex((t) => !(t > 0));
        if (bad >= 0) throw new UsageError(`--temperatures: entry ${bad + 1} ('${o.temperatures.split(',')[bad].trim()}') is not a temperature in K`);
      }
      const r = temperatureSeries(resolve(dir), { model: o.model, quantity: o.quantity, temperatures });
      if (o.json) {
        process.stdout.write(`${JSON.stringify(r)}\n`);
        return;
      }
      process.stdout.write(`Arrhenius plot of the ${r.model} ${r.quantity} over ${r.points.length} sweep(s)\n`);
      for (const p of r.points)
        process.stdout.write(
          `  sweep ${String(p.sweep).padStart(3)}  T = ${formatNumber(p.temperature, 5)} K  ${r.quantity} ${formatParameterText({ value: p.value, stdErr: p.stdErr, unit: '' })}\n`,
        );
      for (const k of r.skipped) process.stdout.write(`  skipped sweep ${k.sweep}: ${k.reason}\n`);
      const e = r.result.activationEnergy;
      process.stdout.write(
        `activation energy ${formatParameterText({ value: e.value, stdErr: e.stdErr, unit: 'eV' })} — ${r.meaning}${r.plausible ? '' : ' (NOT plausible)'}\n`,
      );
      for (const w of r.warnings) process.stdout.write(`warning: ${w}\n`);
    });
}
