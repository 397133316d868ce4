/**
 * The panels of measurement strategies: a breakdown test's plan and result (outcome, the criterion
 * that fired, breakdown voltage, field in MV/cm, charge to breakdown in C/cm², time, leakage at the
 * use voltage before and after) and each adaptive sweep's figures. Every number is the daemon's
 * (the journaled `test-result` and `adaptive-sweep` events), shown in the trade's units with the
 * same names and rows as the offline report (protocols/breakdown-display.ts).
 */
import { deviceLine, numberRows, OUTCOME_LABELS, resultFigureRows, rowText, TEST_TITLES } from '../../protocols/breakdown-display.js';
import { displayUnit, formatParameter, parameterLabel } from '../../protocols/display-units.js';
import { formatNumber } from '../../protocols/number-format.js';
import type { WireEvent } from '../../protocols/wire.js';
import type { Store } from './store.js';

/** The kind of the session's plan when it is a breakdown test, else null. */
export function testKind(s: Store): string | null {
  const kind = (s.sessionEvent?.plan as { kind?: unknown } | null | undefined)?.kind;
  return typeof kind === 'string' && kind in TEST_TITLES ? kind : (s.testResult?.test ?? null);
}

function el<K extends keyof HTMLElementTagNameMap>(tag: K, text = '', cls = ''): HTMLElementTagNameMap[K] {
  const e = document.createElement(tag);
  if (text) e.textContent = text;
  if (cls) e.className = cls;
  return e;
}

/** A row "name | value unit" of a params table. */
function row(table: HTMLTableElement, key: string, name: string, text: string, unit: string): void {
  const r = table.insertRow();
  r.dataset.figure = key;
  r.insertCell().textContent = name;
  const c = r.insertCell();
  c.className = 'value';
  c.append(el('span', text, 'num'));
  if (unit) c.append(el('span', ` ${unit}`, 'unit'));
}

/**
 * The breakdown-test panel: what the test does (the daemon's description of the plan), then its
 * result once the `test-result` event arrives. Returns whether the session holds a test at all.
 */
export function renderTestPanel(title: HTMLElement, box: HTMLElement, s: Store): boolean {
  const kind = testKind(s);
  box.textContent = '';
  if (!kind) return false;
  title.textContent = `Breakdown test: ${TEST_TITLES[kind] ?? kind}`;
  const plan = s.sessionEvent?.plan as { description?: unknown } | null | undefined;
  if (typeof plan?.description === 'string') box.append(el('p', `${plan.description}.`, 'source'));
  const r = s.testResult;
  if (!r) {
    box.append(
      el(
        'p',
        s.running && !s.readOnly
          ? 'Under test: the result appears here when the test ends (breakdown, or the end of the ramp or of the stress time).'
          : 'No result recorded: the test ended before it gave one.',
        'hint',
      ),
    );
    return true;
  }
  const out = el('p', '', 'outcome');
  out.dataset.outcome = r.outcome;
  out.append(el('strong', OUTCOME_LABELS[r.outcome] ?? r.outcome));
  const criterion = typeof r.result.criterion === 'string' ? r.result.criterion : undefined;
  if (criterion) out.append(document.createTextNode(` · criterion: ${criterion}`));
  box.append(out, el('p', `${r.reason}.`, 'reason'));
  const table = el('table', '', 'params test-result');
  for (const f of resultFigureRows(r)) row(table, f.key, f.label, f.text, f.unit);
  const pace = numberRows(r.numbers, 'pace');
  if (table.rows.length) box.append(table);
  const missing = ['breakdownField', 'chargeToBreakdown'].filter((k) => r.result[k] === undefined && typeof r.result.breakdownVoltage === 'number');
  if (missing.length)
    box.append(
      el(
        'p',
        'The field needs the film thickness and the charge per area the device area: give them in the Analysis form (or with the device) before the test.',
        'hint',
      ),
    );
  if (pace.length) box.append(el('p', pace.map(rowText).join(' · '), 'source'));
  const where = deviceLine(r.result);
  if (where) box.append(el('p', `${where}. One row of device-results.csv beside the journal.`, 'source'));
  return true;
}

type Adaptive = Extract<WireEvent, { type: 'adaptive-sweep' }>;

/** Rows of the adaptive table shown (the newest; the journal holds every one). */
const ADAPTIVE_ROWS = 30;

/** Each adaptive sweep: readings, the largest |bias|, the charge passed, the target parameter, why it stopped. */
export function renderAdaptive(box: HTMLElement, sweeps: readonly Adaptive[]): boolean {
  box.textContent = '';
  if (sweeps.length === 0) return false;
  const shown = sweeps.slice(-ADAPTIVE_ROWS).reverse();
  const name = sweeps.at(-1)?.parameter?.name;
  const unit = sweeps.map((a) => a.parameter).find((p) => p && p.name === name);
  const pUnit = unit ? displayUnit(unit.unit, unit.name).unit : '';
  const table = el('table', '', 'params adaptive');
  const head = table.insertRow();
  for (const h of ['sweep', 'readings', 'max |V| (V)', 'charge (C)', name ? `${parameterLabel(name)}${pUnit ? ` (${pUnit})` : ''}` : 'target', 'stopped'])
    head.append(el('th', h));
  for (const a of shown) {
    const r = table.insertRow();
    r.dataset.sweep = String(a.sweep);
    r.insertCell().textContent = String(a.sweep);
    r.insertCell().textContent = String(a.readings);
    r.insertCell().textContent = formatNumber(a.maxAbsBias, 4);
    r.insertCell().textContent = formatNumber(a.charge, 3);
    const p = r.insertCell();
    p.className = 'num';
    // Value and "± error" each kept whole: in the narrow panel the cell wraps between them only.
    const [value, err] = (a.parameter ? formatParameter(a.parameter, a.parameter.name).text : '—').split(' ± ');
    p.append(el('span', value, 'whole'));
    if (err !== undefined) p.append(' ', el('span', `± ${err}`, 'whole'));
    r.insertCell().textContent = a.stopReason.replace(/-/g, ' ');
  }
  const total = sweeps.reduce((n, a) => n + a.readings, 0);
  box.append(
    el(
      'p',
      `${sweeps.length} adaptive sweep(s), ${total} readings in all${sweeps.length > ADAPTIVE_ROWS ? `; the newest ${ADAPTIVE_ROWS} shown` : ''}. Each stops once the target's standard error is reached (target reached), at the current limit or compliance, at the end of the range (bias limit), at the highest level an earlier sweep needed (earlier top) or after its most points (point budget); a sweep cut by an abort is marked interrupted.`,
      'source',
    ),
    table,
  );
  return true;
}
