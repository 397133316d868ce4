/**
 * The live page: connects to the daemon's websocket (snapshot, then batches; re-syncs on a gap and
 * reconnects on its own), draws at most once per animation frame, and sends commands over REST.
 * Abort is a plain POST that does not wait for the event stream, so it works while the page lags.
 *
 * What is on screen can always be re-analysed: during a run a settings change goes to the run
 * (journaled, applied from then on, the last finished sweep re-fitted by the daemon); after it, or
 * for a past session, the sweeps on screen are fitted again by the daemon and the results are kept
 * beside the journal (reanalysis.jsonl), never in it. The panels say which settings produced each
 * number.
 */
import type { FitSummary, PlotViewData, ServerMessage, SolarSummary, WireEvent } from '../../protocols/wire.js';
import { formatNumber } from '../../protocols/number-format.js';
import { DriftChart, LinearizedChart, RawChart, SolarChart } from './charts.js';
import { displayUnit, formatInputs, parameterLabel } from '../../protocols/display-units.js';
import { buildInputFields, fillAnalysis, markInputs, readAnalysis, type StationStatus } from './forms.js';
import { describeAnalysis, driftNotWatched, renderCautions, renderFitNotes, renderParams, renderRanking, renderSolar } from './panels.js';
import { buildPlanFields, fillKind, fillPlan, isDestructive, readPlan, setChoices, setTargetUnit, showKind } from './plan-form.js';
import { Store, type AnalysisSettings, type Envelope, type SweepPoints } from './store.js';
import { renderAdaptive, renderTestPanel } from './test-panels.js';

const $ = <T extends HTMLElement = HTMLElement>(id: string) => document.getElementById(id) as T;
const token = new URLSearchParams(location.search).get('token');
document.getElementById('lot-link')?.setAttribute('href', `lot${token ? `?token=${encodeURIComponent(token)}` : ''}`);
const store = new Store();
const liveStore = store;
let viewStore = store;
let status: StationStatus | null = null;

/** Fewer points than this in the fit window: the previous complete sweep stays on screen, dimmed. */
const MIN_IN_WINDOW = 5;

function headers(): Record<string, string> {
  return { 'content-type': 'application/json', ...(token ? { authorization: `Bearer ${token}` } : {}) };
}

// biome-ignore lint/suspicious/noExplicitAny: the daemon's JSON, read field by field where it is used
type Json = any;

async function call(method: string, path: string, body?: unknown): Promise<Json> {
  const r = await fetch(path, { method, headers: headers(), body: body === undefined ? undefined : JSON.stringify(body) });
  const json = await r.json().catch(() => ({}));
  if (!r.ok) throw new Error(json.error ?? `${r.status} ${r.statusText}`);
  return json;
}

/** The control message; `near` (a form) moves it just under that form, beside the button pressed. */
function say(text: string, error = false, near?: HTMLElement): void {
  const el = $('control-msg');
  if (near && el.previousElementSibling !== near) near.after(el);
  el.textContent = text;
  el.className = error ? 'error' : '';
}

// ---- charts -------------------------------------------------------------------------------
const raw = new RawChart($('raw-chart'));
/** A constant-voltage stress's held intervals: current against stress time, in the linearized panel's place. */
const heldChart = new RawChart($('held-chart'), 'stress time (s)');
const lin = new LinearizedChart($('lin-chart'), $('resid-chart'), (from, to) => {
  const a = shownAnalysis();
  if (!a) return;
  void applyAnalysis({ ...a, window: { from, to } }, `fit window ${formatNumber(from)} … ${formatNumber(to)} V`);
});
const drift = new DriftChart($('drift-chart'));
const solarChart = new SolarChart($('solar-chart'));

// ---- connection -------------------------------------------------------------------------------
let retry = 500;
function connect(): void {
  setConn('connecting');
  const ws = new WebSocket(`${location.protocol === 'https:' ? 'wss' : 'ws'}://${location.host}/ws${token ? `?token=${encodeURIComponent(token)}` : ''}`);
  ws.onopen = () => {
    retry = 500;
    setConn('live');
  };
  ws.onmessage = (m) => {
    const msg = JSON.parse(String(m.data)) as ServerMessage;
    const before = liveStore.session;
    const ended = liveStore.runEnd;
    const analysis = liveStore.analysis;
    liveStore.applyMessage(msg);
    // A new session, a run's end, or the station's analysis changed (from here, another page or
    // the command line): the status — model, inputs, the Run form's choices — is read again.
    if (liveStore.session !== before || liveStore.runEnd !== ended || liveStore.analysis !== analysis) {
      void loadSessions().catch(() => undefined);
      void loadStatus().catch(() => undefined);
    }
    // "Run started" under the Start button is old news once the run has ended: say how it ended.
    const end = liveStore.runEnd;
    if (end && end !== ended) {
      const el = $('control-msg');
      if (el.textContent?.startsWith('Run started: ')) el.textContent = `Run ended: ${end.outcome} — ${end.reason}`;
    }
    if (msg.kind === 'gap') setConn('resync');
    else if (msg.kind === 'snapshot') setConn('live');
    schedule();
  };
  ws.onclose = () => {
    setConn('connecting');
    setTimeout(connect, retry);
    retry = Math.min(5000, retry * 2);
  };
}

