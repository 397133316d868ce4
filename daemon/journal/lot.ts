/**
 * Many sessions as one lot: a per-device summary of each session (its identity, the fitted
 * parameters of the device as found, its breakdown results, the cautions it raised), read from
 * session folders through one small interface (`LotSource`) that another store can implement.
 *
 * Reading hundreds of sessions stays fast because each summary is cached beside its journal
 * (`device-summary.json`) and rebuilt only when the journal or the results file changes (their
 * size and modification time are kept with the summary). A session a live process is still writing
 * is summarised but not cached.
 */
import { existsSync, readFileSync, statSync, writeFileSync } from 'node:fs';
import { basename, join, resolve } from 'node:path';
import {
  DEVICE_RESULTS_FILE,
  mergeIdentity,
  parseDeviceResults,
  POLARITIES,
  TEST_KINDS,
  type DeviceIdentity,
  type DeviceResult,
} from '../../protocols/device-results.js';
import type { ParameterFigure, WireEvent } from '../../protocols/wire.js';
import { formatQuantity } from '../../protocols/display-units.js';
import { JOURNAL_FILE, JournalError, liveLockHolder } from './journal.js';
import { listSessions, scanJournal } from './reader.js';
import { notFound } from '../../protocols/file-problem.js';

export const SUMMARY_FILE = 'device-summary.json';
/** Bumped whenever the summary's shape or meaning changes, so old caches are rebuilt. */
const SUMMARY_FORMAT = 1;

export interface DeviceSummary {
  /** Session id (folder name). */
  readonly session: string;
  /** Session folder, or null when the summary came from another store. */
  readonly dir: string | null;
  readonly startedAt: string | null;
  /** The session's device identity, with later edits (annotations) applied. */
  readonly identity: DeviceIdentity;
  /** The live-fit model of the sweep the parameters come from. */
  readonly model: string | null;
  /**
   * Fitted parameters of the device as found: the first complete sweep whose final fit is
   * plausible (later sweeps may already have stressed the device); with none, the first plausible
   * fit of a sweep that ended early — a ramp to breakdown is one, and its readings up to the
   * breakdown are the film's curve (the reading that showed the breakdown is never fitted).
   */
  readonly parameters: Readonly<Record<string, ParameterFigure>>;
  readonly fitSweep: number | null;
  readonly sweeps: number;
  readonly outcome: string | null;
  readonly reason: string | null;
  /** Cautions raised, one entry per kind with its count and first message. */
  readonly cautions: readonly { readonly kind: string; readonly count: number; readonly message: string }[];
  /** Rows of the session's device-results.csv (breakdown tests), if any. */
  readonly results: readonly DeviceResult[];
  /** What could not be read (damaged journal lines, an unreadable results file). */
  readonly problems: readonly string[];
}

/** Where a lot's devices come from: session folders here; another store can implement it. */
export interface LotSource {
  /** For titles and messages: what the selection covers. */
  readonly description: string;
  devices(): Promise<DeviceSummary[]>;
}

interface Stamp {
  readonly journal: [number, number];
  readonly results: [number, number] | null;
}

function stampOf(dir: string): Stamp {
  const j = statSync(join(dir, JOURNAL_FILE));
  const rf = join(dir, DEVICE_RESULTS_FILE);
  const r = existsSync(rf) ? statSync(rf) : null;
  return { journal: [j.size, j.mtimeMs], results: r ? [r.size, r.mtimeMs] : null };
}

const sameStamp = (a: Stamp, b: Stamp) =>
  a.journal[0] === b.journal[0] &&
  a.journal[1] === b.journal[1] &&
  (a.results === null ? b.results === null : b.results !== null && a.results[0] === b.results[0] && a.results[1] === b.results[1]);

