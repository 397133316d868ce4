/**
 * How a breakdown test and its device read for people, the same on the page's Breakdown test panel
 * and in the offline report: the test's name, its outcome, the numbers of the criterion that fired,
 * the result figures (V_bd, E_bd in MV/cm, Q_bd in C/cm² with its uncertainty, t_bd, leakage before
 * and after) and the device's identity (wafer, site, position, area in cm², thickness in nm,
 * temperature, tags). Values arrive in SI (a `test-result` event, a session's device metadata) and
 * leave as text in the trade's units through display-units.ts. No DOM, no Node: the page imports it.
 */
import { displayUnit, formatParameter, RESULT_FIGURES } from './display-units.js';
import { formatNumber } from './number-format.js';

/** The breakdown tests by plan kind. */
export const TEST_TITLES: Readonly<Record<string, string>> = {
  'voltage-ramp': 'voltage ramp to breakdown',
  'current-ramp': 'current ramp to breakdown',
  'constant-voltage': 'constant-voltage stress',
  'constant-current': 'constant-current stress',
};

/** A test's outcome as shown (the outcomes of device-results.csv). */
export const OUTCOME_LABELS: Readonly<Record<string, string>> = {
  breakdown: 'BREAKDOWN',
  survived: 'SURVIVED (no breakdown)',
  'initial-failure': 'INITIAL FAILURE (not stressed)',
  invalid: 'INVALID (no result)',
};

/**
 * The numbers a test's result carries beside its figures (a `test-result` event's `numbers`): those
 * of the criterion that fired, and the pace the ramp achieved against the plan. SI unit and name.
 */
export const TEST_NUMBERS: Readonly<Record<string, { readonly si: string; readonly label: string; readonly group: 'criterion' | 'pace' }>> = {
  voltage: { si: 'V', label: 'bias', group: 'criterion' },
  current: { si: 'A', label: 'current', group: 'criterion' },
  previous: { si: 'A', label: 'current one step before', group: 'criterion' },
  ratio: { si: '', label: 'current ratio', group: 'criterion' },
  limit: { si: 'A', label: 'breakdown current', group: 'criterion' },
  slope: { si: '1/V', label: 'slope of ln|I| against V', group: 'criterion' },
  median: { si: '1/V', label: 'its recent median', group: 'criterion' },
  highest: { si: 'V', label: 'highest voltage held', group: 'criterion' },
  time: { si: 's', label: 'stress time', group: 'criterion' },
  stepPeriod: { si: 's', label: 'step period achieved', group: 'pace' },
  plannedStepPeriod: { si: 's', label: 'step period planned', group: 'pace' },
  rampRate: { si: 'V/s', label: 'ramp rate achieved', group: 'pace' },
  plannedRampRate: { si: 'V/s', label: 'ramp rate planned', group: 'pace' },
};

/** Said of a leakage reading under three times the run's noise floor. */
export const AT_FLOOR = '(at the noise floor: under 3σ)';

/** One line of a figures table: the key it came from, the trade's name, the number as text, its unit ('' if none). */
export interface FigureRow {
  readonly key: string;
  readonly label: string;
  readonly text: string;
  readonly unit: string;
}

/** The parts of a `test-result` event these rows read. */
export interface TestResultLike {
  readonly outcome: string;
  readonly result: Readonly<Record<string, unknown>>;
  readonly numbers?: Readonly<Record<string, number>>;
}

/**
 * The result figures present in a test's result, in RESULT_FIGURES order and display units. Q_bd
 * carries its own uncertainty (the breakdown moment lies somewhere in the last interval), rounded as
 * the GUM rounds a measurement; the other figures are printed to four digits. For a device that did
 * not break, each figure is named as the value it reached.
 */
