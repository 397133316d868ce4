/**
 * `plumbline weibull INPUT...`: Weibull statistics of breakdown values across devices, from session
 * folders (their device-results.csv), data folders, results files or any CSV with one value per
 * device. The maths is daemon/analysis/weibull.ts; this file gathers the sample and prints it.
 */
import { readFileSync, statSync } from 'node:fs';
import type { Command } from 'commander';
import { analyzeWeibull, type BoundsMethod, type WeibullReport } from '../analysis/weibull.js';
import { DEVICE_RESULTS_FILE, parseDeviceResults, resultQuantity, RESULT_QUANTITIES } from '../../protocols/device-results.js';
import { columnIndex, CsvError, parseCsvTable, requireNumeric, splitFields, detectDelimiter } from '../../protocols/csv-table.js';
import { UsageError } from './usage.js';
import { readQuantity, sameDimensions, valueIn } from '../unit-parser.js';
import { fileProblem } from '../../protocols/file-problem.js';
import type { BreakdownSample } from '../journal/lot.js';
import { formatQuantity } from '../../protocols/display-units.js';
import { archiveLot, withArchiveSelection, type ArchiveSelectionOptions } from './lab.js';

const SURVIVOR_COLUMNS = /^(censored|survived|survivor|suspended)$/i;

/** A CSV that is not a results file: one value per device in the --quantity column. */
function genericSample(
  file: string,
  text: string,
  quantity: string | undefined,
  unit: { si: string; factor: number } | undefined,
): Omit<BreakdownSample, 'area' | 'areaFactor' | 'notes'> & { areas: (number | undefined)[] } {
  const table = parseCsvTable(text, file, 1);
  const survivorCol = table.headers.findIndex((h) => SURVIVOR_COLUMNS.test(h));
  const areaCol = table.headers.findIndex((h) => /^area$/i.test(h));
  let qi: number;
  if (quantity !== undefined) qi = columnIndex(table, quantity, '--quantity');
  else {
    const candidates = table.headers.map((_, k) => k).filter((k) => k !== survivorCol && k !== areaCol && table.firstText[k] === undefined);
    if (candidates.length !== 1)
      throw new CsvError(file, undefined, undefined, `--quantity: name the column that holds the values (columns: ${table.headers.join(', ')})`);
    qi = candidates[0];
  }
  requireNumeric(table, qi);
  if (survivorCol >= 0) requireNumeric(table, survivorCol);
  if (areaCol >= 0) requireNumeric(table, areaCol);
  const values: number[] = [];
  const censored: boolean[] = [];
  const areas: (number | undefined)[] = [];
  table.columns[qi].forEach((v, k) => {
    if (!(v > 0)) throw new CsvError(file, table.lines[k], table.headers[qi], `${v} is not a positive value (Weibull values are > 0)`);
    values.push(v * (unit?.factor ?? 1));
    censored.push(survivorCol >= 0 && table.columns[survivorCol][k] !== 0);
    areas.push(areaCol >= 0 ? table.columns[areaCol][k] : undefined);
  });
  const q = resultQuantity(table.headers[qi]);
  return {
    values,
    censored,
    areas,
    labels: values.map((_, k) => `${file} line ${table.lines[k]}`),
    unit: unit?.si ?? q?.unit ?? '',
    title: q?.title ?? table.headers[qi],
  };
}

/** The SI units breakdown values are held in; the text output shows them in the trade's units. */
const SI_UNITS = ['V/m', 'V', 'C/m^2', 's', 'A', 'A/m^2', 'C'];

/**
 * The SI unit of the values and the factor that takes them there: --unit may name an SI unit or any
 * unit of the same kind (MV/cm, C/cm^2, mA, h …), whose values are converted.
 */
function readUnit(unit: string | undefined): { si: string; factor: number } | undefined {
  if (unit === undefined) return undefined;
  const u = unit.replace(/\s+/g, '');
  if (SI_UNITS.includes(u)) return { si: u, factor: 1 };
  const q = readQuantity(`1 ${unit.trim()}`);
  if (q) {
    for (const si of SI_UNITS) {
      const t = readQuantity(`1 ${si}`);
      if (t && sameDimensions(q.dims, t.dims)) return { si, factor: valueIn(q, t) };
    }
  }
  throw new UsageError(
    `--unit '${unit}': not a unit of a breakdown value (a field, voltage, charge per area, time, current, current density or charge, e.g. MV/cm, V/m, C/cm^2, s)`,
  );
}

function isResultsHeader(text: string): boolean {
  const first = text.split(/\r?\n/).find((l) => l.trim() !== '' && !l.trim().startsWith('#')) ?? '';
  const h = splitFields(first, detectDelimiter(first)).map((x) => x.trim().toLowerCase());
  return h.includes('device') && h.includes('outcome');
}

export interface WeibullCliOptions extends ArchiveSelectionOptions {
  quantity?: string;
  test?: string;
  area?: string;
  toArea?: string;
  confidence: string;
  bounds: string;
  unit?: string;
  cache: boolean;
  json?: boolean;
}

