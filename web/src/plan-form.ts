/**
 * The Run form: every plan kind the station runs — linear and log sweeps, adaptive sweeps, and the
 * breakdown tests of thin dielectrics (voltage ramp, current ramp, constant-voltage stress) — from
 * one table of fields. Each field says which kinds use it, its unit as shown (and the scale to SI),
 * and what it must satisfy; the form shows only the chosen kind's fields, fills them from the
 * station's default plan and from the values the station fills in when a field is left out, and
 * reads them back to a plan in SI with a message naming the field (and the station limit) when
 * something is missing or out of range. The daemon checks every plan again: this is for the person
 * at the bench, so a typo is caught before anything is sent.
 */
import { parameterLabel } from '../../protocols/display-units.js';
import { formatNumber } from '../../protocols/number-format.js';
import type { StationStatus } from './forms.js';

export type PlanKind = 'linear' | 'log' | 'adaptive' | 'voltage-ramp' | 'current-ramp' | 'constant-voltage';

export const PLAN_KINDS: readonly { kind: PlanKind; label: string; destructive: boolean }[] = [
  { kind: 'linear', label: 'linear sweep', destructive: false },
  { kind: 'log', label: 'log sweep', destructive: false },
  { kind: 'adaptive', label: 'adaptive sweep', destructive: false },
  { kind: 'voltage-ramp', label: '⚠ voltage ramp to breakdown', destructive: true },
  { kind: 'current-ramp', label: '⚠ current ramp to breakdown', destructive: true },
  { kind: 'constant-voltage', label: '⚠ constant-voltage stress to breakdown', destructive: true },
];

export function isDestructive(kind: string): boolean {
  return PLAN_KINDS.some((k) => k.kind === kind && k.destructive);
}

interface PlanField {
  /** The input's name in the form (unique). */
  readonly name: string;
  /** Where the value goes in the plan (dot path). */
  readonly path: string;
  readonly kinds: readonly PlanKind[];
  readonly label: string;
  /** The unit shown ('' for a count or a ratio). */
  readonly unit: string;
  /** shown = SI × scale (default 1). */
  readonly scale?: number;
  readonly required?: boolean;
  readonly integer?: boolean;
  readonly positive?: boolean;
  readonly nonzero?: boolean;
  readonly min?: number;
  readonly max?: number;
  /** A bias the instrument applies (V) or a current it forces (A): checked against the station limits. */
  readonly level?: 'voltage' | 'current';
  /** A current compliance (A): at most the station's. */
  readonly compliance?: boolean;
  readonly checkbox?: boolean;
  /** One of a list the page fills in (a <select>): the adaptive target, from the model's parameters. */
  readonly choice?: boolean;
  /** Fields of a group are given all together or not at all. */
  readonly group?: string;
  readonly title?: string;
}

const SWEEP: PlanKind[] = ['linear', 'log'];
const SWEEPS: PlanKind[] = ['linear', 'log', 'adaptive'];
const TESTS: PlanKind[] = ['voltage-ramp', 'current-ramp', 'constant-voltage'];

