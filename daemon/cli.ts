#!/usr/bin/env node
/**
 * The `plumbline` command. Wiring only: each subcommand parses its options, calls the analysis or
 * daemon modules, and prints either a readable table or exactly one JSON object.
 * Exit codes: 0 done; 1 the analysis could not be done on these data; 2 bad input or usage.
 */
import { readFileSync } from 'node:fs';
import { join } from 'node:path';
import { CommanderError } from 'commander';
import { PlumblineCommand } from './cli/command.js';
import { projectRoot } from '../protocols/project-root.js';
import { analyze } from './analysis/analyze.js';
import { AnalysisError } from './analysis/errors.js';
import { MODEL_IDS, unknownModelMessage } from './analysis/mechanisms/index.js';
import { rankMechanisms } from './analysis/ranking.js';
import { CsvError } from '../protocols/csv-table.js';
import { formatDiode, formatFit, formatRanking, formatSolar } from './cli/format.js';
import { cheung, fitDiode, solarFiguresWithUncertainty, type Convention } from './analysis/diode-fit.js';
import {
  type AnalysisOptions,
  enableExpressions,
  loadData,
  mergeInputs,
  readAccuracy,
  readCompliance,
  readInputs,
  readWindow,
  checkWindowSide,
  recordedAnalysis,
  withAnalysisOptions,
} from './cli/inputs.js';
import { QuantityError } from './quantity.js';
import { registerSim } from './cli/sim.js';
import { registerStation } from './cli/station.js';
import { registerLot } from './cli/lot.js';
import { registerWeibull } from './cli/weibull.js';
import { registerLab } from './cli/lab.js';

import { isInputError, UsageError } from './cli/usage.js';

/** The version in package.json (one place for it). */
function packageVersion(): string {
  try {
    return (JSON.parse(readFileSync(join(projectRoot(), 'package.json'), 'utf8')) as { version: string }).version;
  } catch {
    return 'unknown';
  }
}

// Every subcommand is a PlumblineCommand too (createCommand): a single-value option given twice is refused.
const program = new PlumblineCommand();
program
  .name('plumbline')
  .description('Live and offline analysis of current–voltage sweeps from source-measure units.')
  .version(packageVersion())
  .showHelpAfterError()
  .exitOverride();

function print(json: boolean | undefined, obj: unknown, text: () => string): void {
  process.stdout.write(json ? `${JSON.stringify(obj)}\n` : `${text()}\n`);
}

interface FitOptions extends AnalysisOptions {
  model?: string;
  xExpr?: string;
  yExpr?: string;
  yAxis?: string;
  illuminated?: boolean;
  convention: string;
  objective: string;
}

const DIODE_MODELS = ['single-diode', 'double-diode', 'cheung'];

function readConvention(o: { convention: string }): Convention {
  if (o.convention !== 'load' && o.convention !== 'generator')
    throw new QuantityError(
      '--convention',
      `--convention '${o.convention}': expected load (current into the device positive, as an SMU records it) or generator`,
    );
  return o.convention;
}

