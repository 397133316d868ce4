// The lab overview page: one card per station, from the retained status messages the stations
// publish (relayed by `plumbline lab` over a websocket). It only draws what the stations computed,
// and sends nothing back: read-only by design.

/** @type {Map<string, any>} */
const stations = new Map();
const main = document.getElementById('stations');
const brokerEl = document.getElementById('broker');
const countsEl = document.getElementById('counts');
const emptyEl = document.getElementById('empty');
let brokerName = '';

const STATE = {
  running: { symbol: '●', text: 'running' },
  idle: { symbol: '○', text: 'idle' },
  offline: { symbol: '✕', text: 'offline' },
};

function el(tag, cls, text) {
  const e = document.createElement(tag);
  if (cls) e.className = cls;
  if (text !== undefined) e.textContent = text;
  return e;
}

function fmt(x, digits) {
  if (x === null || x === undefined || !Number.isFinite(x)) return '—';
  return Number(x).toPrecision(digits);
}

function ago(iso) {
  const s = Math.max(0, (Date.now() - Date.parse(iso)) / 1000);
  return s < 60 ? `${s.toFixed(0)} s ago` : s < 3600 ? `${(s / 60).toFixed(0)} min ago` : `${(s / 3600).toFixed(1)} h ago`;
}

function deviceText(d) {
  if (!d || typeof d !== 'object') return '';
  const parts = [];
  for (const k of ['wafer', 'site']) if (d[k] !== undefined) parts.push(`${k} ${d[k]}`);
  return parts.join(', ');
}

function card(s) {
  const c = el('section', `card ${s.state}`);
  c.dataset.station = s.station;
  c.dataset.state = s.state;
  const h = el('h2');
  h.append(el('span', 'name', s.name || s.station));
  const st = STATE[s.state] ?? STATE.idle;
  h.append(el('span', `state ${s.state}`, `${st.symbol} ${st.text}`));
  c.append(h);
  c.append(el('div', 'id', `station ${s.station} · updated ${ago(s.updated)}`));
  const x = s.session;
  if (x) {
    c.append(el('div', 'meta session', `session ${x.id}`));
    const src = x.source ? `${x.source.kind}: ${x.source.detail}` : '';
    const dev = deviceText(x.device);
    if (src || x.instrument) c.append(el('div', 'meta', [x.instrument, src].filter(Boolean).join(' · ')));
    if (dev) c.append(el('div', 'meta device', dev));
    const p = el('div', 'progress');
    const sweeps = x.sweeps ? `/${x.sweeps}` : '';
    const points = x.points ? `/${x.points}` : '';
    p.append(el('span', 'progress-text', `sweep ${x.sweep}${sweeps} · point ${x.point}${points} · ${x.readings} readings${x.eta !== null && x.eta !== undefined ? ` · about ${Math.ceil(x.eta)} s left` : ''}`));
    if (x.sweeps > 0) {
      const bar = el('div', 'bar');
      const fill = el('div');
      const frac = Math.min(1, ((x.sweep - 1) + (x.points ? x.point / x.points : 0)) / x.sweeps);
      fill.style.width = `${(x.outcome ? 1 : Math.max(0, frac)) * 100}%`;
      bar.append(fill);
      p.append(bar);
    }
    c.append(p);
    if (x.output) c.append(el('div', 'meta output', `output ${x.output.on ? 'ON' : 'off'}${x.output.confirmed ? '' : ' (not confirmed)'}`));
    if (x.outcome) c.append(el('div', 'outcome', `run ended: ${x.outcome} — ${x.reason ?? ''}`));
  } else c.append(el('div', 'meta', 'no session yet'));
  if (s.fit) {
    const f = el('div', 'fit');
    f.append(el('div', s.fit.plausible ? '' : 'implausible', `${s.fit.title} · sweep ${s.fit.sweep}${s.fit.final ? '' : ' (live)'} · R² ${fmt(s.fit.r2, 5)}${s.fit.plausible ? '' : ' · ⚠ not plausible'}`));
    const t = el('table', 'params');
    for (const [k, v] of Object.entries(s.fit.parameters).slice(0, 4)) {
      const tr = el('tr');
      tr.dataset.parameter = k;
      // The server's text in the trade's units; the SI figures only if it sent none.
      const d = s.display?.[k] ?? { text: `${fmt(v.value, 5)} ± ${fmt(v.stdErr, 2)}`, unit: v.unit };
      tr.append(el('td', 'k', k), el('td', 'v', d.text), el('td', 'u', d.unit));
      t.append(tr);
    }
    f.append(t);
    c.append(f);
  }
  if (s.drift && s.drift.state !== 'baseline' && s.drift.state !== 'no-value') {
    c.append(el('div', 'meta drift', `drift of ${s.drift.parameter}: ${s.drift.state}`));
  }
  if (s.cautions && s.cautions.length) {
    const ul = el('ul', 'cautions');
    // The latest three distinct cautions (a repeated one is shown once).
    const seen = new Set();
    const distinct = [...s.cautions].reverse().filter((k) => !seen.has(k.message) && seen.add(k.message)).slice(0, 3).reverse();
    for (const k of distinct) ul.append(el('li', '', `⚠ [${k.kind}] ${k.message}`));
    c.append(ul);
  }
  if (s.page && s.state !== 'offline') {
    const a = el('a', 'open', `open this station's page ↗${s.tokenRequired ? ' (control needs its token)' : ''}`);
    a.href = s.page;
    a.target = '_blank';
    a.rel = 'noopener';
    c.append(a);
  }
  return c;
}

function render() {
  const list = [...stations.values()].sort((a, b) => (a.name || a.station).localeCompare(b.name || b.station));
  main.replaceChildren(...list.map(card));
  emptyEl.classList.toggle('hidden', list.length > 0);
  const n = (k) => list.filter((s) => s.state === k).length;
  countsEl.textContent = `${list.length} station(s): ${n('running')} running, ${n('idle')} idle, ${n('offline')} offline`;
}

let dirty = false;
function schedule() {
  if (dirty) return;
  dirty = true;
  requestAnimationFrame(() => {
    dirty = false;
    render();
  });
}

function setBroker(connected) {
  brokerEl.textContent = connected ? `broker ${brokerName}` : `broker ${brokerName}: not connected — states may be stale`;
  brokerEl.classList.toggle('down', !connected);
}

function connect() {
  const token = new URLSearchParams(location.search).get('token');
  const ws = new WebSocket(`${location.protocol === 'https:' ? 'wss' : 'ws'}://${location.host}/ws${token ? `?token=${encodeURIComponent(token)}` : ''}`);
  ws.onmessage = (ev) => {
    const m = JSON.parse(ev.data);
    if (m.kind === 'stations') {
      brokerName = m.broker;
      stations.clear();
      for (const s of m.stations) stations.set(s.station, s);
      setBroker(m.connected);
    } else if (m.kind === 'status') stations.set(m.status.station, m.status);
    else if (m.kind === 'broker') setBroker(m.connected);
    schedule();
  };
  ws.onclose = () => {
    brokerEl.textContent = 'lab server unreachable — reconnecting…';
    brokerEl.classList.add('down');
    setTimeout(connect, 1000);
  };
}

window.__plumblineLab = { stations };
connect();
setInterval(schedule, 5000); // keep the "updated … ago" texts honest
