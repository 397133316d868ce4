/**
 * The Run and Analysis forms: filled from what the daemon says (the station's default plan and
 * limits, the analysis in force), every input a mechanism uses with its display unit (from
 * protocols/display-units.ts: the page does not scale units by hand), and read back to SI with a
 * message naming the field when something is missing or out of range.
 */
import { fromDisplay, INPUTS, toDisplay } from '../../protocols/display-units.js';
import { formatNumber } from '../../protocols/number-format.js';
import type { AnalysisSettings } from './store.js';

export interface StationStatus {
  running: boolean;
  control: boolean;
  analysis: AnalysisSettings;
  limits: { maxVoltage: number; maxCompliance: number; maxPower: number; hazardVoltage?: number };
  instrument: string;
  scenario: string | null;
  plan: { kind: string; start?: number; stop?: number; points?: number; values?: number[]; repeat?: number; compliance?: number; dual?: boolean } | null;
  models: { id: string; title: string; requires: string[]; uses: string[] }[];
}

const field = (f: HTMLFormElement, name: string) => f.elements.namedItem(name) as HTMLInputElement;

/** Adds one labelled input per analysis input (SI name → display unit) to the analysis form. */
export function buildInputFields(container: HTMLElement): void {
  container.textContent = '';
  for (const [name, d] of Object.entries(INPUTS)) {
    const label = document.createElement('label');
    label.dataset.input = name;
    label.title = d.hint;
    const text = document.createElement('span');
    text.textContent = d.unit ? `${d.label} (${d.unit})` : d.label;
    const input = document.createElement('input');
    input.name = name;
    input.type = 'number';
    input.step = 'any';
    label.append(text, input);
    container.append(label);
  }
}

/** Marks which inputs the chosen model needs (required), uses, or ignores. */
export function markInputs(container: HTMLElement, model: StationStatus['models'][number] | undefined): void {
  for (const label of container.querySelectorAll<HTMLElement>('label[data-input]')) {
    const name = label.dataset.input as string;
    const state = model?.requires.includes(name) ? 'required' : model?.uses.includes(name) ? 'used' : 'unused';
    label.dataset.state = state;
    const input = label.querySelector('input') as HTMLInputElement;
    input.required = state === 'required';
    input.placeholder = state === 'required' ? 'required' : state === 'used' ? 'optional' : 'not used';
  }
}

export function fillAnalysis(f: HTMLFormElement, a: AnalysisSettings): void {
  (f.elements.namedItem('model') as HTMLSelectElement).value = a.model;
  for (const [name, d] of Object.entries(INPUTS)) {
    const v = a.inputs?.[name];
    field(f, name).value = v === undefined ? '' : formatNumber(toDisplay(v, d.si), 6);
  }
  const w = a.window;
  field(f, 'from').value = typeof w === 'object' && w.from !== undefined ? formatNumber(w.from, 6) : '';
  field(f, 'to').value = typeof w === 'object' && w.to !== undefined ? formatNumber(w.to, 6) : '';
  const solar = f.elements.namedItem('solar') as HTMLInputElement | null;
  if (solar) solar.checked = a.solar !== undefined;
  const g = f.elements.namedItem('irradiance') as HTMLInputElement | null;
  if (g) g.value = a.solar?.irradiance !== undefined ? formatNumber(a.solar.irradiance, 6) : '';
}

/** A number field: undefined when empty; an error naming the field when it is not a number. */
function read(f: HTMLFormElement, name: string, what: string): number | undefined {
  const raw = field(f, name).value.trim();
  if (raw === '') return undefined;
  const v = Number(raw);
  if (!Number.isFinite(v)) throw new Error(`${what}: '${raw}' is not a number`);
  return v;
}