function setConn(state: 'live' | 'connecting' | 'resync'): void {
  const el = $('conn');
  el.dataset.state = state;
  $('conn-text').textContent = state === 'live' ? 'live' : state === 'resync' ? 're-syncing' : 'reconnecting…';
}

// ---- what is on screen ----------------------------------------------------------------------
/** The settings behind the numbers shown: the re-analysis', else those of the shown sweep's fit. */
function shownAnalysis(): AnalysisSettings | null {
  const s = viewStore;
  if (s.reanalysis) return s.reanalysis.analysis;
  const cur = s.currentSweep();
  return s.fitAnalysis.get(cur) ?? s.analysis ?? status?.analysis ?? null;
}

function inWindow(v: PlotViewData | undefined): number {
  if (!v) return 0;
  let n = 0;
  for (const w of v.inWindow) n += w;
  return n;
}

/** The latest sweep before `before` whose final view the store holds. */
function previousFinalView(s: Store, before: number): { sweep: number; view: PlotViewData } | null {
  let best = -1;
  for (const k of s.viewFinal) if (k < before && k > best && s.views.has(k)) best = k;
  return best > 0 ? { sweep: best, view: s.views.get(best) as PlotViewData } : null;
}

// ---- rendering -------------------------------------------------------------------------------
let frame = 0;
const latency: number[] = [];
function schedule(): void {
  if (!frame) frame = requestAnimationFrame(render);
}

function render(): void {
  frame = 0;
  const s = viewStore;
  if (!s.dirty) return;
  s.dirty = false;
  const cur = s.currentSweep();
  const live = liveStore;
  const source = live.sessionEvent?.source;
  const passive = Boolean(live.running && source && !source.control) || live.station?.control === false;
  $('station-name').textContent =
    passive && source ? `watching ${source.detail}` : status ? (status.scenario ? `simulator: ${status.scenario}` : status.instrument) : 'station';
  $('session-id').textContent = s.session ?? 'no session';
  $('readonly-badge').hidden = !s.readOnly;
  $('back-live').hidden = !s.readOnly;
  const p = s.progress;
  $('progress').textContent = s.readOnly
    ? `session ${s.session}: ${s.allSweeps.length} sweeps, ${s.runEnd ? `ended: ${s.runEnd.outcome}` : 'not ended'}`
    : s.running && p
      ? `sweep ${p.sweep} of ${p.sweeps || '?'} · point ${p.point} of ${p.points || '?'}${p.eta !== null ? ` · about ${Math.ceil(p.eta)} s left` : ''}`
      : s.runEnd
        ? `run ended: ${s.runEnd.outcome} — ${s.runEnd.reason}`
        : 'idle';
  // Controls act only when they can: abort and stop while a run this station controls is on.
  const control = !passive && (status?.control ?? true);
  const canStop = live.running && control;
  ($('abort') as HTMLButtonElement).disabled = !(canStop || (live.outputOn && control));
  ($('run-stop') as HTMLButtonElement).disabled = !canStop;
  ($('run-start') as HTMLButtonElement).disabled = live.running || !control;
  // The fields of the other plan kinds stay disabled (hidden, and not read).
  for (const el of ($('plan-form') as HTMLFormElement).elements)
    if (el.id !== 'run-stop' && el.id !== 'run-start') (el as HTMLInputElement).disabled = !control || Boolean(el.closest('label')?.hidden);
  $('analysis-scope').textContent = s.readOnly
    ? '— re-analyses this past session (kept beside its journal)'
    : live.running
      ? control
        ? '— applies to the run from now on (journaled)'
        : '— applies to the watched readings from now on'
      : s.session
        ? "— re-analyses the session on screen and becomes the station's setting for the next run"
        : "— the station's setting for the next run";
  // Each panel is redrawn only when what it shows has changed (a frame carries new readings most
  // of the time, and nothing else).
  const cut = cutRuns();
  if (changed('cautions', s, s.cautions.length, s.outputOn, s.lastOutput, s.readOnly, s.sessionEvent, s.running, s.drift, cut.length))
    renderCautions($('cautions'), s, cut);
  if (changed('test', s, s.testResult, s.sessionEvent, s.running)) $('test-panel').hidden = !renderTestPanel($('test-title'), $('test-result'), s);
  if (changed('adaptive', s, s.adaptive.length)) $('adaptive-panel').hidden = !renderAdaptive($('adaptive'), s.adaptive);
  raw.update(s.sweeps, ($('raw-log') as HTMLInputElement).checked, s.envelope, (s.sessionEvent?.plan as { kind?: string } | undefined)?.kind === 'adaptive');
  $('raw-note').textContent =
    `Colour runs from the first sweep shown (dark) to the latest (light)${s.envelope ? `; grey band: every one of the ${s.allSweeps.length} sweeps (smallest to largest current at each bias)` : ''}. ✕ marks negative current (plotted as |I|), □ marks readings at compliance.`;
  if (s.sessionEvent && s.readingCount > 0) {
    // Point-to-pixel latency of the newest reading (the benchmark reads these; same machine clock).
    latency.push(Date.now() - (Date.parse(s.sessionEvent.startedAt) + s.lastReadingT));
    if (latency.length > 10_000) latency.splice(0, 5_000);
  }
  renderLinearized(s, cur);
  if (changed('params', s, cur, s.finalFits.get(cur), s.liveFit, s.reanalysis, s.running, s.ended.get(cur), s.analysis)) renderParamsPanel(s, cur);
  renderSolarPanel(s, cur);
  const ranked = s.rankingFor(cur);
  if (changed('ranking', s, ranked)) renderRanking($('ranking'), ranked);
  if (changed('drift', s, s.drift, s.cautions.length, s.finalFits.size)) renderDrift(s);
  renderPicker(s, cur);
  refillForms(s);
}