/** Every field of every kind, in the order shown. Defaults shown come from the station, never from here. */
export const PLAN_FIELDS: readonly PlanField[] = [
  { name: 'start', path: 'start', kinds: SWEEPS, label: 'start', unit: 'V', required: true, level: 'voltage' },
  { name: 'stop', path: 'stop', kinds: SWEEPS, label: 'stop', unit: 'V', required: true, level: 'voltage' },
  { name: 'points', path: 'points', kinds: SWEEP, label: 'points', unit: '', required: true, integer: true, min: 2 },
  { name: 'maxPoints', path: 'maxPoints', kinds: ['adaptive'], label: 'most points per sweep', unit: '', required: true, integer: true, min: 8 },
  { name: 'repeat', path: 'repeat', kinds: SWEEPS, label: 'sweeps', unit: '', required: true, integer: true, min: 1 },
  { name: 'compliance', path: 'compliance', kinds: SWEEPS, label: 'compliance', unit: 'A', required: true, positive: true, compliance: true },
  { name: 'dual', path: 'dual', kinds: SWEEP, label: 'out and back', unit: '', checkbox: true },
  {
    name: 'targetParameter',
    path: 'target.parameter',
    kinds: ['adaptive'],
    label: 'target parameter',
    unit: '',
    required: true,
    choice: true,
    title: "the fitted parameter whose standard error ends each sweep: one the Analysis form's model gives (the daemon checks the plan against it again)",
  },
  {
    name: 'targetStdErr',
    path: 'target.stdErr',
    kinds: ['adaptive'],
    label: 'target standard error',
    unit: '',
    required: true,
    positive: true,
    title: "each sweep stops once the parameter's total standard error is this small",
  },
  {
    name: 'currentLimit',
    path: 'currentLimit',
    kinds: ['adaptive'],
    label: 'stop at current',
    unit: 'A',
    positive: true,
    title: 'a sweep stops when the current reaches this (default: half the compliance)',
  },
  { name: 'rampStart', path: 'start', kinds: ['voltage-ramp'], label: 'ramp from', unit: 'V', required: true, level: 'voltage' },
  {
    name: 'rampStop',
    path: 'stop',
    kinds: ['voltage-ramp'],
    label: 'ramp at most to',
    unit: 'V',
    required: true,
    level: 'voltage',
    title: 'the device "survived" if it reaches this intact',
  },
  { name: 'step', path: 'step', kinds: ['voltage-ramp'], label: 'step', unit: 'V', required: true, positive: true },
  {
    name: 'currentStart',
    path: 'start',
    kinds: ['current-ramp'],
    label: 'first current',
    unit: 'A',
    required: true,
    nonzero: true,
    level: 'current',
    title: 'its sign gives the polarity',
  },
  { name: 'currentStop', path: 'stop', kinds: ['current-ramp'], label: 'most current', unit: 'A', required: true, nonzero: true, level: 'current' },
  {
    name: 'stepsPerDecade',
    path: 'stepsPerDecade',
    kinds: ['current-ramp'],
    label: 'steps per decade',
    unit: '',
    required: true,
    integer: true,
    min: 1,
    max: 1000,
  },
  { name: 'stepTime', path: 'stepTime', kinds: ['voltage-ramp', 'current-ramp'], label: 'time per step', unit: 's', required: true, positive: true },
  { name: 'voltageLimit', path: 'voltageLimit', kinds: ['current-ramp'], label: 'voltage limit', unit: 'V', required: true, positive: true, level: 'voltage' },
  { name: 'stress', path: 'stress', kinds: ['constant-voltage'], label: 'stress', unit: 'V', required: true, nonzero: true, level: 'voltage' },
  {
    name: 'duration',
    path: 'duration',
    kinds: ['constant-voltage'],
    label: 'longest stress',
    unit: 's',
    required: true,
    positive: true,
    title: 'the device "survived" if it holds this long',
  },
  { name: 'sampleEvery', path: 'sampleEvery', kinds: ['constant-voltage'], label: 'read every', unit: 's', required: true, positive: true },
  {
    name: 'testCompliance',
    path: 'compliance',
    kinds: ['voltage-ramp', 'constant-voltage'],
    label: 'compliance',
    unit: 'A',
    required: true,
    positive: true,
    compliance: true,
  },
  {
    name: 'currentJump',
    path: 'criteria.currentJump',
    kinds: ['voltage-ramp', 'constant-voltage'],
    label: 'breakdown: current jump ×',
    unit: '',
    min: 1.5,
    title: '|I| rising by this factor from one reading to the next is a hard breakdown',
  },
  {
    name: 'slopeFactor',
    path: 'criteria.slopeFactor',
    kinds: ['voltage-ramp'],
    label: 'breakdown: slope rise ×',
    unit: '',
    min: 0,
    title: 'the slope of ln|I| against V rising to this multiple of its recent median is a soft breakdown (0: off)',
  },
  {
    name: 'breakdownCurrent',
    path: 'criteria.currentLimit',
    kinds: ['voltage-ramp', 'constant-voltage'],
    label: 'breakdown: current at least',
    unit: 'A',
    positive: true,
    title: 'default: the compliance',
  },
  {
    name: 'voltageDrop',
    path: 'criteria.voltageDrop',
    kinds: ['current-ramp'],
    label: 'breakdown: voltage falls by',
    unit: '%',
    scale: 100,
    min: 1,
    max: 99,
    title: 'the voltage falling by this share of its highest value is a collapse (breakdown)',
  },
  {
    name: 'senseStart',
    path: 'sense.start',
    kinds: ['constant-voltage'],
    label: 'sense sweep from',
    unit: 'V',
    level: 'voltage',
    group: 'sense',
    title: 'an optional low-field sweep now and then, to watch the leakage grow',
  },
  { name: 'senseStop', path: 'sense.stop', kinds: ['constant-voltage'], label: 'sense sweep to', unit: 'V', level: 'voltage', group: 'sense' },
  { name: 'sensePoints', path: 'sense.points', kinds: ['constant-voltage'], label: 'sense points', unit: '', integer: true, min: 2, group: 'sense' },
  {
    name: 'senseEvery',
    path: 'sense.every',
    kinds: ['constant-voltage'],
    label: 'sense every',
    unit: 's',
    positive: true,
    group: 'sense',
    title: 'seconds of stress between sense sweeps',
  },
  {
    name: 'useVoltage',
    path: 'useVoltage',
    kinds: TESTS,
    label: 'use-condition check at',
    unit: 'V',
    level: 'voltage',
    title: 'optional: one reading at the use voltage before and after the test (leakage before and after)',
  },
  {
    name: 'useCurrentLimit',
    path: 'useCurrentLimit',
    kinds: TESTS,
    label: 'initial failure above',
    unit: 'A',
    positive: true,
    title: 'a device drawing more than this at the use voltage before the test is not stressed',
  },
];