/** Gathers the sample from the inputs (folders or files). */
export async function gatherSample(inputs: string[], o: WeibullCliOptions, referenceArea: number | undefined): Promise<BreakdownSample> {
  const { FolderLot, lotResults, breakdownSample, defaultQuantity, referenceAreas, LotRequestError } = await import('../journal/lot.js');
  const folders = inputs.filter((p) => {
    try {
      return statSync(p).isDirectory();
    } catch (e) {
      throw new UsageError(`${p}: ${fileProblem(p, e, 'file or folder')}`);
    }
  });
  const files = inputs.filter((p) => !folders.includes(p));
  const rows = [];
  const archive = await archiveLot(o, inputs);
  if (archive || folders.length) {
    const lot = archive ?? new FolderLot(folders, { cache: o.cache });
    const devices = await lot.devices();
    rows.push(...lotResults(devices));
    for (const d of devices) for (const p of d.problems) process.stderr.write(`plumbline weibull: ${d.session}: ${p}\n`);
    if (rows.length === 0 && files.length === 0) {
      throw new UsageError(
        `no per-device breakdown results (${DEVICE_RESULTS_FILE}) in ${lot.description}: weibull reads the results of ramp and constant-stress tests, or a CSV with one value per device`,
      );
    }
  }
  const generic: ReturnType<typeof genericSample>[] = [];
  for (const f of files) {
    let text: string;
    try {
      text = readFileSync(f, 'utf8');
    } catch (e) {
      throw new CsvError(f, undefined, undefined, fileProblem(f, e));
    }
    if (isResultsHeader(text)) rows.push(...parseDeviceResults(text, f).map((r) => ({ ...r, session: f })));
    else generic.push(genericSample(f, text, o.quantity, readUnit(o.unit)));
  }
  if (rows.length && generic.length) throw new UsageError('mix of results files (or session folders) and plain value CSVs: analyse them separately');
  if (rows.length) {
    try {
      const q = resultQuantity(o.quantity ?? defaultQuantity(rows, o.test));
      if (!q) throw new UsageError(`--quantity '${o.quantity}': results hold ${Object.keys(RESULT_QUANTITIES).join(', ')} (or their column names)`);
      return breakdownSample(rows, q, referenceArea, o.test);
    } catch (e) {
      if (e instanceof LotRequestError) throw new UsageError(e.message);
      throw e;
    }
  }
  if (o.test !== undefined)
    throw new UsageError(`--test '${o.test}': only results files and session folders name their kind of test; a plain CSV is taken as one sample`);
  // Plain CSVs: concatenated; per-device areas become area factors.
  const a = referenceAreas(
    generic.flatMap((g) => g.areas),
    referenceArea,
  );
  return {
    values: generic.flatMap((g) => g.values),
    censored: generic.flatMap((g) => g.censored),
    labels: generic.flatMap((g) => g.labels),
    area: a.area,
    areaFactor: a.areaFactor,
    unit: generic[0].unit,
    title: generic[0].title,
    notes: a.notes,
  };
}

export function readBounds(b: string): BoundsMethod {
  if (b === 'lr' || b === 'likelihood-ratio') return 'likelihood-ratio';
  if (b === 'fisher') return 'fisher';
  throw new UsageError(`--bounds '${b}': expected lr (likelihood ratio) or fisher`);
}

export function readConfidence(c: string): number {
  const v = c.trim().endsWith('%') ? Number(c.trim().slice(0, -1)) / 100 : Number(c);
  if (!(v > 0 && v < 1)) throw new UsageError(`--confidence '${c}': expected a level between 0 and 1, e.g. 0.9 (or 90%)`);
  return v;
}