/**
 * Runs the daemon found cut at start-up with the output on (its status's `recovered`), until a run
 * of this daemon has started: a new run's set-up turns the output off, and then the instrument
 * answers for itself.
 */
function cutRuns(): { dir: string; message: string }[] {
  if (!status?.recovered || status.running || status.lastRun || liveStore.running || liveStore.runEnd) return [];
  return status.recovered.filter((r) => r.outputMayBeOn);
}

/** Whether any of the values differ (by identity) from the last call with this name. */
const memo = new Map<string, unknown[]>();
function changed(name: string, ...values: unknown[]): boolean {
  const prev = memo.get(name);
  if (prev && prev.length === values.length && prev.every((v, k) => v === values[k])) return false;
  memo.set(name, values);
  return true;
}

/**
 * The held intervals of a constant-voltage stress the page holds, each reading at the stress time
 * it was taken (the stress time when its interval opened, as the daemon journaled it, plus the time
 * since the interval's first reading), for the current-against-time chart.
 */
function heldSeries(s: Store): Map<number, SweepPoints> {
  const out = new Map<number, SweepPoints>();
  for (const [n, h] of s.held) {
    const p = s.sweeps.get(n);
    if (!p || p.t.length === 0) continue;
    const t0 = p.t[0];
    out.set(n, { v: p.t.map((t) => h.stressTime + (t - t0) / 1000), i: p.i, flags: p.flags, t: p.t });
  }
  return out;
}

/** Whether the sweep shown is a held interval: then the panel draws current against stress time. */
function renderHeld(s: Store, cur: number): boolean {
  const h = s.held.get(cur);
  const on = h !== undefined && s.sweeps.has(cur);
  for (const id of ['lin-chart', 'resid-chart', 'lin-note', 'lin-hint']) $(id).hidden = on;
  ($('lin-whole').parentElement as HTMLElement).hidden = on;
  $('held-chart').hidden = !on;
  $('held-note').hidden = !on;
  if (!on || !h) return false;
  const shown = heldSeries(s);
  if (changed('held', s, cur, ...[...shown.values()].map((p) => p.v.length), ($('raw-log') as HTMLInputElement).checked))
    heldChart.update(shown, ($('raw-log') as HTMLInputElement).checked);
  $('lin-title').textContent = `Stress at ${formatNumber(h.bias, 4)} V: current against stress time, sweep ${cur}`;
  $('lin-empty').hidden = true;
  $('lin-error').hidden = true;
  const n = shown.size;
  $('held-note').textContent =
    `A constant-voltage stress interval: every reading at ${formatNumber(h.bias, 4)} V, so there is no current–voltage curve to fit. ${
      n > 1
        ? `The ${n} held intervals the page holds are drawn on one stress-time axis (the time of sense sweeps not counted), colour running from the first (dark) to the latest (light).`
        : 'Its readings are drawn against the stress time.'
    } ✕ marks negative current (plotted as |I|), □ marks readings at compliance.`;
  return true;
}

function renderLinearized(s: Store, cur: number): void {
  if (renderHeld(s, cur)) return;
  const re = s.reanalysis;
  let main: PlotViewData | undefined;
  let under: PlotViewData | null = null;
  let note = '';
  if (re?.views.has(cur)) {
    main = re.views.get(cur);
    note = ' — re-analysis';
  } else {
    main = s.views.get(cur);
    if (s.isLive(cur) && (!main?.line || inWindow(main) < MIN_IN_WINDOW)) {
      const prev = previousFinalView(s, cur);
      if (prev) {
        under = prev.view;
        note = ` — sweep ${prev.sweep} dimmed until sweep ${cur} reaches the window`;
      }
    }
  }
  if (changed('lin', s, main, under, lin.wholeCurve, cur)) lin.update(main, under);
  $('lin-empty').hidden = Boolean(main || under);
  // The mechanism's title from any fit with this model (the view carries only the model id).
  const model = (main ?? under)?.model ?? (cur ? (s.fitAnalysis.get(cur) ?? s.analysis)?.model : undefined);
  const titled = [re?.fits.get(cur)?.fit, s.finalFits.get(cur), s.liveFit?.fit, ...[...s.finalFits.values()].reverse()].find((f) => f && f.model === model);
  const title = titled?.title ?? model;
  $('lin-title').textContent = title ? `Linearized: ${title}, sweep ${cur}${note}` : 'Linearized view';
  const err = $('lin-error');
  // Why there is no line: the view's reason, or (no view: the daemon could not map a single reading
  // onto the mechanism's plot) the fit's.
  const e =
    main?.error ??
    (main && !main.line ? 'no fit line' : undefined) ??
    (!main && !s.isLive(cur) ? (re?.fits.get(cur)?.error ?? s.fitErrors.get(cur)) : undefined) ??
    undefined;
  err.hidden = !e || (s.isLive(cur) && under !== null);
  err.textContent = e ? `Sweep ${cur}: ${e}.` : '';
  if (e && !main && !under) $('lin-empty').hidden = true;
  $('lin-hint').textContent = s.readOnly
    ? 'Drag across the plot to set the fit window: the daemon re-analyses this sweep (the journal is not changed).'
    : 'Drag across the plot to set the fit window (shaded): the daemon re-fits.';
}

