/**
 * The text panels: cautions, fitted parameters (with where they came from), the mechanism ranking.
 * Numbers go through the shared formatter and display units, as in the CLI and the report.
 */
import { settledCaution } from '../../protocols/caution-words.js';
import { formatInputs, formatParameter, parameterLabel } from '../../protocols/display-units.js';
import { formatNumber } from '../../protocols/number-format.js';
import type { FitSummary, SolarSummary, WireEvent } from '../../protocols/wire.js';
import type { AnalysisSettings, Store } from './store.js';

type Level = 'danger' | 'warning' | 'info';

/**
 * The daemon's word that the drift watch has nothing to follow, while it still holds: none once a
 * value has been charted after it (the model or the drift parameter changed since).
 */
export function driftNotWatched(s: Store): Extract<WireEvent, { type: 'caution' }> | undefined {
  const c = s.cautions.filter((x) => x.kind === 'drift-not-watched').at(-1);
  return c && !s.drift.some((d) => d.seq > c.seq && d.value !== null) ? c : undefined;
}

/**
 * How the output ended the run, once it has ended: the last output event, when it is the
 * instrument's answer to the output query (the runner asks it after every run).
 */
export function outputAtEnd(s: Store): Extract<WireEvent, { type: 'output' }> | undefined {
  const o = s.lastOutput;
  return !s.running && s.runEnd && o && !o.on && o.queried ? o : undefined;
}

/**
 * `cutRuns`: sessions the daemon recovered at start-up whose run had the output on when the daemon
 * stopped (nothing turned it off; an instrument keeps its output state on its own). Said first, as
 * a danger, on the live view until a run of this daemon has started.
 */
export function renderCautions(box: HTMLElement, s: Store, cutRuns: readonly { dir: string; message: string }[] = []): void {
  box.textContent = '';
  const add = (level: Level, tag: string, text: string) => {
    const div = document.createElement('div');
    div.className = `caution ${level}`;
    div.dataset.kind = tag;
    const t = document.createElement('span');
    t.className = 'tag';
    t.textContent = `${level === 'danger' ? '✖' : level === 'warning' ? '⚠' : 'ℹ'} ${tag}`;
    const m = document.createElement('span');
    m.textContent = text;
    div.append(t, m);
    box.append(div);
  };
  if (!s.readOnly)
    for (const r of cutRuns) {
      const name = r.dir.split(/[\\/]/).filter(Boolean).at(-1) ?? r.dir;
      add(
        'danger',
        'output may be on',
        `Session ${name} was cut when its daemon stopped, with the instrument's output on, and nothing turned it off: the terminals may still be live. Check the instrument (its front panel) and turn the output off there before touching the probes or the fixture; follow your lab's safety rules. (${r.message})`,
      );
    }
  if (s.readOnly) add('info', 'read-only', 'A past session from the journal: nothing here controls the instrument.');
  const source = s.sessionEvent?.source;
  if (source && !source.control) add('info', 'watching', `Readings come from ${source.detail}; plumbline does not control this instrument.`);
  // A breakdown test destroys the device on purpose: its caution (the daemon's words, journaled
  // when the test starts) stays on top for as long as the test runs.
  const destructive = s.cautions.filter((c) => c.kind === 'destructive-test').at(-1);
  if (destructive && s.running && !s.readOnly) add('danger', 'destructive test', destructive.message);
  if (s.outputOn && !s.readOnly) {
    const hv = s.cautions.find((c) => c.kind === 'hazard-voltage');
    if (hv) add('danger', 'high voltage', hv.message);
    else add('warning', 'output on', "The output is on: the device terminals are live. Hands off the probes and the fixture; follow your lab's safety rules.");
  } else if (s.lastOutput && !s.lastOutput.on && !s.readOnly) {
    // Said in so many words once a run has turned it off, with what the instrument answered.
    const o = s.lastOutput;
    // (An unconfirmed one has its own danger caution from the daemon, above.)
    if (o.queried && o.confirmed) add('info', 'output off', `The output is off, confirmed by the instrument: ${o.reason}.`);
  } else if (s.lastOutput && s.readOnly) {
    // A past session: how the output ended, from the journal's last output record.
    const o = s.lastOutput;
    if (o.on)
      add(
        'warning',
        'output on at the end',
        `The journal's last output record has the output on (${o.reason}): no output off was journaled after it. An instrument keeps its output state on its own; check its front panel before touching the fixture, and follow your lab's safety rules.`,
      );
    else if (o.queried && o.confirmed) add('info', 'output off', `The run ended with the output off, confirmed by the instrument: ${o.reason}.`);
    else if (!o.queried)
      add(
        'info',
        'output off',
        `The journal's last output record: output off ${o.sent === false ? 'could NOT be sent' : 'sent'} (${o.reason}); the instrument was not asked to confirm it.`,
      );
    // (An off the instrument did not confirm has its own danger caution in the journal, below.)
  }
  const latest = new Map<string, Extract<WireEvent, { type: 'caution' }>>();
  for (const c of s.cautions) latest.set(c.kind, c);
  const unwatched = driftNotWatched(s);
  if (unwatched) latest.set(unwatched.kind, unwatched);
  else latest.delete('drift-not-watched');
  const order: [string, Level, string][] = [
    ['breakdown-confirmed', 'danger', 'breakdown'],
    ['instrument-fault', 'danger', 'instrument fault'],
    ['output-unconfirmed', 'danger', 'output not confirmed off'],
    ['journal-fault', 'danger', 'journal fault'],
    ['drift-limit', 'danger', 'drift limit'],
    ['breakdown-suspected', 'warning', 'breakdown suspected'],
    ['drift-warning', 'warning', 'drift warning'],
    ['drift-baseline-trend', 'warning', 'baseline trend'],
    ['drift-not-watched', 'warning', 'drift not watched'],
    ['compliance', 'warning', 'compliance'],
    ['recovery', 'warning', 'recovered'],
  ];
  // Once the run has ended and the instrument has answered its output query, a caution that spoke
  // of the output being turned off (or going on again for the check after a test) is read in the
  // past, with that answer: it must not go on saying that something is under way.
  const end = outputAtEnd(s);
  for (const [kind, level, tag] of order) {
    const c = latest.get(kind);
    if (!c) continue;
    const message = end && end.seq > c.seq ? settledCaution(c.message, end) : c.message;
    add(level, tag, `${c.sweep !== undefined ? `sweep ${c.sweep}: ` : ''}${message}`);
  }
}

