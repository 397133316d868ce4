/**
 * The Analysis form (the Run form is in plan-form.ts): filled from what the daemon says (the
 * analysis in force), every input a mechanism uses with its display unit (from
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
  /** The station's default plan (SI), null when it has none. */
  plan: ({ kind: string } & Record<string, unknown>) | null;
  /** Per plan kind, the values the station fills in for fields left out (SI). */
  planDefaults?: Record<string, Record<string, unknown>>;
  /** Each model, with the parameters its fit gives with the station's inputs (the daemon's own list). */
  models: { id: string; title: string; requires: string[]; uses: string[]; parameters?: string[] }[];
  /** Sessions this daemon recovered when it started (runs cut by a crash). */
  recovered?: { dir: string; message: string; outputMayBeOn: boolean }[];
  /** How the last run of this daemon ended (null before its first). */
  lastRun?: unknown;
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
    const input = f.elements.namedItem(name) as HTMLInputElement | null;
    // The input fields are built once the station's status arrives; until then there is nothing to fill.
    if (!input) continue;
    const v = a.inputs?.[name];
    input.value = v === undefined ? '' : formatNumber(toDisplay(v, d.si), 6);
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