function renderParamsPanel(s: Store, cur: number): void {
  const re = s.reanalysis;
  const src = $('params-source');
  ($('show-recorded') as HTMLButtonElement).hidden = !re;
  if (re && (re.fits.has(cur) || re.views.has(cur))) {
    const prev = [...re.fits.keys()].filter((k) => k < cur).sort((a, b) => b - a)[0];
    src.textContent = `Re-analysis of ${new Date(re.at).toLocaleTimeString()} (kept beside the journal in reanalysis.jsonl; the journal's fits are unchanged): ${describeAnalysis(re.analysis)}`;
    src.dataset.source = 'reanalysis';
    const c = re.fits.get(cur);
    renderParams(
      $('params'),
      [{ title: `sweep ${cur}`, fit: c?.fit }, ...(prev !== undefined ? [{ title: `sweep ${prev}`, fit: re.fits.get(prev)?.fit }] : [])],
      c?.error ? `No fit of sweep ${cur}: ${c.error}` : 'No fit.',
    );
    renderFitNotes($('fit-warnings'), c?.fit);
    return;
  }
  const final = s.finalFits.has(cur);
  const live = s.isLive(cur);
  const fit: FitSummary | null | undefined = s.finalFits.get(cur) ?? (s.liveFit?.sweep === cur ? s.liveFit.fit : undefined);
  const state = final
    ? s.ended.get(cur) === false
      ? ' (cut short)'
      : ''
    : live
      ? ' (live)'
      : s.liveFit?.sweep === cur
        ? ' (cut short: last interim fit)'
        : '';
  const prevSweep = [...s.finalFits.keys()].filter((k) => k < cur).sort((a, b) => b - a)[0];
  const a = final ? s.fitAnalysis.get(cur) : s.analysis;
  src.textContent = !s.session ? 'No session yet.' : `${live ? 'Live fits (journaled)' : 'Recorded fits (journal)'}: ${describeAnalysis(a ?? null)}`;
  src.dataset.source = 'journal';
  renderParams(
    $('params'),
    [{ title: `sweep ${cur}${state}`, fit }, ...(prevSweep !== undefined ? [{ title: `sweep ${prevSweep}`, fit: s.finalFits.get(prevSweep) }] : [])],
    s.fitErrors.get(cur) ? `No fit of sweep ${cur}: ${s.fitErrors.get(cur)}` : cur ? `No fit of sweep ${cur} yet.` : 'No fit yet.',
  );
  renderFitNotes($('fit-warnings'), fit);
}

/** The solar figures of the sweep shown, or (while a sweep runs) of the last finished one. */
function renderSolarPanel(s: Store, cur: number): void {
  const re = s.reanalysis;
  let sweep = cur;
  let solar: SolarSummary | null | undefined = re?.fits.has(cur) ? re.fits.get(cur)?.solar : undefined;
  let source = re?.fits.has(cur) ? 're-analysis' : 'recorded';
  if (!solar) {
    source = 'recorded';
    solar = s.finalSolar.get(cur);
    if (!solar) {
      const earlier = [...s.finalSolar.keys()].filter((k) => k < cur).sort((a, b) => b - a)[0];
      if (earlier !== undefined) {
        sweep = earlier;
        solar = s.finalSolar.get(earlier);
        source = 'last finished sweep';
      }
    }
  }
  const panel = $('solar-panel');
  panel.hidden = !solar;
  if (!solar || !changed('solar', s, solar, sweep, s.sweeps.get(sweep)?.v.length)) return;
  $('solar-title').textContent = `Solar cell: sweep ${sweep}`;
  solarChart.update(solar, s.sweeps.get(sweep));
  renderSolar($('solar'), `Sweep ${sweep} (${source})`, solar);
}

function unitOf(s: Store): (parameter: string) => string {
  return (parameter) => {
    for (const f of [...s.finalFits.values()].reverse()) {
      const p = f?.parameters[parameter];
      if (p) return p.unit;
    }
    return '';
  };
}

/** Sequence numbers of settings changes that changed the model or its inputs (the drift baseline restarts). */
function baselineRestarts(s: Store): number[] {
  const out: number[] = [];
  let prev: AnalysisSettings | null = null;
  for (const e of s.events) {
    if (e.type !== 'session' && e.type !== 'settings') continue;
    const a = e.analysis as AnalysisSettings;
    if (prev && e.type === 'settings' && (a.model !== prev.model || JSON.stringify(a.inputs) !== JSON.stringify(prev.inputs))) out.push(e.seq);
    prev = a;
  }
  return out;
}