/** Reads one session's summary from its journal and results file (no cache). */
export function summarizeSession(dirIn: string): DeviceSummary {
  const dir = resolve(dirIn);
  const events: WireEvent[] = [];
  const scan = scanJournal(dir, (e) => void events.push(e), { readings: false });
  const problems: string[] = scan.bad.map((b) => `${JOURNAL_FILE} line ${b.line}: ${b.problem}`);
  let results: DeviceResult[] = [];
  const rf = join(dir, DEVICE_RESULTS_FILE);
  if (existsSync(rf)) {
    try {
      results = parseDeviceResults(readFileSync(rf, 'utf8'), rf);
    } catch (e) {
      problems.push((e as Error).message);
    }
  }
  return summarizeEvents(basename(dir), dir, events, results, problems);
}

/**
 * A session's summary from its events (in sequence order; readings are not needed) and its results
 * rows: the one place the summary is made, whether the events come from a journal or an archive.
 */
export function summarizeEvents(
  session: string,
  dir: string | null,
  events: Iterable<WireEvent>,
  results: readonly DeviceResult[],
  problems: readonly string[],
): DeviceSummary {
  let startedAt: string | null = null;
  let identity: DeviceIdentity = {};
  let inputs: Record<string, unknown> = {};
  const fits = new Map<number, { fit: Extract<WireEvent, { type: 'fit' }>['fit'] }>();
  const complete = new Map<number, boolean>();
  let outcome: string | null = null;
  let reason: string | null = null;
  const cautions = new Map<string, { kind: string; count: number; message: string }>();
  for (const e of events) {
    switch (e.type) {
      case 'session':
        startedAt = e.startedAt;
        identity = mergeIdentity(identity, e.device);
        inputs = ((e.analysis as { inputs?: Record<string, unknown> } | null)?.inputs ?? {}) as Record<string, unknown>;
        break;
      case 'annotation':
        identity = mergeIdentity(identity, e.device);
        break;
      case 'settings': {
        const i = (e.analysis as { inputs?: Record<string, unknown> } | null)?.inputs;
        if (i) inputs = i;
        break;
      }
      case 'sweep-end':
        complete.set(e.sweep, e.complete);
        break;
      case 'fit':
        if (e.final) fits.set(e.sweep, { fit: e.fit });
        break;
      case 'caution': {
        const c = cautions.get(e.kind);
        if (c) c.count++;
        else cautions.set(e.kind, { kind: e.kind, count: 1, message: e.message });
        break;
      }
      case 'run-end':
        outcome = e.outcome;
        reason = e.reason;
        break;
      default:
        break;
    }
  }
  // The analysis inputs fill what the identity leaves out (the fit used them).
  const fill: DeviceIdentity = {
    ...(typeof inputs.area === 'number' ? { area: inputs.area } : {}),
    ...(typeof inputs.thickness === 'number' ? { thickness: inputs.thickness } : {}),
    ...(typeof inputs.temperature === 'number' ? { temperature: inputs.temperature } : {}),
  };
  identity = mergeIdentity(fill, identity);
  let fitSweep: number | null = null;
  let chosen: Extract<WireEvent, { type: 'fit' }>['fit'] = null;
  const order = [...fits.keys()].sort((a, b) => a - b);
  for (const wholeOnly of [true, false]) {
    for (const sweep of order) {
      const f = fits.get(sweep)?.fit;
      if (f?.plausible && (!wholeOnly || complete.get(sweep) !== false)) {
        fitSweep = sweep;
        chosen = f;
        break;
      }
    }
    if (chosen) break;
  }
  return {
    session,
    dir,
    startedAt,
    identity,
    model: chosen?.model ?? null,
    parameters: chosen?.parameters ?? {},
    fitSweep,
    sweeps: complete.size,
    outcome,
    reason,
    cautions: [...cautions.values()],
    results: [...results],
    problems: [...problems],
  };
}

