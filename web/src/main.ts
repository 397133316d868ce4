/**
 * The live page: connects to the daemon's websocket (snapshot, then batches; re-syncs on a gap and
 * reconnects on its own), draws at most once per animation frame, and sends commands over REST.
 * Abort is a plain POST that does not wait for the event stream, so it works while the page lags.
 */
import type { FitSummary, ServerMessage, WireEvent } from '../../protocols/wire.js';
import { DriftChart, LinearizedChart, RawChart } from './charts.js';
import { Store } from './store.js';

const $ = <T extends HTMLElement = HTMLElement>(id: string) => document.getElementById(id) as T;
const token = new URLSearchParams(location.search).get('token');
document.getElementById('lot-link')?.setAttribute('href', `lot${token ? `?token=${encodeURIComponent(token)}` : ''}`);
const store = new Store();
const liveStore = store;
let viewStore = store;

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

function say(text: string, error = false): void {
  const el = $('control-msg');
  el.textContent = text;
  el.className = error ? 'error' : '';
}

// ---- charts -------------------------------------------------------------------------------
const raw = new RawChart($('raw-chart'));
const lin = new LinearizedChart($('lin-chart'), $('resid-chart'), (from, to) => {
  const a = currentAnalysis();
  if (!a || viewStore.readOnly) return;
  call('PUT', '/api/analysis', { ...a, window: { from, to } })
    .then((r) => say(`Fit window set to ${from.toPrecision(4)} … ${to.toPrecision(4)} V; the daemon re-fitted (${r.model}).`))
    .catch((e: Error) => say(e.message, true));
});
const drift = new DriftChart($('drift-chart'));