function renderDrift(s: Store): void {
  drift.update(s.drift, unitOf(s), baselineRestarts(s));
  const d = [...s.drift].sort((a, b) => a.sweep - b.sweep).at(-1);
  $('drift-title').textContent = d ? `Drift of ${parameterLabel(d.parameter)} (${d.method.toUpperCase()})` : 'Drift';
  const br = drift.breaks.at(-1);
  // The drift watch has nothing to follow: the daemon's words (which setting to change) take the place of the state.
  const unwatched = driftNotWatched(s);
  $('drift-state').textContent = unwatched
    ? `not watched: ${unwatched.message}`
    : d
      ? `sweep ${d.sweep}: ${d.state.replace(/-/g, ' ')}${br ? ` · baseline restarted at sweep ${br.sweep} (${br.reason})` : ''}`
      : s.finalFits.size >= 2 && [...s.finalFits.values()].every((f) => !f || Object.keys(f.parameters).length === 0)
        ? [...s.finalFits.values()].some((f) => !f)
          ? 'nothing to chart: no sweep of this run gave a parameter (a stress held at one bias, or a sweep at the noise floor, is not fitted)'
          : "nothing to chart: this model's fits have no physical parameter"
        : 'charted once the baseline sweeps are in';
}

let pickerKey = '';
function renderPicker(s: Store, cur: number): void {
  const n = s.allSweeps.length;
  const key = `${s.session}:${cur}:${n}:${s.shownSweep}`;
  if (key === pickerKey) return;
  pickerKey = key;
  const input = $<HTMLInputElement>('sweep-pick');
  if (document.activeElement !== input) input.value = cur ? String(cur) : '';
  input.max = String(s.allSweeps.at(-1) ?? 1);
  // The daemon's name for the sweep when it says more than its number (a breakdown test's phases).
  const label = s.labels.get(cur);
  const what = label && !/^sweep \d/.test(label) ? ` · sweep ${cur}: ${label}` : '';
  const how = s.shownSweep !== null ? 'picked' : cur !== s.latestSweep() ? "the test's curve" : 'following the latest';
  $('sweep-count').textContent = n ? `${how}; sweeps ${s.allSweeps[0]}–${s.allSweeps.at(-1)}${what}` : '';
}

let filledFrom = '';
function refillForms(s: Store): void {
  const a = shownAnalysis();
  const key = JSON.stringify(a);
  const f = $<HTMLFormElement>('analysis-form');
  // Before the station's status has built the input fields there is nothing to fill (the fill
  // runs again once they exist: building them resets filledFrom).
  if (!a || !status || key === filledFrom || f.contains(document.activeElement)) return;
  filledFrom = key;
  fillAnalysis(f, a);
  markInputs(
    $('input-fields'),
    status?.models.find((m) => m.id === a.model),
  );
  void s;
}

// ---- re-analysis ---------------------------------------------------------------------------
/**
 * Applies analysis settings to what is on screen. A run in progress takes them (journaled); a
 * finished or past session is re-analysed by the daemon, the sweep shown and the one before it.
 */
async function applyAnalysis(a: AnalysisSettings, what: string): Promise<void> {
  const s = viewStore;
  try {
    if (!s.readOnly && liveStore.running) {
      const r = await call('PUT', '/api/analysis', a);
      await loadStatus(); // the station's model and inputs now: the Run form's target choices follow
      say(`${what}: applied to the run from now on (journaled, ${r.model}); the daemon re-fits the last finished sweep.`);
      if (s.shownSweep !== null) await reanalyse(s, r as AnalysisSettings);
      return;
    }
    let settings = a;
    if (!s.readOnly) {
      settings = (await call('PUT', '/api/analysis', a)) as AnalysisSettings;
      await loadStatus(); // the station's model and inputs now: the Run form's target choices follow
    }
    if (!s.session) {
      say(`${what}: the station's analysis for the next run is ${settings.model}.`);
      return;
    }
    await reanalyse(s, settings);
    say(
      `${what}: sweeps ${[...(s.reanalysis?.fits.keys() ?? [])].join(', ')} re-analysed with ${settings.model}${s.readOnly ? '' : " (also the station's setting for the next run)"}; the results are kept beside the journal, which is unchanged.`,
    );
  } catch (e) {
    say(`${what}: ${(e as Error).message}`, true, $('analysis-form'));
  }
}

async function reanalyse(s: Store, a: AnalysisSettings): Promise<void> {
  const cur = s.currentSweep();
  if (!s.session || !cur) return;
  const idx = s.allSweeps.indexOf(cur);
  const prev = idx > 0 ? s.allSweeps[idx - 1] : undefined;
  const r = await call('POST', `/api/sessions/${encodeURIComponent(s.session)}/reanalyze`, {
    analysis: a,
    sweeps: prev !== undefined ? [prev, cur] : [cur],
    views: [cur],
  });
  s.reanalysis = {
    at: r.at,
    analysis: r.analysis,
    fits: new Map(
      (r.fits as { sweep: number; fit: FitSummary | null; error: string | null; solar?: SolarSummary }[]).map((f) => [
        f.sweep,
        { fit: f.fit, error: f.error, solar: f.solar ?? null },
      ]),
    ),
    views: new Map((r.views as { sweep: number; view: PlotViewData }[]).map((v) => [v.sweep, v.view])),
  };
  s.dirty = true;
  schedule();
}

// ---- controls -------------------------------------------------------------------------------
async function loadStatus(): Promise<void> {
  const first = status === null;
  status = (await call('GET', '/api/status')) as StationStatus;
  if (first) {
    const sel = $<HTMLSelectElement>('model-select');
    sel.textContent = '';
    for (const m of status.models) {
      const o = document.createElement('option');
      o.value = m.id;
      o.textContent = m.title;
      sel.append(o);
    }
    buildInputFields($('input-fields'));
    buildPlanFields($<HTMLFormElement>('plan-form'), $('plan-fields'));
    fillPlan($<HTMLFormElement>('plan-form'), status);
    filledFrom = '';
  }
  // The kind's hint names the thickness and area in force; empty fields take the station's values.
  kindChosen();
  liveStore.dirty = true;
  viewStore.dirty = true;
  schedule();
}