/** A session's summary, from the cache beside its journal when that is still current. */
export function readSummary(dir: string, o: { cache?: boolean } = {}): { summary: DeviceSummary; cached: boolean } {
  const abs = resolve(dir);
  const stamp = stampOf(abs);
  const file = join(abs, SUMMARY_FILE);
  if (o.cache !== false && existsSync(file)) {
    try {
      const c = JSON.parse(readFileSync(file, 'utf8')) as { format: number; stamp: Stamp; summary: DeviceSummary };
      if (c.format === SUMMARY_FORMAT && sameStamp(c.stamp, stamp)) return { summary: { ...c.summary, dir: abs }, cached: true };
    } catch {
      /* a damaged cache is rebuilt */
    }
  }
  const summary = summarizeSession(abs);
  if (o.cache !== false && liveLockHolder(abs) === undefined) {
    try {
      writeFileSync(file, JSON.stringify({ format: SUMMARY_FORMAT, stamp, summary }));
    } catch {
      /* a read-only folder still gives its summary */
    }
  }
  return { summary, cached: false };
}

/**
 * The session folders named by `paths`: each is a session folder itself (it holds a journal) or a
 * data folder whose session folders are all taken. Errors name the path.
 */
export function expandSessionPaths(paths: readonly string[]): string[] {
  const out: string[] = [];
  for (const p of paths) {
    const abs = resolve(p);
    if (!existsSync(abs)) throw new JournalError(`${p}: ${notFound(p, 'folder')}`);
    if (existsSync(join(abs, JOURNAL_FILE))) {
      out.push(abs);
      continue;
    }
    if (!statSync(abs).isDirectory()) throw new JournalError(`${p}: not a session folder or a data folder`);
    const found = listSessions(abs).map((id) => join(abs, id));
    if (found.length === 0) throw new JournalError(`${p}: neither a session folder (no ${JOURNAL_FILE}) nor a data folder holding session folders`);
    out.push(...found.reverse());
  }
  return [...new Set(out)];
}

/** Session folders as a lot. */
export class FolderLot implements LotSource {
  readonly description: string;
  private readonly dirs: string[];
  /** How many summaries came from the cache on the last read. */
  cachedCount = 0;

  constructor(
    paths: readonly string[],
    private readonly opts: { cache?: boolean } = {},
  ) {
    this.dirs = expandSessionPaths(paths);
    this.description = this.dirs.length === 1 ? basename(this.dirs[0]) : `${this.dirs.length} sessions`;
  }

  async devices(): Promise<DeviceSummary[]> {
    this.cachedCount = 0;
    return this.dirs.map((d) => {
      const r = readSummary(d, this.opts);
      if (r.cached) this.cachedCount++;
      return r.summary;
    });
  }
}

/** One device's breakdown result with its effective identity (results row + session identity). */
export interface LotResult extends DeviceResult {
  readonly session: string;
}

/**
 * Every results row of the lot. A row's own identity columns stand, except that in a session that
 * tested one device the session's identity (with its later edits) wins, so a corrected site or
 * area reaches the statistics.
 */
export function lotResults(devices: readonly DeviceSummary[]): LotResult[] {
  const out: LotResult[] = [];
  for (const d of devices) {
    const names = new Set(d.results.map((r) => r.device));
    for (const r of d.results) {
      const id = names.size === 1 ? d.identity : {};
      // Figures the test derived from the geometry follow a corrected thickness or area: the field
      // is (V − V_FB)/d and the charge ∫I dt/A, so each scales by the old value over the new.
      const derived: { breakdownField?: number; chargeToBreakdown?: number } = {};
      if (id.thickness !== undefined && r.thickness !== undefined && r.breakdownField !== undefined && id.thickness !== r.thickness)
        derived.breakdownField = (r.breakdownField * r.thickness) / id.thickness;
      else if (id.thickness !== undefined && r.thickness === undefined && r.breakdownField === undefined && r.breakdownVoltage !== undefined)
        derived.breakdownField = r.breakdownVoltage / id.thickness;
      if (id.area !== undefined && r.area !== undefined && r.chargeToBreakdown !== undefined && id.area !== r.area)
        derived.chargeToBreakdown = (r.chargeToBreakdown * r.area) / id.area;
      out.push({
        ...r,
        ...derived,
        ...(id.wafer !== undefined ? { wafer: id.wafer } : {}),
        ...(id.site !== undefined ? { site: id.site } : {}),
        ...(id.x !== undefined ? { x: id.x } : {}),
        ...(id.y !== undefined ? { y: id.y } : {}),
        ...(id.area !== undefined ? { area: id.area } : {}),
        ...(id.thickness !== undefined ? { thickness: id.thickness } : {}),
        session: d.session,
      });
    }
  }
  return out;
}