export function resultFigureRows(r: TestResultLike): FigureRow[] {
  const broke = r.outcome === 'breakdown';
  const rows: FigureRow[] = [];
  // The figures are magnitudes, as the standard states them; the polarity says which way the stress went.
  const pol = r.result.polarity;
  if (pol === 'positive' || pol === 'negative') rows.push({ key: 'polarity', label: 'polarity of the stress', text: pol, unit: '' });
  for (const [key, f] of Object.entries(RESULT_FIGURES)) {
    const v = r.result[key];
    if (typeof v !== 'number' || !Number.isFinite(v)) continue;
    const u = key === 'chargeToBreakdown' ? r.numbers?.chargeUncertainty : undefined;
    const d = displayUnit(f.si, key);
    const text = u !== undefined && Number.isFinite(u) ? formatParameter({ value: v, stdErr: u, unit: f.si }, key).text : formatNumber(v * d.scale, 4);
    // A single reading at the use voltage under three times the run's noise floor is the floor, not
    // a leakage (the limit of detection: IUPAC; Long & Winefordner 1983): said beside the number.
    const floor = r.result.leakageFloor;
    const atFloor = (key === 'leakageBefore' || key === 'leakageAfter') && typeof floor === 'number' && floor > 0 && Math.abs(v) < 3 * floor;
    rows.push({ key, label: `${broke ? f.label : f.reached}${atFloor ? ` ${AT_FLOOR}` : ''}`, text, unit: d.unit });
  }
  const floor = r.result.leakageFloor;
  if (typeof floor === 'number' && floor > 0 && rows.some((x) => x.key === 'leakageBefore' || x.key === 'leakageAfter'))
    rows.push({ key: 'leakageFloor', label: "noise floor σ of the run's readings", text: formatNumber(floor, 3), unit: 'A' });
  return rows;
}

/**
 * A result's other numbers of one group, four digits, in display units: 'criterion' (bias, current,
 * ratio … of the criterion that fired; numbers of no known group count here) or 'pace' (step period
 * and ramp rate, achieved and planned). Q_bd's uncertainty is left to its figure.
 */
export function numberRows(numbers: Readonly<Record<string, number>> | undefined, group: 'criterion' | 'pace'): FigureRow[] {
  const rows: FigureRow[] = [];
  for (const [key, v] of Object.entries(numbers ?? {})) {
    if (key === 'chargeUncertainty' || typeof v !== 'number' || !Number.isFinite(v)) continue;
    const c = TEST_NUMBERS[key];
    if ((c?.group ?? 'criterion') !== group) continue;
    const d = displayUnit(c?.si ?? '');
    rows.push({ key, label: c?.label ?? key, text: formatNumber(v * d.scale, 4), unit: d.unit });
  }
  return rows;
}

/**
 * A device's identity as rows: device, wafer, site, position (x, y on the wafer map), area in cm²,
 * thickness in nm, temperature in K, tags. Absent fields give no row.
 */
export function deviceRows(d: Readonly<Record<string, unknown>> | null | undefined): FigureRow[] {
  if (!d) return [];
  const rows: FigureRow[] = [];
  const text = (k: string) => (typeof d[k] === 'string' && d[k] !== '' ? (d[k] as string) : undefined);
  const number = (k: string) => (typeof d[k] === 'number' && Number.isFinite(d[k]) ? (d[k] as number) : undefined);
  for (const k of ['device', 'wafer', 'site']) {
    const t = text(k);
    if (t !== undefined) rows.push({ key: k, label: k, text: t, unit: '' });
  }
  const x = number('x');
  const y = number('y');
  if (x !== undefined || y !== undefined) rows.push({ key: 'position', label: 'position on the wafer map', text: `x ${x ?? '–'}, y ${y ?? '–'}`, unit: '' });
  for (const [k, si] of [
    ['area', 'm^2'],
    ['thickness', 'm'],
    ['temperature', 'K'],
  ] as const) {
    const v = number(k);
    if (v === undefined) continue;
    const du = displayUnit(si, k);
    rows.push({ key: k, label: k, text: formatNumber(v * du.scale, 5), unit: du.unit });
  }
  const tags = Array.isArray(d.tags) ? d.tags.filter((t): t is string => typeof t === 'string' && t !== '') : [];
  if (tags.length) rows.push({ key: 'tags', label: 'tags', text: tags.join(', '), unit: '' });
  return rows;
}

/** A row as text: "bias 9.1 V", "current ratio 12.5". */
export function rowText(r: FigureRow): string {
  return `${r.label} ${r.text}${r.unit ? ` ${r.unit}` : ''}`;
}

/** The identity on one line: "device D07 · wafer W07 · site C4 · (x 3, y -2) · area 1e-4 cm² · thickness 7 nm". */
export function deviceLine(d: Readonly<Record<string, unknown>> | null | undefined): string {
  return deviceRows(d)
    .map((r) => (r.key === 'position' ? `(${r.text})` : rowText(r)))
    .join(' · ');
}