$('model-select').addEventListener('change', () => {
  const id = $<HTMLSelectElement>('model-select').value;
  markInputs(
    $('input-fields'),
    status?.models.find((m) => m.id === id),
  );
});

// ---- the Run form: plan kinds, breakdown tests -----------------------------------------------
const KIND_HINTS: Record<string, string> = {
  linear: 'Equal bias steps from start to stop, repeated; out and back returns to the start.',
  log: 'Bias steps evenly spaced in log |V| from start to stop (both of one sign), repeated.',
  adaptive:
    "Each next bias is chosen from what has been measured: coarse steps at the noise floor, fine ones in the regime. A sweep stops once the target parameter's standard error is reached, at the current limit or compliance, at the end of the range, or after its most points.",
  'voltage-ramp':
    'Voltage steps held for the time per step until breakdown (a current jump, the I–V slope rising, or the breakdown current) or the end of the ramp.',
  'current-ramp':
    'Forced currents rising in steps per decade, the voltage kept below its limit, until the voltage collapses (breakdown). Needs an instrument dialect that can source current.',
  'constant-voltage':
    'The stress bias held and read at intervals until breakdown (a current jump or the breakdown current) or the longest stress; optional sense sweeps watch the leakage grow.',
};

/**
 * The adaptive target's choices: the parameters the station's model gives — the daemon's list for
 * its inputs (what it checks a plan against), then any more that recent fits with it carried —
 * name → SI unit (null until a fit has shown it).
 */
function knownParameters(): Map<string, string | null> {
  const model = status?.analysis.model;
  const out = new Map<string, string | null>();
  for (const k of status?.models.find((m) => m.id === model)?.parameters ?? []) out.set(k, null);
  for (const s of [liveStore, viewStore]) {
    for (const f of s.finalFits.values()) {
      if (!f || f.model !== model) continue;
      for (const [k, p] of Object.entries(f.parameters)) out.set(k, p.unit);
    }
  }
  return out;
}

/** The adaptive target's unit as shown, and the scale to the parameter's own unit; null when not known yet. */
function targetUnit(f: HTMLFormElement): { unit: string; scale: number } | null {
  const name = (f.elements.namedItem('targetParameter') as HTMLSelectElement).value;
  const si = knownParameters().get(name);
  if (si === undefined || si === null) return null;
  const d = displayUnit(si, name);
  return { unit: d.unit, scale: d.scale };
}

/** Shows the chosen kind's fields, fills the empty ones from the station, and the destructive-test caution. */
function kindChosen(): void {
  const f = $<HTMLFormElement>('plan-form');
  const kind = (f.elements.namedItem('kind') as HTMLSelectElement).value;
  showKind(f, kind);
  if (status) fillKind(f, status, kind);
  const destructive = isDestructive(kind);
  $('destructive-caution').hidden = !destructive;
  if (!destructive) (f.elements.namedItem('acknowledge') as HTMLInputElement).checked = false;
  $('run-start').textContent = destructive ? '▶ Start breakdown test' : '▶ Start';
  let hint = KIND_HINTS[kind] ?? '';
  if (destructive) {
    // The breakdown field and the charge per area need the film's thickness and the device area.
    const inputs = status?.analysis.inputs ?? {};
    const given = formatInputs({ thickness: inputs.thickness, area: inputs.area });
    hint += ` E_bd and Q_bd use the thickness and area of the Analysis form${given ? ` (now ${given})` : ': none given, so only V_bd and t_bd will be known'}.`;
  }
  $('kind-hint').textContent = hint;
  if (kind === 'adaptive') {
    const model = status?.analysis.model ?? 'this';
    setChoices(f, 'targetParameter', [...knownParameters().keys()], `none: the ${model} fit gives no parameter`);
    setTargetUnit(f, targetUnit(f)?.unit ?? null);
  }
}
$('plan-form').addEventListener('change', (ev) => {
  const name = (ev.target as HTMLInputElement).name;
  if (name === 'kind') kindChosen();
  if (name === 'targetParameter') setTargetUnit($<HTMLFormElement>('plan-form'), targetUnit($<HTMLFormElement>('plan-form'))?.unit ?? null);
});