/** What `weibull` fits: values, survivors and area factors, with what was left out and why. */
export interface BreakdownSample {
  readonly values: number[];
  readonly censored: boolean[];
  /** Device area over the reference area; undefined when every device has the reference area. */
  readonly areaFactor: number[] | undefined;
  /** The reference area η refers to, m² (undefined when no area is known). */
  readonly area: number | undefined;
  readonly labels: string[];
  readonly unit: string;
  readonly title: string;
  readonly notes: string[];
  /** What makes the sample doubtful (a device identity counted more than once). */
  readonly warnings?: string[];
}

/**
 * The Weibull sample of one quantity (field, voltage, charge, time) from results rows: breakdowns
 * are failures, survivors are right-censored at the value they reached; initial failures (failed at
 * the use condition before the test) and invalid tests are left out and counted. Devices of
 * different areas are put on one reference area (`referenceArea`, else their median area) through
 * per-device area factors.
 */
export function breakdownSample(
  rowsIn: readonly (DeviceResult & { session?: string })[],
  quantity: { key: keyof DeviceResult; unit: string; title: string; column: string },
  referenceArea?: number,
  test?: string,
): BreakdownSample {
  const rows = selectTest(rowsIn, test);
  const values: number[] = [];
  const censored: boolean[] = [];
  const areas: (number | undefined)[] = [];
  const labels: string[] = [];
  const notes: string[] = [];
  const warnings: string[] = [];
  let initial = 0;
  let invalid = 0;
  let missing = 0;
  // A device is destroyed once: the same identity in several rows is one device counted again (a
  // simulated device re-run with the same seed, a copied results file) or a naming slip.
  const seen = new Map<string, number>();
  for (const r of rows) {
    if (r.outcome === 'initial-failure' || r.outcome === 'invalid') continue;
    const id = [r.wafer ?? '', r.site ?? '', r.device].join('\u0000');
    seen.set(id, (seen.get(id) ?? 0) + 1);
  }
  const repeated = [...seen.entries()].filter(([, n]) => n > 1);
  for (const r of rows) {
    if (r.outcome === 'initial-failure') {
      initial++;
      continue;
    }
    if (r.outcome === 'invalid') {
      invalid++;
      continue;
    }
    const v = r[quantity.key];
    if (typeof v !== 'number' || !(v > 0)) {
      missing++;
      continue;
    }
    values.push(v);
    censored.push(r.outcome === 'survived');
    areas.push(r.area);
    labels.push(r.session ? `${r.session}/${r.device}` : r.device);
  }
  if (repeated.length) {
    const shown = repeated.slice(0, 3).map(([id, n]) => {
      const [wafer, site, device] = id.split('\u0000');
      return `${device}${wafer ? ` (wafer ${wafer}${site ? `, site ${site}` : ''})` : ''} ×${n}`;
    });
    warnings.push(
      `${repeated.length} device identit${repeated.length === 1 ? 'y appears' : 'ies appear'} in more than one result (${shown.join(', ')}${repeated.length > 3 ? ', …' : ''}): a device breaks down once, so these are counted more than once or misnamed; correct the identity (plumbline annotate --device …) or leave the copies out`,
    );
  }
  const kinds = new Set(rows.map((r) => r.test));
  if (kinds.size > 1) notes.push(`${kinds.size} kinds of test pooled (${[...kinds].join(', ')}), as asked`);
  if (quantity.key === 'timeToBreakdown' || quantity.key === 'chargeToBreakdown') {
    const levels = stressLevels(rows.filter((r) => r.outcome === 'breakdown' || r.outcome === 'survived'));
    if (levels.length > 1)
      warnings.push(
        `${levels.length} stress levels pooled (${levels.join(', ')}): the ${quantity.title} falls steeply as the stress rises, so values from several levels do not share one distribution (common practice: one Weibull per stress level, then a model across the levels); give only the sessions of one level`,
      );
  } else if (quantity.key === 'breakdownField' || quantity.key === 'breakdownVoltage') {
    if (rows.length > 0 && rows.every((r) => r.test === 'constant-voltage'))
      warnings.push(
        `these are constant-voltage stress results: their ${quantity.title} is the stress the test held, not a property of the device; the failure time (--quantity time) or charge (--quantity charge) is what varies`,
      );
  }
  if (initial) notes.push(`${initial} initial failure(s) (failed at the use condition before the test) left out of the fit; count them as yield loss`);
  if (invalid) notes.push(`${invalid} invalid test(s) left out`);
  if (missing) notes.push(`${missing} device(s) without a ${quantity.title} (${quantity.column}) left out`);
  const a = referenceAreas(areas, referenceArea);
  notes.push(...a.notes);
  return { values, censored, areaFactor: a.areaFactor, area: a.area, labels, unit: quantity.unit, title: quantity.title, notes, warnings };
}