/** The analysis form as settings (SI). Throws with the field's name on bad input. */
export function readAnalysis(f: HTMLFormElement, model: StationStatus['models'][number] | undefined): AnalysisSettings {
  const inputs: Record<string, number> = {};
  for (const [name, d] of Object.entries(INPUTS)) {
    const v = read(f, name, d.label);
    if (v === undefined) {
      if (model?.requires.includes(name)) throw new Error(`${d.label}: the ${model.title} model needs it${d.unit ? ` (in ${d.unit})` : ''}`);
      continue;
    }
    if (name !== 'flatBand' && !(v > 0)) throw new Error(`${d.label}: must be positive, got ${v}`);
    inputs[name] = fromDisplay(v, d.si);
  }
  const from = read(f, 'from', 'window from');
  const to = read(f, 'to', 'window to');
  const solar = (f.elements.namedItem('solar') as HTMLInputElement | null)?.checked;
  const g = f.elements.namedItem('irradiance') ? read(f, 'irradiance', 'irradiance (W/m²)') : undefined;
  return {
    model: (f.elements.namedItem('model') as HTMLSelectElement).value,
    inputs,
    window: from !== undefined || to !== undefined ? { from, to } : 'auto',
    ...(solar ? { solar: g !== undefined ? { irradiance: g } : {} } : {}),
  };
}

/** Fills the Run form from the station's default plan and shows its limits beside the fields. */
export function fillPlan(f: HTMLFormElement, st: StationStatus): void {
  const p = st.plan;
  const set = (name: string, v: number | undefined) => {
    if (v !== undefined) field(f, name).value = formatNumber(v, 6);
  };
  if (p) {
    (f.elements.namedItem('kind') as HTMLSelectElement).value = p.kind === 'log' ? 'log' : 'linear';
    set('start', p.start ?? p.values?.[0]);
    set('stop', p.stop ?? p.values?.at(-1));
    set('points', p.points ?? p.values?.length);
    set('repeat', p.repeat);
    set('compliance', p.compliance);
    field(f, 'dual').checked = Boolean(p.dual);
  }
  const L = st.limits;
  for (const n of ['start', 'stop']) {
    field(f, n).max = String(L.maxVoltage);
    field(f, n).min = String(-L.maxVoltage);
  }
  field(f, 'compliance').max = String(L.maxCompliance);
  const hint = f.querySelector('#limits-hint');
  if (hint) hint.textContent = `Station limits: |V| ≤ ${formatNumber(L.maxVoltage)} V, compliance ≤ ${formatNumber(L.maxCompliance)} A, |V| × compliance ≤ ${formatNumber(L.maxPower)} W${L.hazardVoltage !== undefined ? `; caution above ${formatNumber(L.hazardVoltage)} V` : ''}. The daemon refuses anything beyond them.`;
}

/** The Run form as a plan. Throws naming the field (and the station limit) on bad input. */
export function readPlan(f: HTMLFormElement, st: StationStatus | null): Record<string, unknown> {
  const need = (name: string, what: string): number => {
    const v = read(f, name, what);
    if (v === undefined) throw new Error(`${what}: enter a value`);
    return v;
  };
  const L = st?.limits;
  const start = need('start', 'start (V)');
  const stop = need('stop', 'stop (V)');
  const points = need('points', 'points');
  const repeat = need('repeat', 'sweeps');
  const compliance = read(f, 'compliance', 'compliance (A)');
  if (compliance === undefined) throw new Error(`compliance (A): enter the current limit the instrument holds${L ? ` (at most ${formatNumber(L.maxCompliance)} A, the station limit)` : ''}`);
  if (!(compliance > 0)) throw new Error(`compliance (A): must be positive, got ${compliance}`);
  if (L && compliance > L.maxCompliance) throw new Error(`compliance (A): ${formatNumber(compliance)} A is above the station limit of ${formatNumber(L.maxCompliance)} A`);
  for (const [v, what] of [[start, 'start'], [stop, 'stop']] as const) {
    if (L && Math.abs(v) > L.maxVoltage) throw new Error(`${what} (V): ${formatNumber(v)} V is beyond the station limit of ±${formatNumber(L.maxVoltage)} V`);
  }
  if (!Number.isInteger(points) || points < 2) throw new Error(`points: a whole number ≥ 2, got ${points}`);
  if (!Number.isInteger(repeat) || repeat < 1) throw new Error(`sweeps: a whole number ≥ 1, got ${repeat}`);
  return {
    kind: (f.elements.namedItem('kind') as HTMLSelectElement).value,
    start,
    stop,
    points,
    repeat,
    compliance,
    dual: field(f, 'dual').checked,
  };
}