withAnalysisOptions(
  program
    .command('fit')
    .description('fit one conduction mechanism to an I-V CSV and extract its physical parameters')
    .argument(
      '<file>',
      'CSV with a header row; x = the bias column (named voltage, bias or V; else the first; K for arrhenius), y = the current column (named current or I; else the next); units in headers are read',
    )
    .option(
      '--model <id>',
      `mechanism: ${MODEL_IDS.join(', ')}; or a diode model: ${DIODE_MODELS.join(', ')} (an exported points.csv: default the model its station used, from the session.json beside it)`,
    )
    .option('--illuminated', 'diode models: fit a photocurrent (an illuminated solar cell)')
    .option('--convention <c>', 'diode models: how the file signs the current: load (into the device positive, as an SMU records it) or generator', 'load')
    .option(
      '--objective <o>',
      "diode models: current (true-current residuals, default) or implicit (the model equation's residual, as much of the literature fits)",
      'current',
    )
    .option('--x-expr <expr>', 'custom model: x as a mathjs expression over the columns (by header or c1, c2 …)')
    .option('--y-expr <expr>', 'custom model: y as a mathjs expression over the columns')
    .option('--y-axis <kind>', 'custom model: log (fit ln y) or linear', 'linear'),
).action((file: string, o: FitOptions) => {
  const { data, notes, firstSeq } = loadData(file, o);
  const recorded = recordedAnalysis(file, firstSeq, o.allSweeps === true);
  const model = o.model ?? recorded?.model;
  if (model === undefined) throw new UsageError(`--model: name the mechanism to fit (${MODEL_IDS.join(', ')}; or ${DIODE_MODELS.join(', ')})`);
  if (!MODEL_IDS.includes(model) && !DIODE_MODELS.includes(model))
    throw new UsageError(
      `${o.model !== undefined ? '--model' : `model (${recorded?.source})`}: ${unknownModelMessage(model, [...MODEL_IDS, ...DIODE_MODELS])}`,
    );
  if (o.model === undefined) notes.push(`model ${model}: the one the station used (${recorded?.source})`);
  const inputs = mergeInputs(readInputs(o), recorded, notes);
  if (DIODE_MODELS.includes(model)) {
    if (o.objective !== 'current' && o.objective !== 'implicit')
      throw new QuantityError('--objective', `--objective '${o.objective}': expected current or implicit`);
    if (o.auto)
      throw new UsageError(
        `--auto: the ${model} model is fitted over the whole curve (every usable reading, or --from/--to); an automatic window belongs to the linearized models (the semilog diode is --model diode)`,
      );
    const win = readWindow(o);
    const req = {
      temperature: inputs.temperature,
      illuminated: o.illuminated ?? false,
      convention: readConvention(o),
      complianceLimit: readCompliance(o),
      area: inputs.area,
      richardson: inputs.richardson,
      objective: o.objective as 'current' | 'implicit',
      window: typeof win === 'object' ? win : undefined,
    };
    const report = model === 'cheung' ? cheung(data, req) : fitDiode(data, model as 'single-diode' | 'double-diode', req);
    report.notes.push(...notes);
    if (typeof win === 'object') report.notes.push(`fitted on the readings from ${win.from ?? '−∞'} to ${win.to ?? '∞'} V`);
    print(o.json, report, () => formatDiode(report));
    return;
  }
  if (model === 'custom') enableExpressions();
  if (o.yAxis !== 'log' && o.yAxis !== 'linear') throw new QuantityError('--y-axis', `--y-axis '${o.yAxis}': expected log or linear`);
  // The window the station used, when this is its model and none is given here.
  const given = readWindow(o, model === 'arrhenius');
  checkWindowSide(model, given, inputs.flatBand);
  const window = given ?? (recorded && recorded.model === model ? recorded.window : undefined);
  const report = analyze(data, {
    model: model,
    inputs,
    window,
    accuracy: readAccuracy(o),
    complianceLimit: readCompliance(o),
    custom: model === 'custom' && o.xExpr !== undefined && o.yExpr !== undefined ? { x: o.xExpr, y: o.yExpr, yAxis: o.yAxis } : undefined,
  });
  report.notes.push(...notes);
  print(o.json, report, () => formatFit(report));
});

withAnalysisOptions(
  program
    .command('rank')
    .description('fit every applicable mechanism to the same points and rank them')
    .argument('<file>', 'CSV with a header row; x = bias (V), y = current (A)'),
).action((file: string, o: AnalysisOptions) => {
  const { data, notes, firstSeq } = loadData(file, o);
  const inputs = mergeInputs(readInputs(o), recordedAnalysis(file, firstSeq, o.allSweeps === true), notes);
  const window = readWindow(o);
  checkWindowSide(undefined, window, inputs.flatBand);
  const ranking = rankMechanisms(data, {
    inputs,
    window,
    accuracy: readAccuracy(o),
    complianceLimit: readCompliance(o),
  });
  ranking.notes.push(...notes);
  print(o.json, ranking, () => formatRanking(ranking));
});