/**
 * The quantity a Weibull analysis of these results takes when none is asked: the time to breakdown
 * for constant-voltage stress and the charge to breakdown for constant-current stress (a held stress
 * sets the field; what varies from device to device is how long, or how much charge, it takes —
 * common practice), else the breakdown field of a ramp. Throws LotRequestError as selectTest does.
 */
export function defaultQuantity(rows: readonly DeviceResult[], test: string | undefined): string {
  const kinds = new Set(selectTest(rows, test).map((r) => r.test));
  if (kinds.size === 1 && kinds.has('constant-voltage')) return 'time';
  if (kinds.size === 1 && kinds.has('constant-current')) return 'charge';
  return 'field';
}

/**
 * The distinct stress levels of constant-stress results, for display: the held voltage of a
 * constant-voltage test (its breakdown voltage), the current density Q_bd/t_bd of a constant-current
 * one; levels within 2 % of each other are one level.
 */
function stressLevels(rows: readonly DeviceResult[]): string[] {
  const levels: { v: number; unit: string }[] = [];
  for (const r of rows) {
    let level: { v: number; unit: string } | undefined;
    if (r.test === 'constant-voltage' && r.breakdownVoltage !== undefined) level = { v: Math.abs(r.breakdownVoltage), unit: 'V' };
    else if (r.test === 'constant-current' && r.chargeToBreakdown && r.timeToBreakdown) level = { v: r.chargeToBreakdown / r.timeToBreakdown, unit: 'A/m^2' };
    if (level && level.v > 0 && !levels.some((l) => l.unit === level.unit && Math.abs(l.v / level.v - 1) <= 0.02)) levels.push(level);
  }
  levels.sort((a, b) => a.unit.localeCompare(b.unit) || a.v - b.v);
  return levels.map((l) => formatQuantity(l.v, l.unit, undefined, 4));
}

/** What was asked of a lot cannot be done (several kinds of test pooled unasked, an unknown kind or map parameter); the message names the option. */
export class LotRequestError extends Error {}

/**
 * The rows of one kind of test, of one polarity. Breakdown values of different tests do not come
 * from one distribution (a ramp's breakdown field grows with its ramp rate, a constant-voltage
 * stress sets the field and measures time; JEDEC JESD35-A treats them as separate tests), nor do
 * those of the two polarities (charge injected from one electrode or the other), so rows of several
 * kinds or both polarities are refused unless one is chosen — `KIND` or `KIND/positive`,
 * `KIND/negative` — or 'all' pools everything on purpose. Rows of unknown polarity (files written
 * before the polarity column) go with either.
 */