/** "fowler-nordheim · window 5 … 9 V · thickness 7 nm, area 1e-4 cm²". */
export function describeAnalysis(a: AnalysisSettings | null | undefined): string {
  if (!a) return 'settings not recorded';
  const w = a.window;
  const win =
    typeof w === 'object'
      ? `window ${w.from !== undefined ? formatNumber(w.from) : '−∞'} … ${w.to !== undefined ? formatNumber(w.to) : '∞'} V`
      : w === 'auto'
        ? 'automatic window'
        : 'all points';
  const inputs = formatInputs(a.inputs ?? {});
  return `${a.model} · ${win}${inputs ? ` · ${inputs}` : ''}${a.solar ? ` · solar cell${a.solar.irradiance !== undefined ? ` at ${formatNumber(a.solar.irradiance)} W/m²` : ''}` : ''}`;
}

/** A table cell with "value ± error" and its display unit (none for a dimensionless value). */
function fillValue(c: HTMLTableCellElement, p: { value: number; stdErr: number; unit: string }, key: string): void {
  const f = formatParameter(p, key);
  const sv = document.createElement('span');
  sv.className = 'num';
  sv.textContent = f.text;
  c.append(sv);
  if (f.unit) {
    const su = document.createElement('span');
    su.className = 'unit';
    su.textContent = ` ${f.unit}`;
    c.append(su);
  }
}

export interface ParamColumn {
  readonly title: string;
  readonly fit: FitSummary | null | undefined;
}

/**
 * A fit's parameters; a mechanism without physical parameters (a straight line of raw columns)
 * shows its line's slope and intercept instead, in the units of the axes the daemon gave it (a
 * station's readings: A/V and A). Axes without a unit (raw columns of unknown meaning, or a fit
 * journaled before the daemon labelled them) are said to be in the units of y and x, not given
 * invented ones.
 */
export function lineFigures(fit: FitSummary | null | undefined): Record<string, { value: number; stdErr: number; unit: string }> {
  if (!fit) return {};
  if (Object.keys(fit.parameters).length) return fit.parameters;
  const { x, y } = fit.axes;
  if (y.kind === 'log') return {};
  const slope = x.unit && y.unit ? `${y.unit}/${x.unit}` : `(units of ${y.unit || y.label}/${x.unit || x.label})`;
  return {
    slope: { value: fit.line.slope, stdErr: fit.line.slopeStdErr, unit: slope },
    intercept: { value: fit.line.intercept, stdErr: fit.line.interceptStdErr, unit: y.unit || `(units of ${y.label})` },
  };
}

/** The parameters table: one row per parameter, one column per fit (current sweep, previous). */
export function renderParams(box: HTMLElement, cols: ParamColumn[], empty: string): void {
  box.textContent = '';
  const names = [...new Set(cols.flatMap((c) => Object.keys(lineFigures(c.fit))))];
  if (names.length === 0) {
    box.textContent = empty;
    return;
  }
  const table = document.createElement('table');
  table.className = 'params';
  const head = table.insertRow();
  for (const h of ['', ...cols.map((c) => c.title)]) {
    const th = document.createElement('th');
    th.textContent = h;
    head.append(th);
  }
  for (const n of names) {
    const row = table.insertRow();
    row.dataset.param = n;
    const c0 = row.insertCell();
    c0.textContent = parameterLabel(n);
    c0.title = n;
    cols.forEach((col, k) => {
      const c = row.insertCell();
      c.className = k === 0 ? 'value' : '';
      const p = lineFigures(col.fit)[n];
      if (p) fillValue(c, p, n);
    });
  }
  box.append(table);
}

