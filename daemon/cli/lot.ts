/**
 * `plumbline lot SESSION_DIR... --out FILE.html`: one report across devices (parameters per site,
 * distributions, wafer map, Weibull plot, outliers, cautions). Reading goes through a LotSource
 * (session folders here), with each session's summary cached beside its journal.
 */
import { resolve } from 'node:path';
import type { Command } from 'commander';
import { readConfidence } from './weibull.js';
import { RESULT_QUANTITIES, resultQuantity, TEST_KINDS } from '../../protocols/device-results.js';
import { UsageError } from './usage.js';
import { archiveLot, withArchiveSelection, type ArchiveSelectionOptions } from './lab.js';

interface LotCliOptions extends ArchiveSelectionOptions {
  out?: string;
  map?: string;
  quantity?: string;
  test?: string;
  area?: string;
  confidence: string;
  cache: boolean;
  json?: boolean;
}

export function registerLot(program: Command): void {
  withArchiveSelection(
    program
      .command('lot')
      .description(
        'a self-contained HTML report across devices: fitted parameters by site, distributions, wafer map, Weibull plot of breakdown results, outliers, cautions',
      )
      .argument('[session-dir...]', 'session folders, or data folders whose session folders are all taken (or --postgres with a selection)')
      .option('--out <file>', 'HTML file to write (default lot.html in the current folder)')
      .option(
        '--map <parameter>',
        'parameter for the wafer map (a fitted parameter such as barrierHeight, or field | voltage | charge | time); default: the breakdown field, else the first parameter',
      )
      .option(
        '--quantity <name>',
        'breakdown quantity for the Weibull plot: field | voltage | charge | time (default: time for constant-voltage stress, charge for constant-current stress, field for ramps)',
      )
      .option(
        '--test <kind>',
        'the kind of test whose results the Weibull plot takes (voltage-ramp | current-ramp | constant-voltage | constant-current, optionally /positive or /negative), or all to pool them; needed when the lot holds several kinds or both polarities',
      )
      .option('--area <q>', 'reference area for the Weibull scale when devices differ, e.g. "1e-4 cm^2"')
      .option('--confidence <c>', 'two-sided confidence of the Weibull bounds', '0.9')
      .option('--no-cache', 'read every journal again instead of the cached summaries')
      .option('--json', 'print one JSON object (devices, parameter statistics, outliers, Weibull fit) as well as writing the report'),
  ).action(async (dirs: string[], o: LotCliOptions) => {
    const { FolderLot, LotRequestError } = await import('../journal/lot.js');
    const { formatQuantity } = await import('../../protocols/display-units.js');
    const { writeLotReport } = await import('../journal/lot-report.js');
    const { parseQuantity } = await import('../quantity.js');
    const area = o.area !== undefined ? parseQuantity(o.area, 'area', '--area') : undefined;
    (await import('./inputs.js')).bareCheck(o.area, area, '--area', 'area', 'cm^2');
    const source = (await archiveLot(o, dirs)) ?? new FolderLot(dirs, { cache: o.cache });
    const file = resolve(o.out ?? 'lot.html');
    const t0 = performance.now();
    if (o.test !== undefined && o.test !== 'all' && !(TEST_KINDS as readonly string[]).includes(o.test.split('/')[0]))
      throw new UsageError(`--test '${o.test}': expected one of ${TEST_KINDS.join(', ')} (optionally /positive or /negative), or all`);
    if (o.quantity !== undefined && !resultQuantity(o.quantity))
      throw new UsageError(`--quantity '${o.quantity}': expected ${Object.keys(RESULT_QUANTITIES).join(' | ')}`);
    let a: Awaited<ReturnType<typeof writeLotReport>>;
    try {
      a = await writeLotReport(source, file, { map: o.map, quantity: o.quantity, test: o.test, area, confidence: readConfidence(o.confidence) });
    } catch (e) {
      if (e instanceof LotRequestError) throw new UsageError(e.message);
      throw e;
    }
    if (o.json) {
      const { sample: _sample, ...rest } = a;
      process.stdout.write(`${JSON.stringify({ file, ...rest })}\n`);
      return;
    }
    const outliers = a.parameters.reduce((n, p) => n + p.outliers.length, 0);
    process.stdout.write(
      `lot report of ${a.rows.length} device(s) from ${new Set(a.rows.map((r) => r.session)).size} session(s) written to ${file} (${source instanceof FolderLot ? `${source.cachedCount} summaries from the cache` : source.description}, ${(performance.now() - t0).toFixed(0)} ms)\n`,
    );
    if (outliers) process.stdout.write(`  ${outliers} outlier value(s) flagged (robust z > 3.5)\n`);
    if (a.weibull)
      process.stdout.write(
        `  Weibull ${a.weibull.quantity}: β = ${a.weibull.shape.value.toPrecision(4)}, η = ${formatQuantity(a.weibull.scale.value, a.weibull.scale.unit, undefined, 5)} (${a.weibull.failures} breakdowns, ${a.weibull.censored} survived)\n`,
      );
    else if (a.weibullError) process.stdout.write(`  no Weibull fit: ${a.weibullError}\n`);
    for (const w of a.weibull?.warnings ?? []) process.stdout.write(`  WARNING: ${w}\n`);
    for (const p of a.problems) process.stderr.write(`plumbline lot: ${p}\n`);
  });
}