export function selectTest<T extends DeviceResult>(rows: readonly T[], test: string | undefined): T[] {
  const counts = new Map<string, number>();
  for (const r of rows) counts.set(r.test, (counts.get(r.test) ?? 0) + 1);
  const order = (k: string) => (TEST_KINDS as readonly string[]).indexOf(k) + 1 || 99;
  const held = [...counts]
    .sort((a, b) => order(a[0]) - order(b[0]) || a[0].localeCompare(b[0]))
    .map(([k, n]) => `${k} (${n})`)
    .join(', ');
  if (test === 'all') return [...rows];
  const [kind, polarity] = test === undefined || test === '' ? [undefined, undefined] : test.split('/', 2);
  if (polarity !== undefined && !(POLARITIES as readonly string[]).includes(polarity))
    throw new LotRequestError(`--test '${test}': the polarity after '/' is positive or negative`);
  let chosen: T[];
  if (kind === undefined) {
    if (counts.size > 1)
      throw new LotRequestError(
        `the results hold ${counts.size} kinds of test: ${held}; choose one with --test KIND (the page's lot view: ?test=KIND), or pool them with --test all`,
      );
    chosen = [...rows];
  } else {
    if (!counts.has(kind))
      throw new LotRequestError(
        `--test '${test}': ${rows.length ? `the results hold ${held}` : 'there are no results'}${(TEST_KINDS as readonly string[]).includes(kind) ? '' : ` (kinds of test: ${TEST_KINDS.join(', ')}, or all)`}`,
      );
    chosen = rows.filter((r) => r.test === kind);
  }
  if (polarity !== undefined) {
    const out = chosen.filter((r) => r.polarity === undefined || r.polarity === polarity);
    if (out.length === 0) throw new LotRequestError(`--test '${test}': no ${kind} results of ${polarity} polarity`);
    return out;
  }
  const byPolarity = new Map<string, number>();
  for (const r of chosen) if (r.polarity) byPolarity.set(r.polarity, (byPolarity.get(r.polarity) ?? 0) + 1);
  if (byPolarity.size > 1) {
    const k = kind ?? chosen[0]?.test ?? 'KIND';
    throw new LotRequestError(
      `the ${k} results hold both polarities: ${[...byPolarity].map(([p, n]) => `${p} (${n})`).join(', ')}; choose one with --test ${k}/positive or --test ${k}/negative (the page's lot view: ?test=${k}/positive), or pool them with --test all`,
    );
  }
  return chosen;
}

/**
 * The reference area and per-device area factors for devices of these areas: the given reference,
 * else the one area they share, else their median; devices without an area count as the reference.
 */
export function referenceAreas(
  areas: readonly (number | undefined)[],
  referenceArea?: number,
): { area: number | undefined; areaFactor: number[] | undefined; notes: string[] } {
  const notes: string[] = [];
  const known = areas.filter((a): a is number => a !== undefined && a > 0);
  if (known.length === 0) return { area: referenceArea, areaFactor: undefined, notes };
  const sorted = [...known].sort((a, b) => a - b);
  const distinct = new Set(known);
  const area = referenceArea ?? (distinct.size === 1 ? known[0] : sorted[Math.floor((sorted.length - 1) / 2)]);
  if (distinct.size === 1 && known[0] === area && known.length === areas.length) return { area, areaFactor: undefined, notes };
  if (known.length < areas.length) notes.push(`${areas.length - known.length} device(s) without an area taken at the reference area`);
  if (distinct.size > 1)
    notes.push(`devices of ${distinct.size} areas put on the reference area ${area.toPrecision(4)} m² by Poisson (weakest-link) area scaling`);
  return { area, areaFactor: areas.map((a) => (a !== undefined && a > 0 ? a / area : 1)), notes };
}