function formatReport(r: WeibullReport, s: BreakdownSample): string {
  const pct = `${+(r.bounds.confidence * 100).toPrecision(3)} %`;
  const lines: string[] = [];
  lines.push(`Weibull analysis of ${s.title}: ${r.n} device(s), ${r.failures} broke down, ${r.censored} survived (right-censored)`);
  lines.push(`  shape β = ${+r.shape.value.toPrecision(4)}    ${pct} bounds ${+r.shape.low.toPrecision(4)} … ${+r.shape.high.toPrecision(4)}`);
  lines.push(
    `  scale η = ${formatQuantity(r.scale.value, r.scale.unit, undefined, 5)}    ${pct} bounds ${formatQuantity(r.scale.low, r.scale.unit, undefined, 4)} … ${formatQuantity(r.scale.high, r.scale.unit, undefined, 4)}  (63.2 % broken down${r.area !== null ? `, devices of ${formatQuantity(r.area, 'm^2', undefined, 4)}` : ''})`,
  );
  lines.push(
    `  1 % point = ${formatQuantity(r.onePercent.value, r.onePercent.unit, undefined, 4)}    bounds ${formatQuantity(r.onePercent.low, r.onePercent.unit, undefined, 4)} … ${formatQuantity(r.onePercent.high, r.onePercent.unit, undefined, 4)}`,
  );
  if (r.areaScaling) {
    const a = r.areaScaling;
    lines.push(
      `  η scaled to ${formatQuantity(a.toArea, 'm^2', undefined, 4)} = ${formatQuantity(a.scale.value, a.scale.unit, undefined, 5)}    bounds ${formatQuantity(a.scale.low, a.scale.unit, undefined, 4)} … ${formatQuantity(a.scale.high, a.scale.unit, undefined, 4)}  (η₂ = η₁·(A₁/A₂)^(1/β), β unchanged)`,
    );
  }
  lines.push(
    `  method: maximum likelihood; ${r.bounds.method === 'likelihood-ratio' ? 'likelihood-ratio' : 'Fisher-matrix'} bounds (two-sided ${pct}); log-likelihood ${r.logLikelihood.toFixed(4)}`,
  );
  if (r.goodnessOfFit) {
    const g = r.goodnessOfFit;
    lines.push(
      `  goodness of fit: Anderson–Darling A²·(1 + 0.2/√n) = ${g.modified.toFixed(3)} (5 % critical value ${g.critical['0.05']}) — ${g.rejected ? 'one Weibull does NOT describe these values' : 'consistent with one Weibull'}`,
    );
  } else lines.push('  goodness of fit: not computed with survivors (see the bend test and the plot)');
  if (r.bend)
    lines.push(`  bend test: best two-branch split after ${r.bend.lower} failures, p = ${r.bend.pValue.toPrecision(2)} (${r.bend.bootstrap} simulated lots)`);
  for (const n of s.notes) lines.push(`  note: ${n}`);
  for (const w of [...(s.warnings ?? []), ...r.warnings]) lines.push(`  WARNING: ${w}`);
  lines.push('  Weibull plot (median ranks, Bernard): x, F, ln(−ln(1−F))');
  for (const p of r.points)
    lines.push(`    ${formatQuantity(p.x, r.scale.unit, undefined, 6).padStart(16)}  ${p.F.toFixed(4)}  ${Math.log(-Math.log1p(-p.F)).toFixed(4)}`);
  return lines.join('\n');
}

export function registerWeibull(program: Command): void {
  withArchiveSelection(
    program
      .command('weibull')
      .description(
        'Weibull statistics of breakdown values across devices: shape and scale by maximum likelihood with bounds, median-rank plot, goodness of fit, two-population warning, area scaling',
      )
      .argument(
        '[input...]',
        'session folders or data folders (their device-results.csv), results files, or CSV files with one value per device (or --postgres with a selection)',
      )
      .option(
        '--quantity <name>',
        `results: ${Object.keys(RESULT_QUANTITIES).join(' | ')} (default: time for constant-voltage stress, charge for constant-current stress, field for ramps); other CSVs: the column with the values`,
      )
      .option(
        '--test <kind>',
        'results: the kind of test to analyse (voltage-ramp | current-ramp | constant-voltage | constant-current, optionally /positive or /negative), or all to pool them; needed when the results hold several kinds or both polarities',
      )
      .option('--area <q>', 'device area (or the reference area when devices differ), e.g. "1e-4 cm^2"')
      .option('--to-area <q>', 'scale η to this area through β (Poisson area scaling), e.g. "1 cm^2"')
      .option('--confidence <c>', 'two-sided confidence of the bounds', '0.9')
      .option('--bounds <method>', 'lr (likelihood ratio, default) or fisher (Fisher matrix)', 'lr')
      .option('--unit <u>', 'plain CSVs: the unit of the values (e.g. MV/cm, V/m, C/cm^2, s, V); values in other than SI are converted')
      .option('--no-cache', 'session folders: read every journal again instead of the cached summaries')
      .option('--json', 'print exactly one JSON object'),
  ).action(async (inputs: string[], o: WeibullCliOptions) => {
    const { parseQuantity } = await import('../quantity.js');
    const confidence = readConfidence(o.confidence);
    const bounds = readBounds(o.bounds);
    const area = o.area !== undefined ? parseQuantity(o.area, 'area', '--area') : undefined;
    const toArea = o.toArea !== undefined ? parseQuantity(o.toArea, 'area', '--to-area') : undefined;
    {
      const { bareCheck } = await import('./inputs.js');
      bareCheck(o.area, area, '--area', 'area', 'cm^2');
      bareCheck(o.toArea, toArea, '--to-area', 'area', 'cm^2');
    }
    const s = await gatherSample(inputs, o, area);
    if (toArea !== undefined && s.area === undefined)
      throw new UsageError("--to-area needs the devices' area: give --area (or an area column / device area in the sessions)");
    const r = analyzeWeibull(
      { values: s.values, censored: s.censored, areaFactor: s.areaFactor },
      { confidence, bounds, unit: s.unit, area: s.area, toArea, display: (v) => formatQuantity(v, s.unit, undefined, 4) },
    );
    const report = { ...r, quantity: s.title, notes: s.notes, warnings: [...(s.warnings ?? []), ...r.warnings] };
    if (o.json) process.stdout.write(`${JSON.stringify(report)}\n`);
    else process.stdout.write(`${formatReport(r, s)}\n`);
  });
}