export function renderFitNotes(box: HTMLElement, fit: FitSummary | null | undefined): void {
  box.textContent = '';
  if (!fit) return;
  const ul = document.createElement('ul');
  ul.className = 'warnings';
  if (!fit.plausible) {
    const li = document.createElement('li');
    li.className = 'implausible';
    // The check that decided it, as the daemon recorded it (older journals: the list below).
    const why = fit.failed?.[0];
    li.textContent = why ? `Not plausible for this mechanism: ${why}.` : 'Not plausible for this mechanism: see the notes.';
    ul.append(li);
  }
  for (const t of fit.warnings) {
    const li = document.createElement('li');
    li.textContent = t;
    ul.append(li);
  }
  const li = document.createElement('li');
  li.className = 'plain';
  li.textContent = `window ${formatNumber(fit.window.from)} … ${formatNumber(fit.window.to)} V (${fit.window.mode}), ${fit.line.n} points, R² ${fit.line.r2.toFixed(5)}`;
  ul.append(li);
  box.append(ul);
}

/**
 * Every ranked mechanism with its Akaike weight (they sum to 1 over the list), whether its
 * parameters pass the physical checks, and the reasons (collapsed).
 */
export function renderRanking(box: HTMLElement, r: Extract<WireEvent, { type: 'ranking' }> | null): void {
  box.textContent = '';
  if (!r) {
    box.textContent = 'After the first complete sweep.';
    return;
  }
  if (r.ranking.length === 0) {
    box.textContent = `No mechanism could be ranked on sweep ${r.sweep}.`;
    for (const w of r.warnings) {
      const p = document.createElement('p');
      p.className = 'warn';
      p.textContent = w;
      box.append(p);
    }
    return;
  }
  const sum = r.ranking.reduce((a, e) => a + e.score, 0);
  const head = document.createElement('p');
  head.className = 'hint';
  head.textContent = `Sweep ${r.sweep}: Akaike weights of ${r.ranking.length} mechanisms (sum ${sum.toFixed(3)}); at most one ranking a second. ✓ passes the physical checks, ✗ fails them.`;
  const ol = document.createElement('ol');
  ol.className = 'ranking';
  for (const e of r.ranking) {
    const li = document.createElement('li');
    li.dataset.model = e.model;
    const det = document.createElement('details');
    const sum = document.createElement('summary');
    const name = document.createElement('span');
    name.textContent = `${e.plausible ? '✓' : '✗'} ${e.title}`;
    name.className = e.plausible ? 'yes' : 'no';
    const sc = document.createElement('span');
    sc.className = 'score';
    sc.textContent = ` — weight ${e.score >= 0.001 ? e.score.toFixed(3) : '< 0.001'}, ΔAICc ${formatNumber(e.deltaAicc, 3)}${e.plausible ? '' : ' (implausible)'}`;
    sum.append(name, sc);
    det.append(sum);
    const ul = document.createElement('ul');
    for (const why of e.reasons) {
      const w = document.createElement('li');
      w.textContent = why;
      ul.append(w);
    }
    if (e.reasons.length) det.append(ul);
    li.append(det);
    ol.append(li);
  }
  box.append(head, ol);
  for (const w of r.warnings) {
    const p = document.createElement('p');
    p.className = 'warn';
    p.textContent = w;
    box.append(p);
  }
}

/** The solar figures of merit and the single-diode parameters, each with its uncertainty. */
export function renderSolar(box: HTMLElement, title: string, solar: SolarSummary): void {
  box.textContent = '';
  const p = document.createElement('p');
  p.className = 'source';
  p.textContent = `${title} · G = ${formatNumber(solar.irradiance)} W/m²${solar.area !== null ? ` · area ${formatNumber(solar.area * 1e4)} cm²` : ' · no area: J_sc and η need one'} · T ${formatNumber(solar.temperature.value)} K${solar.temperature.assumed ? ' (assumed)' : ''}. Figures from local fits of the measured curve; the diode from the single-diode model.`;
  box.append(p);
  if (solar.error) {
    const e = document.createElement('p');
    e.className = 'warn';
    e.textContent = `No figures of merit: ${solar.error}`;
    box.append(e);
  }
  const table = document.createElement('table');
  table.className = 'params solar';
  const add = (key: string, fig: { value: number; stdErr: number; unit: string }, cls = '') => {
    const row = table.insertRow();
    row.dataset.param = key;
    if (cls) row.className = cls;
    const c0 = row.insertCell();
    c0.textContent = parameterLabel(key);
    c0.title = key;
    const c = row.insertCell();
    c.className = 'value';
    fillValue(c, fig, key);
  };
  for (const [k, f] of Object.entries(solar.figures)) add(k, f);
  for (const [k, f] of Object.entries(solar.model?.parameters ?? {})) add(k, f, 'model');
  box.append(table);
  if (solar.warnings.length) {
    const ul = document.createElement('ul');
    ul.className = 'warnings';
    for (const w of solar.warnings) {
      const li = document.createElement('li');
      li.textContent = w;
      ul.append(li);
    }
    box.append(ul);
  }
}