withAnalysisOptions(
  program
    .command('solar')
    .description('solar-cell figures of merit from an illuminated I-V curve: isc, voc, pmax, vmp, imp, fill factor, efficiency')
    .argument('<file>', 'CSV with a header row; x = voltage (V), y = current (A)')
    .option('--irradiance <q>', 'irradiance for the efficiency, e.g. "1000 W/m^2" (default: 1000 W/m², the standard test condition)')
    .option('--convention <c>', 'how the file signs the current: load (into the device positive, as an SMU records it) or generator', 'load'),
).action(async (file: string, o: AnalysisOptions & { irradiance?: string; convention: string }) => {
  const { data } = loadData(file, o);
  const inputs = readInputs(o);
  let irradiance: number | undefined;
  if (o.irradiance !== undefined) {
    const { parseQuantity } = await import('./quantity.js');
    irradiance = parseQuantity(o.irradiance, 'irradiance', '--irradiance');
  }
  const report = solarFiguresWithUncertainty(data, { convention: readConvention(o), complianceLimit: readCompliance(o), area: inputs.area, irradiance });
  const figures = { ...report.figures, jsc: report.jsc };
  const flat = {
    ...Object.fromEntries(Object.entries(figures).map(([k, v]) => [k, v === null ? null : v.value])),
    stdErr: Object.fromEntries(Object.entries(figures).map(([k, v]) => [k, v === null ? null : v.stdErr])),
    units: { isc: 'A', jsc: 'A/m^2', voc: 'V', pmax: 'W', vmp: 'V', imp: 'A', fillFactor: '', efficiency: '' },
    irradiance: report.irradiance,
    area: report.area,
    points: report.points,
    convention: report.convention,
    warnings: report.warnings,
  };
  print(o.json, flat, () => formatSolar(report));
});

program
  .command('demo')
  .description('one sweep of an invented device on the built-in simulated instrument, ranked and fitted')
  .option('--scenario <name>', 'device scenario (plumbline sim --list)', 'oxide-fn')
  .action(async (o: { scenario: string }) => (await import('./demo.js')).runDemo(o.scenario));

// A reader that stops early (`| head`) is not an error, and it must not end the process: a run
// still has an instrument to drive and turn off. Further output is dropped; the command finishes.
process.stdout.on('error', (e: NodeJS.ErrnoException) => {
  if (e.code !== 'EPIPE') throw e;
  process.stdout.write = (() => true) as typeof process.stdout.write;
});

registerSim(program);
registerStation(program);
registerWeibull(program);
registerLot(program);
registerLab(program);

export async function main(argv: string[]): Promise<number> {
  try {
    await program.parseAsync(argv);
    return 0;
  } catch (e) {
    if (e instanceof CommanderError) {
      return e.exitCode === 0 ? 0 : 2;
    }
    const cmd = argv[2] ?? '';
    if (e instanceof CsvError || e instanceof QuantityError || e instanceof UsageError || isInputError(e)) {
      process.stderr.write(`plumbline ${cmd}: ${e.message}\n`);
      return 2;
    }
    if (e instanceof AnalysisError) {
      process.stderr.write(`plumbline ${cmd}: ${e.message}${e.field ? ` [${e.field}]` : ''}\n`);
      return e.code === 'UNKNOWN_MODEL' || e.code === 'MISSING_INPUT' || e.code === 'BAD_EXPRESSION' || e.code === 'BAD_WINDOW' ? 2 : 1;
    }
    process.stderr.write(`plumbline ${cmd}: unexpected error: ${(e as Error).stack ?? String(e)}\n`);
    return 1;
  }
}

main(process.argv).then((code) => {
  // A command may have set its own exit code (run: by outcome); an error code wins over it.
  if (code !== 0 || process.exitCode === undefined) process.exitCode = code;
});