const field = (f: HTMLFormElement, name: string) => f.elements.namedItem(name) as HTMLInputElement | null;
const labelText = (d: PlanField, unit = d.unit) => (unit ? `${d.label} (${unit})` : d.label);

function get(o: unknown, path: string): unknown {
  let x = o;
  for (const k of path.split('.')) x = x && typeof x === 'object' ? (x as Record<string, unknown>)[k] : undefined;
  return x;
}

function set(o: Record<string, unknown>, path: string, v: unknown): void {
  const keys = path.split('.');
  let x = o;
  for (const k of keys.slice(0, -1)) x = (x[k] ??= {}) as Record<string, unknown>;
  x[keys[keys.length - 1]] = v;
}

/** Builds the kind selector's options and one labelled input per plan field into `container`. */
export function buildPlanFields(f: HTMLFormElement, container: HTMLElement): void {
  const kind = f.elements.namedItem('kind') as HTMLSelectElement;
  kind.textContent = '';
  for (const k of PLAN_KINDS) {
    const o = document.createElement('option');
    o.value = k.kind;
    o.textContent = k.label;
    kind.append(o);
  }
  container.textContent = '';
  for (const d of PLAN_FIELDS) {
    const label = document.createElement('label');
    label.dataset.field = d.name;
    label.dataset.kinds = d.kinds.join(' ');
    if (d.title) label.title = d.title;
    const text = document.createElement('span');
    text.textContent = labelText(d);
    if (d.choice) {
      // Its options come from the page (setChoices), as the analysis model changes.
      const select = document.createElement('select');
      select.name = d.name;
      label.append(text, select);
      container.append(label);
      continue;
    }
    const input = document.createElement('input');
    input.name = d.name;
    if (d.checkbox) {
      label.className = 'check';
      input.type = 'checkbox';
      label.append(input, document.createTextNode(d.label));
    } else {
      input.type = 'number';
      input.step = d.integer ? '1' : 'any';
      input.placeholder = d.required ? 'required' : 'optional';
      label.append(text, input);
    }
    container.append(label);
  }
}

/** Shows the fields of one kind (the others are hidden and disabled, so they are not read). */
export function showKind(f: HTMLFormElement, kind: string): void {
  for (const label of f.querySelectorAll<HTMLElement>('label[data-kinds]')) {
    const on = (label.dataset.kinds ?? '').split(' ').includes(kind);
    label.hidden = !on;
    const input = label.querySelector('input, select') as HTMLInputElement | HTMLSelectElement;
    input.disabled = !on;
  }
}

/**
 * Fills the chosen kind's fields: from the station's default plan when it is of this kind, else
 * from the values the station fills in for a field left out (`planDefaults`). A field that already
 * holds a value keeps it unless `overwrite`.
 */
export function fillKind(f: HTMLFormElement, st: StationStatus, kind: string, overwrite = false): void {
  const own = st.plan && st.plan.kind === kind ? st.plan : null;
  const defaults = st.planDefaults?.[kind] ?? {};
  for (const d of PLAN_FIELDS) {
    if (!d.kinds.includes(kind as PlanKind)) continue;
    const input = field(f, d.name);
    if (!input) continue;
    const v = get(own, d.path) ?? get(defaults, d.path);
    if (d.checkbox) {
      if (v !== undefined && (overwrite || own)) input.checked = Boolean(v);
      continue;
    }
    if (v === undefined || (!overwrite && input.value.trim() !== '')) continue;
    // A choice not listed yet (its options come later) is chosen once it is (setChoices).
    if (d.choice) input.dataset.preferred = String(v);
    input.value = typeof v === 'number' ? formatNumber(v * (d.scale ?? 1), 6) : String(v);
  }
}