$('plan-form').addEventListener('submit', (ev) => {
  ev.preventDefault();
  const f = ev.target as HTMLFormElement;
  let plan: Record<string, unknown>;
  const ack = f.elements.namedItem('acknowledge') as HTMLInputElement;
  try {
    if ((f.elements.namedItem('kind') as HTMLSelectElement).value === 'adaptive' && knownParameters().size === 0)
      throw new Error(
        `target parameter: the ${status?.analysis.model} fit gives no parameter to aim at with the Analysis form's inputs: choose a model that does, or give its inputs`,
      );
    plan = readPlan(f, status, targetUnit(f));
    const kind = String(plan.kind);
    if (kind === 'adaptive') {
      const known = knownParameters();
      const name = String((plan.target as { parameter: string }).parameter);
      if (known.size && !known.has(name))
        throw new Error(`target parameter: '${name}' is not a parameter of the ${status?.analysis.model} fits (${[...known.keys()].join(', ')})`);
    }
    if (isDestructive(kind) && !ack.checked)
      throw new Error('This breakdown test destroys the device: read the caution above the Start button and tick its box to start it.');
  } catch (e) {
    say((e as Error).message, true, f);
    return;
  }
  // The device under test (journaled with the session; used by the lot view and weibull).
  const text = (name: string) => (f.elements.namedItem(name) as HTMLInputElement).value.trim();
  const num = (name: string) => (text(name) === '' ? undefined : Number(text(name)));
  const device = Object.fromEntries(
    [
      ['device', text('device') || undefined],
      ['wafer', text('wafer') || undefined],
      ['site', text('site') || undefined],
      ['x', num('x')],
      ['y', num('y')],
    ].filter(([, v]) => v !== undefined),
  );
  backToLive();
  // Each breakdown test is confirmed on its own: the box is cleared once one starts.
  // The box ticked is the acknowledgement the daemon asks of every breakdown test.
  const destroys = isDestructive(String(plan.kind)) ? { acknowledgeDestructive: true } : {};
  call('POST', '/api/run', Object.keys(device).length ? { plan, device, ...destroys } : { plan, ...destroys })
    .then((r) => {
      ack.checked = false;
      say(`Run started: ${r.session}`, false, f);
    })
    .catch((e: Error) => say(e.message, true, f));
});
$('run-stop').addEventListener('click', () => {
  call('POST', '/api/run/stop', { reason: 'stop requested from the page' })
    .then(() => say('The run stops after this sweep.'))
    .catch((e: Error) => say(e.message, true));
});
function abort(): void {
  call('POST', '/api/run/abort', { reason: 'abort from the page' })
    .then(() => say('Aborted: output off sent.'))
    .catch((e: Error) => say(e.message, true));
}
$('abort').addEventListener('click', abort);
document.addEventListener('keydown', (e) => {
  if (e.key !== 'Escape') return;
  // Esc in a text field only leaves the field: a habit there must never end a long run.
  const t = e.target as HTMLElement | null;
  if (t && (t.isContentEditable || ['INPUT', 'TEXTAREA', 'SELECT'].includes(t.tagName))) {
    t.blur();
    say('Esc in a text field does not abort. Press Esc again (outside the field) or click ABORT to turn the output off.');
    return;
  }
  if (($('abort') as HTMLButtonElement).disabled) {
    say(viewStore.readOnly ? 'A past session is open read-only: nothing to abort here (Back to the live session).' : 'No run in progress: nothing to abort.');
    return;
  }
  abort();
});
$('analysis-form').addEventListener('submit', (ev) => {
  ev.preventDefault();
  const f = ev.target as HTMLFormElement;
  const model = status?.models.find((m) => m.id === (f.elements.namedItem('model') as HTMLSelectElement).value);
  let a: AnalysisSettings;
  try {
    a = readAnalysis(f, model);
  } catch (e) {
    say((e as Error).message, true);
    return;
  }
  filledFrom = '';
  void applyAnalysis(a, `Analysis ${a.model}`);
});
$('auto-window').addEventListener('click', () => {
  const a = shownAnalysis();
  if (!a) return;
  filledFrom = '';
  void applyAnalysis({ ...a, window: 'auto' }, 'Automatic fit window');
});
$('show-recorded').addEventListener('click', () => {
  viewStore.reanalysis = null;
  viewStore.dirty = true;
  filledFrom = '';
  schedule();
});
$('note-form').addEventListener('submit', (ev) => {
  ev.preventDefault();
  const f = ev.target as HTMLFormElement;
  const text = (f.elements.namedItem('text') as HTMLInputElement).value;
  const tags = (f.elements.namedItem('tags') as HTMLInputElement).value
    .split(',')
    .map((t) => t.trim())
    .filter(Boolean);
  const sw = (f.elements.namedItem('sweep') as HTMLInputElement).value.trim();
  call('POST', '/api/annotations', {
    text,
    tags,
    ...(sw !== '' ? { sweep: Number(sw) } : {}),
    ...(viewStore.readOnly && viewStore.session ? { session: viewStore.session } : {}),
  })
    .then(() => {
      say('Note added to the journal.', false, f);
      f.reset();
    })
    .catch((e: Error) => say(e.message, true, f));
});
$('lin-whole').addEventListener('change', () => {
  lin.wholeCurve = ($('lin-whole') as HTMLInputElement).checked;
  viewStore.dirty = true;
  schedule();
});
$('raw-log').addEventListener('change', () => {
  viewStore.dirty = true;
  schedule();
});