// ---- connection -------------------------------------------------------------------------------
let ws: WebSocket | null = null;
let retry = 500;
function connect(): void {
  setConn('connecting');
  ws = new WebSocket(`${location.protocol === 'https:' ? 'wss' : 'ws'}://${location.host}/ws${token ? `?token=${encodeURIComponent(token)}` : ''}`);
  ws.onopen = () => {
    retry = 500;
    setConn('live');
  };
  ws.onmessage = (m) => {
    const msg = JSON.parse(String(m.data)) as ServerMessage;
    const before = liveStore.session;
    const ended = liveStore.runEnd;
    liveStore.applyMessage(msg);
    if (liveStore.session !== before || liveStore.runEnd !== ended) void loadSessions().catch(() => undefined);
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

// ---- rendering -------------------------------------------------------------------------------
let frame = 0;
const latency: number[] = [];
function schedule(): void {
  if (!frame) frame = requestAnimationFrame(render);
}

const fmt = (x: number) => (x === 0 ? '0' : Math.abs(x) >= 1e4 || Math.abs(x) < 1e-2 ? x.toExponential(3) : x.toPrecision(4));
const fmtSe = (x: number) => (x === 0 ? '0' : Math.abs(x) >= 1e4 || Math.abs(x) < 1e-2 ? x.toExponential(1) : x.toPrecision(2));

function render(): void {
  frame = 0;
  const s = viewStore;
  if (!s.dirty) return;
  s.dirty = false;
  const last = s.latestSweep();
  $('session-id').textContent = s.session ?? 'no session';
  $('readonly-badge').hidden = !s.readOnly;
  $('back-live').hidden = !s.readOnly;
  // Progress.
  const p = s.progress;
  $('progress').textContent = s.readOnly
    ? `session ${s.session}: ${s.sweeps.size} sweeps, ${s.runEnd ? `ended: ${s.runEnd.outcome}` : 'not ended'}`
    : s.running && p
      ? `sweep ${p.sweep} of ${p.sweeps || '?'} · point ${p.point} of ${p.points || '?'}${p.eta !== null ? ` · about ${Math.ceil(p.eta)} s left` : ''}`
      : s.runEnd ? `run ended: ${s.runEnd.outcome} — ${s.runEnd.reason}` : 'idle';
  ($('abort') as HTMLButtonElement).disabled = s.readOnly;
  renderCautions(s);
  raw.update(s.sweeps, ($('raw-log') as HTMLInputElement).checked);
  // Point-to-pixel latency of the newest reading (the benchmark reads these; same machine clock).
  if (s.sessionEvent && s.readingCount > 0) {
    latency.push(Date.now() - (Date.parse(s.sessionEvent.startedAt) + s.lastReadingT));
    if (latency.length > 10_000) latency.splice(0, 5_000);
  }
  const view = s.views.get(last) ?? s.views.get(last - 1);
  lin.update(view);
  const fitNow = s.liveFit?.fit ?? null;
  $('lin-title').textContent = fitNow ? `Linearized: ${fitNow.title}` : view ? `Linearized: ${view.model}` : 'Linearized view';
  renderParams(s, last);
  renderRanking(s);
  drift.update(s.drift);
  const d = s.drift.at(-1);
  $('drift-title').textContent = d ? `Drift of ${d.parameter} (${d.method.toUpperCase()})` : 'Drift';
  $('drift-state').textContent = d ? `sweep ${d.sweep}: ${d.state.replace(/-/g, ' ')}${d.value !== null ? ` — value ${fmt(d.value)}` : ''}` : 'charted once the baseline sweeps are in';
}

function renderCautions(s: Store): void {
  const box = $('cautions');
  box.textContent = '';
  const add = (level: 'danger' | 'warning' | 'info', tag: string, text: string) => {
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
  if (s.readOnly) add('info', 'read-only', 'A past session from the journal: nothing here controls the instrument.');
  const source = s.sessionEvent?.source;
  if (source && !source.control) add('info', 'watching', `Readings come from ${source.detail}; plumbline does not control this instrument.`);
  if (s.outputOn && !s.readOnly) {
    const hv = s.cautions.find((c) => c.kind === 'hazard-voltage');
    if (hv) add('danger', 'high voltage', hv.message);
    else add('warning', 'output on', 'The output is on: the device terminals are live. Hands off the probes and the fixture; follow your lab\'s safety rules.');
  }
  const latest = new Map<string, Extract<WireEvent, { type: 'caution' }>>();
  for (const c of s.cautions) latest.set(c.kind, c);
  const order: [string, 'danger' | 'warning' | 'info', string][] = [
    ['breakdown-confirmed', 'danger', 'breakdown'],
    ['instrument-fault', 'danger', 'instrument fault'],
    ['drift-limit', 'danger', 'drift limit'],
    ['breakdown-suspected', 'warning', 'breakdown suspected'],
    ['drift-warning', 'warning', 'drift warning'],
    ['compliance', 'warning', 'compliance'],
  ];
  for (const [kind, level, tag] of order) {
    const c = latest.get(kind);
    if (c) add(level, tag, `${c.sweep !== undefined ? `sweep ${c.sweep}: ` : ''}${c.message}`);
  }
}

function paramRows(fit: FitSummary | null | undefined): Map<string, string> {
  const m = new Map<string, string>();
  if (!fit) return m;
  for (const [k, p] of Object.entries(fit.parameters)) m.set(k, `${fmt(p.value)} ± ${fmtSe(p.stdErr)}|${p.unit}`);
  return m;
}

function renderParams(s: Store, last: number): void {
  const cur = s.finalFits.get(last) ?? (s.liveFit?.sweep === last ? s.liveFit.fit : undefined);
  const curFinal = s.finalFits.has(last);
  const prevSweep = [...s.finalFits.keys()].filter((k) => k < last).sort((a, b) => b - a)[0];
  const prev = prevSweep !== undefined ? s.finalFits.get(prevSweep) : undefined;
  const a = paramRows(cur);
  const b = paramRows(prev);
  const names = [...new Set([...a.keys(), ...b.keys()])];
  const box = $('params');
  box.textContent = '';
  if (names.length === 0) {
    box.textContent = s.fitErrors.get(last) ?? 'No fit yet.';
    return;
  }
  const table = document.createElement('table');
  table.className = 'params';
  const head = table.insertRow();
  for (const h of ['', `sweep ${last}${curFinal ? '' : ' (live)'}`, prevSweep !== undefined ? `sweep ${prevSweep}` : '']) {
    const th = document.createElement('th');
    th.textContent = h;
    head.append(th);
  }
  for (const n of names) {
    const row = table.insertRow();
    row.dataset.param = n;
    const c0 = row.insertCell();
    c0.textContent = n;
    for (const [src, cls] of [[a, 'value'], [b, '']] as const) {
      const c = row.insertCell();
      c.className = cls;
      const v = src.get(n);
      if (v) {
        const [val, unit] = v.split('|');
        c.innerHTML = '';
        const sv = document.createElement('span');
        sv.className = 'num';
        sv.textContent = val;
        const su = document.createElement('span');
        su.className = 'unit';
        su.textContent = ` ${unit}`;
        c.append(sv, su);
      }
    }
  }
  box.append(table);
  const w = $('fit-warnings');
  w.textContent = '';
  if (cur) {
    const ul = document.createElement('ul');
    ul.className = 'warnings';
    if (!cur.plausible) {
      const li = document.createElement('li');
      li.className = 'implausible';
      li.textContent = 'Not plausible for this mechanism: see the notes.';
      ul.append(li);
    }
    for (const t of cur.warnings) {
      const li = document.createElement('li');
      li.textContent = t;
      ul.append(li);
    }
    const li = document.createElement('li');
    li.style.color = '#5d5d5d';
    li.textContent = `window ${fmt(cur.window.from)} … ${fmt(cur.window.to)} V (${cur.window.mode}), ${cur.line.n} points, R² ${cur.line.r2.toFixed(5)}`;
    ul.append(li);
    w.append(ul);
  }
}

function renderRanking(s: Store): void {
  const box = $('ranking');
  box.textContent = '';
  const r = s.ranking;
  if (!r) {
    box.textContent = 'After the first complete sweep.';
    return;
  }
  const ol = document.createElement('ol');
  ol.className = 'ranking';
  for (const e of r.ranking.slice(0, 6)) {
    const li = document.createElement('li');
    const name = document.createElement('span');
    name.textContent = e.title;
    if (!e.plausible) name.className = 'no';
    const sc = document.createElement('span');
    sc.className = 'score';
    sc.textContent = ` — weight ${e.score >= 0.001 ? e.score.toFixed(3) : '< 0.001'}${e.plausible ? '' : ' (implausible)'}`;
    li.append(name, sc);
    ol.append(li);
  }
  box.append(`Latest ranking (sweep ${r.sweep}; at most one a second), Akaike weights:`, ol);
}

// ---- controls -------------------------------------------------------------------------------
let analysis: Json = null;
function currentAnalysis(): Json {
  return analysis;
}

async function loadStatus(): Promise<void> {
  const st = await call('GET', '/api/status');
  analysis = st.analysis;
  $('station-name').textContent = st.scenario ? `simulator: ${st.scenario}` : st.instrument;
  const sel = $<HTMLSelectElement>('model-select');
  sel.textContent = '';
  for (const m of st.models as { id: string; title: string }[]) {
    const o = document.createElement('option');
    o.value = m.id;
    o.textContent = m.title;
    sel.append(o);
  }
  fillAnalysis(st.analysis);
}

function fillAnalysis(a: Json): void {
  const f = $<HTMLFormElement>('analysis-form');
  (f.elements.namedItem('model') as HTMLSelectElement).value = a.model;
  const set = (n: string, v: number | undefined) => ((f.elements.namedItem(n) as HTMLInputElement).value = v === undefined ? '' : String(v));
  set('thickness', a.inputs?.thickness !== undefined ? a.inputs.thickness * 1e9 : undefined);
  set('area', a.inputs?.area !== undefined ? a.inputs.area * 1e4 : undefined);
  set('temperature', a.inputs?.temperature);
  set('from', typeof a.window === 'object' ? a.window.from : undefined);
  set('to', typeof a.window === 'object' ? a.window.to : undefined);
}

function num(form: HTMLFormElement, name: string): number | undefined {
  const v = (form.elements.namedItem(name) as HTMLInputElement).value.trim();
  return v === '' ? undefined : Number(v);
}

$('plan-form').addEventListener('submit', (ev) => {
  ev.preventDefault();
  const f = ev.target as HTMLFormElement;
  const plan = {
    kind: (f.elements.namedItem('kind') as HTMLSelectElement).value,
    start: num(f, 'start'),
    stop: num(f, 'stop'),
    points: num(f, 'points'),
    repeat: num(f, 'repeat'),
    compliance: num(f, 'compliance'),
    dual: (f.elements.namedItem('dual') as HTMLInputElement).checked,
  };
  // The device under test (journaled with the session; used by the lot view and weibull).
  const text = (name: string) => (f.elements.namedItem(name) as HTMLInputElement).value.trim();
  const device = Object.fromEntries(
    [['device', text('device') || undefined], ['wafer', text('wafer') || undefined], ['site', text('site') || undefined], ['x', num(f, 'x')], ['y', num(f, 'y')]].filter(([, v]) => v !== undefined),
  );
  backToLive();
  call('POST', '/api/run', Object.keys(device).length ? { plan, device } : { plan }).then((r) => say(`Run started: ${r.session}`)).catch((e: Error) => say(e.message, true));
});
$('run-stop').addEventListener('click', () => {
  call('POST', '/api/run/stop', { reason: 'stop requested from the page' }).then(() => say('The run stops after this sweep.')).catch((e: Error) => say(e.message, true));
});
function abort(): void {
  if (viewStore.readOnly) {
    say('A past session is open read-only: nothing to abort here (Back to the live session).', true);
    return;
  }
  call('POST', '/api/run/abort', { reason: 'abort from the page' }).then(() => say('Aborted: output off sent.')).catch((e: Error) => say(e.message, true));
}
$('abort').addEventListener('click', abort);
document.addEventListener('keydown', (e) => {
  if (e.key === 'Escape') abort();
});
$('analysis-form').addEventListener('submit', (ev) => {
  ev.preventDefault();
  const f = ev.target as HTMLFormElement;
  const t = num(f, 'thickness');
  const ar = num(f, 'area');
  const from = num(f, 'from');
  const to = num(f, 'to');
  const body = {
    model: (f.elements.namedItem('model') as HTMLSelectElement).value,
    inputs: { ...(analysis?.inputs ?? {}), ...(t !== undefined ? { thickness: t * 1e-9 } : {}), ...(ar !== undefined ? { area: ar * 1e-4 } : {}), ...(num(f, 'temperature') !== undefined ? { temperature: num(f, 'temperature') } : {}) },
    window: from !== undefined || to !== undefined ? { from, to } : 'auto',
  };
  call('PUT', '/api/analysis', body).then((a) => {
    analysis = a;
    say(`Analysis set: ${a.model}`);
  }).catch((e: Error) => say(e.message, true));
});
$('auto-window').addEventListener('click', () => {
  if (!analysis) return;
  call('PUT', '/api/analysis', { ...analysis, window: 'auto' }).then((a) => {
    analysis = a;
    fillAnalysis(a);
    say('Automatic fit window.');
  }).catch((e: Error) => say(e.message, true));
});
$('note-form').addEventListener('submit', (ev) => {
  ev.preventDefault();
  const f = ev.target as HTMLFormElement;
  const text = (f.elements.namedItem('text') as HTMLInputElement).value;
  const tags = (f.elements.namedItem('tags') as HTMLInputElement).value.split(',').map((t) => t.trim()).filter(Boolean);
  const sweep = num(f, 'sweep');
  call('POST', '/api/annotations', { text, tags, ...(sweep !== undefined ? { sweep } : {}), ...(viewStore.readOnly && viewStore.session ? { session: viewStore.session } : {}) })
    .then(() => {
      say('Note added to the journal.');
      f.reset();
    }).catch((e: Error) => say(e.message, true));
});
$('lin-whole').addEventListener('change', () => {
  lin.wholeCurve = ($('lin-whole') as HTMLInputElement).checked;
  if (lin.wholeCurve) lin.plot?.setData(lin.plot.data, true);
  viewStore.dirty = true;
  schedule();
});
$('raw-log').addEventListener('change', () => {
  viewStore.dirty = true;
  schedule();
});

// ---- past sessions (read-only) ------------------------------------------------------------
async function loadSessions(): Promise<void> {
  const r = await call('GET', '/api/sessions');
  const box = $('sessions');
  box.textContent = '';
  for (const id of (r.sessions as string[]).slice(0, 30)) {
    const b = document.createElement('button');
    b.textContent = id;
    b.addEventListener('click', () => void openSession(id));
    box.append(b);
  }
}

async function openSession(id: string): Promise<void> {
  const past = new Store();
  past.readOnly = true;
  past.reset(id);
  const detail = await call('GET', `/api/sessions/${encodeURIComponent(id)}`);
  const rd = await call('GET', `/api/sessions/${encodeURIComponent(id)}/readings`);
  const evs: WireEvent[] = [...detail.events];
  for (const row of rd.rows as number[][]) evs.push({ type: 'reading', seq: row[0], sweep: row[1], k: row[2], t: row[3], v: row[4], i: row[5], flags: row[6] });
  evs.sort((a, b) => a.seq - b.seq);
  for (const e of evs) past.applyEvent(e);
  past.running = false;
  past.session = id;
  const last = past.latestSweep();
  if (last > 0) {
    const v = await call('GET', `/api/sessions/${encodeURIComponent(id)}/sweeps/${last}/view`);
    past.views.set(last, v.view);
  }
  past.dirty = true;
  viewStore = past;
  schedule();
}

function backToLive(): void {
  viewStore = liveStore;
  liveStore.dirty = true;
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
  charts: { raw, lin, drift },
};

loadStatus().catch((e: Error) => say(`status: ${e.message}`, true));
loadSessions().catch(() => undefined);
setInterval(() => void loadSessions().catch(() => undefined), 10_000);
window.addEventListener('resize', () => {
  for (const p of [raw.plot, lin.plot, lin.resid, drift.plot]) p?.setSize({ width: Math.max(300, (p.root.parentElement as HTMLElement).clientWidth), height: p.height });
});
connect();