/** Fills the Run form from the station's default plan and shows the station's limits beside it. */
export function fillPlan(f: HTMLFormElement, st: StationStatus): void {
  const p = st.plan;
  const kind = f.elements.namedItem('kind') as HTMLSelectElement;
  if (p) {
    // A list sweep is offered as a linear one over the same range.
    const k = PLAN_KINDS.some((x) => x.kind === p.kind) ? p.kind : 'linear';
    kind.value = k;
    if (p.kind === 'list' && Array.isArray(p.values) && p.values.length) {
      const values = p.values as number[];
      const put = (name: string, v: number | undefined) => {
        const el = field(f, name);
        if (el && v !== undefined) el.value = formatNumber(v, 6);
      };
      put('start', values[0]);
      put('stop', values[values.length - 1]);
      put('points', values.length);
      put('repeat', typeof p.repeat === 'number' ? p.repeat : undefined);
      put('compliance', typeof p.compliance === 'number' ? p.compliance : undefined);
    } else fillKind(f, st, k, true);
  }
  showKind(f, kind.value);
  const L = st.limits;
  for (const d of PLAN_FIELDS) {
    const el = field(f, d.name);
    if (!el || d.checkbox || d.choice) continue;
    if (d.level === 'voltage') {
      el.max = String(L.maxVoltage);
      el.min = d.positive ? '0' : String(-L.maxVoltage);
    } else if (d.compliance || d.level === 'current') el.max = String(L.maxCompliance);
  }
  const hint = f.querySelector('#limits-hint');
  if (hint)
    hint.textContent = `Station limits: |V| ≤ ${formatNumber(L.maxVoltage)} V, compliance ≤ ${formatNumber(L.maxCompliance)} A, |V| × compliance ≤ ${formatNumber(L.maxPower)} W${L.hazardVoltage !== undefined ? `; caution above ${formatNumber(L.hazardVoltage)} V` : ''}. The daemon refuses anything beyond them.`;
}

/**
 * Lists `names` as the choices of a choice field (the adaptive target: the model's parameters),
 * keeping the one chosen while it is still listed, else choosing the first. With no names the field
 * holds one empty placeholder, `none` saying why, and reads as not given.
 */
export function setChoices(f: HTMLFormElement, name: string, names: readonly string[], none: string): void {
  const select = f.elements.namedItem(name) as HTMLSelectElement | null;
  if (!select) return;
  const was = select.value;
  select.textContent = '';
  for (const n of names) {
    const o = document.createElement('option');
    o.value = n;
    // The trade's name, with the key the plan file takes.
    const label = parameterLabel(n);
    o.textContent = label === n ? n : `${label} (${n})`;
    select.append(o);
  }
  if (names.length === 0) {
    const o = document.createElement('option');
    o.value = '';
    o.textContent = none;
    select.append(o);
  }
  const preferred = select.dataset.preferred ?? '';
  select.value = names.includes(was) ? was : names.includes(preferred) ? preferred : (names[0] ?? '');
}

/** Sets the unit shown beside the adaptive target's standard error (the parameter's display unit). */
export function setTargetUnit(f: HTMLFormElement, unit: string | null): void {
  const d = PLAN_FIELDS.find((x) => x.name === 'targetStdErr') as PlanField;
  const span = f.querySelector('label[data-field="targetStdErr"] > span');
  if (span) span.textContent = unit === null ? `${d.label} (in the parameter's unit)` : labelText(d, unit);
}

/**
 * The Run form as a plan (SI). Throws naming the field, and the station limit it breaks, on bad
 * input. `target` converts the adaptive target's standard error from its display unit to the
 * parameter's own (scale: shown = own × scale).
 */