// ---- the sweep picker ------------------------------------------------------------------------
/** Shows one sweep: its readings, recorded fit and view are loaded from the journal if not held. */
async function pickSweep(n: number | null): Promise<void> {
  const s = viewStore;
  if (n !== null) {
    const last = s.allSweeps.at(-1) ?? 0;
    if (!s.allSweeps.includes(n)) {
      say(`sweep ${n}: this session has sweeps ${s.allSweeps[0] ?? '–'} to ${last}`, true);
      return;
    }
    if (s.session && (!s.views.has(n) || !s.finalFits.has(n) || !s.sweeps.has(n))) {
      const d = await call('GET', `/api/sessions/${encodeURIComponent(s.session)}/sweeps/${n}`);
      s.shownSweep = n;
      if (!s.sweeps.has(n) || (s.sweeps.get(n)?.v.length ?? 0) < d.readings.length) {
        const pts = s.sweepPoints(n);
        pts.v = d.readings.map((r: number[]) => r[4]);
        pts.i = d.readings.map((r: number[]) => r[5]);
        pts.flags = d.readings.map((r: number[]) => r[6]);
        pts.t = d.readings.map((r: number[]) => r[3]);
      }
      if (d.solar) s.finalSolar.set(n, d.solar);
      if (d.fit !== undefined && (d.complete !== null || d.fit)) {
        s.finalFits.set(n, d.fit);
        s.fitAnalysis.set(n, d.analysis);
        if (d.error) s.fitErrors.set(n, d.error);
      }
      if (d.complete !== null) s.ended.set(n, d.complete);
      if (d.view) s.setView(n, d.complete !== null, d.view);
    }
  }
  s.shownSweep = n;
  if (s.reanalysis && n !== null && !s.reanalysis.views.has(n)) await reanalyse(s, s.reanalysis.analysis).catch((e: Error) => say(e.message, true));
  s.dirty = true;
  schedule();
}
const pickNumber = () => Number($<HTMLInputElement>('sweep-pick').value);
$('sweep-pick').addEventListener('change', () => void pickSweep(pickNumber()).catch((e: Error) => say(e.message, true)));
$('sweep-prev').addEventListener('click', () => {
  const s = viewStore;
  const i = s.allSweeps.indexOf(s.currentSweep());
  if (i > 0) void pickSweep(s.allSweeps[i - 1]).catch((e: Error) => say(e.message, true));
});
$('sweep-next').addEventListener('click', () => {
  const s = viewStore;
  const i = s.allSweeps.indexOf(s.currentSweep());
  if (i >= 0 && i < s.allSweeps.length - 1) void pickSweep(s.allSweeps[i + 1]).catch((e: Error) => say(e.message, true));
});
$('sweep-latest').addEventListener('click', () => void pickSweep(null));

// ---- past sessions (read-only) ------------------------------------------------------------
async function loadSessions(): Promise<void> {
  const r = await call('GET', '/api/sessions');
  const box = $('sessions');
  box.textContent = '';
  for (const id of (r.sessions as string[]).slice(0, 30)) {
    const b = document.createElement('button');
    b.textContent = id;
    b.addEventListener('click', () => void openSession(id).catch((e: Error) => say(`${id}: ${e.message}`, true)));
    box.append(b);
  }
}

/**
 * Opens a past session from the daemon's overview: its events, every sweep's final parameters and
 * drift, the readings of the last sweeps and an envelope of all of them — bounded in size whatever
 * the session's length; the picker loads any other sweep on demand.
 */
async function openSession(id: string): Promise<void> {
  const o = await call('GET', `/api/sessions/${encodeURIComponent(id)}/overview`);
  const past = new Store();
  past.reset(id);
  past.readOnly = true;
  for (const e of o.events as WireEvent[]) past.applyEvent(e);
  past.running = false;
  past.outputOn = false;
  past.session = id;
  past.analysis = o.analysis;
  past.allSweeps = o.sweeps.sweep;
  (o.sweeps.complete as (boolean | null)[]).forEach((c, k) => {
    if (c !== null) past.ended.set(o.sweeps.sweep[k], c);
  });
  for (const f of o.fits as { sweep: number; fit: FitSummary | null; error: string | null; solar: SolarSummary | null; analysis: AnalysisSettings | null }[]) {
    if (f.solar) past.finalSolar.set(f.sweep, f.solar);
    past.finalFits.set(f.sweep, f.fit);
    past.fitAnalysis.set(f.sweep, f.analysis);
    if (f.error) past.fitErrors.set(f.sweep, f.error);
  }
  past.drift = o.drift;
  past.ranking = o.ranking;
  for (const r of o.recent as number[][]) past.applyEvent({ type: 'reading', seq: r[0], sweep: r[1], k: r[2], t: r[3], v: r[4], i: r[5], flags: r[6] });
  past.envelope = o.envelope as Envelope;
  if (o.view) past.setView(o.view.sweep, true, o.view.view);
  past.dirty = true;
  viewStore = past;
  filledFrom = '';
  pickerKey = '';
  schedule();
}

function backToLive(): void {
  viewStore = liveStore;
  liveStore.dirty = true;
  filledFrom = '';
  pickerKey = '';
  schedule();
}
$('back-live').addEventListener('click', backToLive);

// For the end-to-end tests and the benchmark: what the page holds and draws.
(window as unknown as { __plumbline: unknown }).__plumbline = {
  latency,
  Store,
  get store() {
    return viewStore;
  },
  live: liveStore,
  charts: { raw, lin, drift, solar: solarChart, held: heldChart },
  openSession,
  pickSweep,
};

loadStatus().catch((e: Error) => say(`status: ${e.message}`, true));
loadSessions().catch(() => undefined);
setInterval(() => void loadSessions().catch(() => undefined), 10_000);
window.addEventListener('resize', () => {
  for (const p of [raw.plot, lin.plot, lin.resid, drift.plot, solarChart.plot, heldChart.plot])
    p?.setSize({ width: Math.max(300, (p.root.parentElement as HTMLElement).clientWidth), height: p.height });
});
connect();