export function readPlan(f: HTMLFormElement, st: StationStatus | null, target: { unit: string; scale: number } | null = null): Record<string, unknown> {
  const kind = (f.elements.namedItem('kind') as HTMLSelectElement).value as PlanKind;
  const L = st?.limits;
  const plan: Record<string, unknown> = { kind };
  const shown: Record<string, number> = {};
  const groups = new Map<string, { given: string[]; missing: string[] }>();
  const fields = PLAN_FIELDS.filter((d) => d.kinds.includes(kind));
  for (const d of fields) {
    const input = field(f, d.name) as HTMLInputElement;
    if (d.checkbox) {
      set(plan, d.path, input.checked);
      continue;
    }
    const unit = d.name === 'targetStdErr' && target ? target.unit : d.unit;
    const what = labelText(d, unit);
    const raw = input.value.trim();
    if (d.group) {
      const g = groups.get(d.group) ?? { given: [], missing: [] };
      (raw === '' ? g.missing : g.given).push(what);
      groups.set(d.group, g);
    }
    if (raw === '') {
      if (d.required && d.compliance)
        throw new Error(`${what}: enter the current limit the instrument holds${L ? ` (at most ${formatNumber(L.maxCompliance)} A, the station limit)` : ''}`);
      if (d.required) throw new Error(`${what}: enter a value`);
      continue;
    }
    if (d.choice) {
      set(plan, d.path, raw);
      continue;
    }
    const v = Number(raw);
    if (!Number.isFinite(v)) throw new Error(`${what}: '${raw}' is not a number`);
    if (d.integer && !Number.isInteger(v)) throw new Error(`${what}: a whole number${d.min !== undefined ? ` ≥ ${d.min}` : ''}, got ${raw}`);
    if (d.positive && !(v > 0)) throw new Error(`${what}: must be positive, got ${raw}`);
    if (d.nonzero && v === 0) throw new Error(`${what}: must not be zero`);
    if (d.min !== undefined && v < d.min) throw new Error(`${what}: at least ${d.min}, got ${raw}`);
    if (d.max !== undefined && v > d.max) throw new Error(`${what}: at most ${d.max}, got ${raw}`);
    if (L && d.compliance && v > L.maxCompliance)
      throw new Error(`${what}: ${formatNumber(v)} A is above the station limit of ${formatNumber(L.maxCompliance)} A`);
    if (L && d.level === 'voltage' && Math.abs(v) > L.maxVoltage)
      throw new Error(`${what}: ${formatNumber(v)} V is beyond the station limit of ±${formatNumber(L.maxVoltage)} V`);
    if (L && d.level === 'current' && Math.abs(v) > L.maxCompliance)
      throw new Error(`${what}: ${formatNumber(v)} A is beyond the most current the station may drive, ${formatNumber(L.maxCompliance)} A`);
    shown[d.name] = v;
    const scale = d.name === 'targetStdErr' && target ? target.scale : (d.scale ?? 1);
    set(plan, d.path, v / scale);
  }
  for (const [name, g] of groups) {
    if (g.given.length && g.missing.length) throw new Error(`${g.missing[0]}: enter it too, or leave every ${name} field empty (no ${name} sweeps)`);
  }
  // The power a level could deliver at the compliance (or a current at the voltage limit).
  if (L) {
    const compliance = typeof plan.compliance === 'number' ? plan.compliance : undefined;
    for (const d of fields) {
      const v = shown[d.name];
      if (v === undefined) continue;
      if (d.level === 'voltage' && compliance !== undefined && Math.abs(v) * compliance > L.maxPower) {
        throw new Error(
          `${labelText(d)}: ${formatNumber(v)} V at the ${formatNumber(compliance)} A compliance could deliver ${formatNumber(Math.abs(v) * compliance)} W, above the station limit of ${formatNumber(L.maxPower)} W`,
        );
      }
      if (d.level === 'current' && typeof plan.voltageLimit === 'number' && Math.abs(v) * plan.voltageLimit > L.maxPower) {
        throw new Error(
          `${labelText(d)}: ${formatNumber(v)} A at the ${formatNumber(plan.voltageLimit)} V voltage limit could deliver ${formatNumber(Math.abs(v) * plan.voltageLimit)} W, above the station limit of ${formatNumber(L.maxPower)} W`,
        );
      }
    }
  }
  // What the station would refuse about the plan as a whole, said in the form's words.
  const startName = kind === 'voltage-ramp' ? 'rampStart' : 'start';
  const stopName = kind === 'voltage-ramp' ? 'rampStop' : 'stop';
  const fieldOf = (name: string) => labelText(PLAN_FIELDS.find((d) => d.name === name) as PlanField);
  if ((kind === 'adaptive' || kind === 'voltage-ramp') && plan.start === plan.stop)
    throw new Error(`${fieldOf(stopName)}: must differ from ${fieldOf(startName)}`);
  if (kind === 'log' && !((plan.start as number) * (plan.stop as number) > 0))
    throw new Error(`${fieldOf('start')}: a log sweep needs start and stop of the same sign, neither zero`);
  if (kind === 'current-ramp' && (!((plan.start as number) * (plan.stop as number) > 0) || Math.abs(plan.stop as number) <= Math.abs(plan.start as number))) {
    throw new Error(`${fieldOf('currentStop')}: must have the sign of the first current and a larger magnitude`);
  }
  return plan;
}
