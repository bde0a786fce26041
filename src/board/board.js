/*
 * The control-room board in the browser: open incidents by severity and waiting time, their trend charts, live
 * updates over server-sent events, and acknowledge / shelve / resolve with a note. Plain DOM, no framework: every
 * value from the server goes in as text (textContent), never as markup; the one exception is the chart, an SVG our
 * own server draws, which is parsed as SVG and stripped of anything active before it is shown.
 */
/* global document, sessionStorage, fetch, EventSource, DOMParser, URLSearchParams, setTimeout, clearTimeout, setInterval, location */

const TOKEN_KEY = 'wearshift.token';
const NAME_KEY = 'wearshift.name';
const EVENT_COOKIE = 'wearshift_token';
const SEVERITY_RANK = { watch: 0, caution: 1, alarm: 2 };
/** Findings a card on the board shows; the rest are a link away, on the incident page. */
const CARD_EVIDENCE = 3;
const GLYPH = { watch: '◇', caution: '▲', alarm: '■' };
const SHELVE_CHOICES = [
  ['1', '1 hour'],
  ['8', '8 hours'],
  ['24', '24 hours'],
  ['72', '3 days'],
];

const $ = (id) => document.getElementById(id);

const session = {
  token: sessionStorage.getItem(TOKEN_KEY),
  name: sessionStorage.getItem(NAME_KEY) ?? '',
  roles: [],
  /** The site zone times are shown in; the server says which (display.timeZone). */
  timeZone: 'UTC',
};
let events;
let reloadTimer;
let firstLoad = true;
let connectedBefore = false;
/** Incidents on the page by id, with the DOM of their card. */
const cards = new Map();

// ---------------------------------------------------------------- API

async function api(path, options = {}) {
  const headers = { accept: 'application/json', authorization: `Bearer ${session.token}` };
  if (options.body !== undefined) headers['content-type'] = 'application/json';
  let response;
  try {
    response = await fetch(path, { method: options.method ?? 'GET', headers, body: options.body === undefined ? undefined : JSON.stringify(options.body) });
  } catch {
    return { ok: false, status: 0, body: { message: 'the server cannot be reached' } };
  }
  const type = response.headers.get('content-type') ?? '';
  const body = type.includes('json') ? await response.json().catch(() => ({})) : await response.text();
  return { ok: response.ok, status: response.status, body };
}

function problemText(result) {
  const message = typeof result.body === 'object' && result.body !== null && typeof result.body.message === 'string' ? result.body.message : '';
  const reason =
    result.status === 403
      ? 'Refused (403 forbidden)'
      : result.status === 401
        ? 'Refused (401: token not accepted)'
        : result.status === 0
          ? 'Not sent'
          : `Failed (${result.status})`;
  return message === '' ? `${reason}.` : `${reason}: ${message}.`;
}

const incidentPath = (id) => `/v1/incidents/${encodeURIComponent(id)}`;
const incidentPagePath = (id) => `/incidents/${encodeURIComponent(id)}`;
const componentPath = (unit, component) => `/units/${encodeURIComponent(unit)}/components/${encodeURIComponent(component)}`;
const apiComponentPath = (unit, component) => `/v1/units/${encodeURIComponent(unit)}/components/${encodeURIComponent(component)}`;

// ---------------------------------------------------------------- sign-in

async function signIn(token, name) {
  session.token = token;
  const result = await api('/v1/session');
  if (!result.ok) {
    session.token = null;
    return result.status === 401 ? 'That token is not accepted.' : problemText(result);
  }
  session.roles = result.body.roles;
  session.timeZone = typeof result.body.timeZone === 'string' ? result.body.timeZone : 'UTC';
  session.name = name;
  sessionStorage.setItem(TOKEN_KEY, token);
  sessionStorage.setItem(NAME_KEY, name);
  // EventSource cannot send headers: the token rides along in a cookie for the event stream's path only.
  const secure = location.protocol === 'https:' ? '; Secure' : '';
  document.cookie = `${EVENT_COOKIE}=${encodeURIComponent(token)}; Path=/v1/events; SameSite=Strict${secure}`;
  return undefined;
}

function signOut() {
  sessionStorage.removeItem(TOKEN_KEY);
  document.cookie = `${EVENT_COOKIE}=; Path=/v1/events; Max-Age=0; SameSite=Strict`;
  events?.close();
  location.reload();
}

const canAct = () => session.roles.includes('responder');

function showSignIn(message) {
  $('sign-in').hidden = false;
  $('board').hidden = true;
  $('incident').hidden = true;
  $('component').hidden = true;
  $('sign-in-error').textContent = message ?? '';
  $('name').value = session.name;
  $('token').focus();
}

function renderWho() {
  const role = canAct() ? 'responder' : session.roles.includes('viewer') ? 'viewer' : session.roles.join(', ');
  $('who-text').textContent = `Signed in as ${role}${session.name ? ` (${session.name})` : ''}`;
  $('sign-out').hidden = false;
}

// ---------------------------------------------------------------- formatting

/**
 * One time format everywhere (the same as src/notify/format.ts, which e-mails and the command line use): ISO 8601
 * to the minute with its zone, 2026-03-01T08:00Z in UTC or 2026-03-01T09:00+01:00 in the site zone.
 */
const wallClocks = new Map();
function formatTime(iso) {
  const t = new Date(iso);
  if (Number.isNaN(t.getTime())) return String(iso);
  const ms = Math.floor(t.getTime() / 60_000) * 60_000;
  const zone = session.timeZone;
  if (zone === 'UTC' || zone === 'Etc/UTC') return `${new Date(ms).toISOString().slice(0, 16)}Z`;
  let f = wallClocks.get(zone);
  if (f === undefined) {
    f = new Intl.DateTimeFormat('en-US', { timeZone: zone, hourCycle: 'h23', year: 'numeric', month: '2-digit', day: '2-digit', hour: '2-digit', minute: '2-digit', second: '2-digit' });
    wallClocks.set(zone, f);
  }
  const p = Object.fromEntries(f.formatToParts(new Date(ms)).map((x) => [x.type, x.value]));
  const offset = Math.round((Date.UTC(Number(p.year), Number(p.month) - 1, Number(p.day), Number(p.hour), Number(p.minute)) - ms) / 60_000);
  const pad = (n) => String(Math.trunc(Math.abs(n))).padStart(2, '0');
  return `${p.year}-${p.month}-${p.day}T${p.hour}:${p.minute}${offset === 0 ? 'Z' : `${offset < 0 ? '-' : '+'}${pad(offset / 60)}:${pad(offset % 60)}`}`;
}

function timeZoneNote() {
  const zone = session.timeZone;
  return zone === 'UTC' || zone === 'Etc/UTC' ? 'Times are ISO 8601 in UTC (Z).' : `Times are ISO 8601 in the site zone ${zone}, offset written with each time.`;
}

function duration(ms) {
  const minutes = Math.max(0, Math.floor(ms / 60_000));
  if (minutes < 60) return `${minutes} min`;
  const hours = Math.floor(minutes / 60);
  if (hours < 48) return `${hours} h ${String(minutes % 60).padStart(2, '0')} min`;
  return `${Math.floor(hours / 24)} days ${hours % 24} h`;
}

/** Since when the incident has waited for someone: when it was announced, else its opening sample. */
const waitingSince = (incident) => incident.escalation?.startedAt ?? incident.openedAt;

function el(tag, attrs = {}, ...children) {
  const node = document.createElement(tag);
  for (const [key, value] of Object.entries(attrs)) {
    if (value === undefined || value === null || value === false) continue;
    if (key === 'text') node.textContent = value;
    else if (key === 'hidden') node.hidden = Boolean(value);
    else node.setAttribute(key, value === true ? '' : String(value));
  }
  for (const child of children) if (child !== undefined && child !== null) node.append(child);
  return node;
}

/**
 * The one rule for an incident's severity (as in src/notify/message.ts): the highest severity of its evidence;
 * when it was more severe before, the peak is written beside it.
 */
function severityWords(severity, peak) {
  return peak !== undefined && SEVERITY_RANK[peak] > SEVERITY_RANK[severity] ? `${severity} (peak ${peak})` : severity;
}

function severityBadge(severity, peak) {
  return el('span', { class: 'sev', 'data-severity': severity }, el('span', { class: 'glyph', 'aria-hidden': 'true', text: GLYPH[severity] ?? '?' }), ` ${severityWords(severity, peak)}`);
}

/**
 * Most severe first: the finding that sets the incident's severity always leads the evidence; within a severity, the
 * one furthest beyond its limit first (as in src/notify/message.ts), so that the chart follows the strongest signal.
 */
const beyondLimit = (f) => (typeof f.value === 'number' && typeof f.threshold === 'number' && f.threshold !== 0 ? Math.abs(f.value / f.threshold) : 0);
const bySeverity = (findings) =>
  [...(findings ?? [])].sort((a, b) => (SEVERITY_RANK[b.severity] ?? -1) - (SEVERITY_RANK[a.severity] ?? -1) || beyondLimit(b) - beyondLimit(a));

function stateWords(incident) {
  if (incident.closed) return 'closed';
  const parts = [incident.alarm === 'active' ? 'active' : 'returned to normal', incident.acknowledged ? 'acknowledged' : 'unacknowledged'];
  if (incident.shelved) parts.push(`shelved until ${formatTime(incident.shelved.until)}`);
  return parts.join(', ');
}

/** The incident's measurands, the one that sets its severity first (an incident kept per measurand: that one). */
function measurandsOf(incident) {
  const seen = [];
  if (incident.measurand) seen.push(incident.measurand);
  for (const f of bySeverity(incident.evidence)) if (!seen.includes(f.measurand)) seen.push(f.measurand);
  return seen;
}

// ---------------------------------------------------------------- charts

/** Drawn narrower than the card, so that scaling it up makes its words larger on a wall screen. */
async function loadChart(container, unit, component, measurand, width = 640) {
  const query = new URLSearchParams({ measurand, title: 'none', width: String(width) });
  const result = await api(`${apiComponentPath(unit, component)}/chart.svg?${query}`);
  container.replaceChildren();
  if (!result.ok) {
    container.append(el('p', { class: 'chart-problem', text: `Chart of ${measurand} not available: ${problemText(result)}` }));
    return;
  }
  const doc = new DOMParser().parseFromString(result.body, 'image/svg+xml');
  const svg = doc.documentElement;
  if (svg.nodeName !== 'svg') {
    container.append(el('p', { class: 'chart-problem', text: `Chart of ${measurand} could not be read.` }));
    return;
  }
  for (const active of svg.querySelectorAll('script, foreignObject')) active.remove();
  for (const node of [svg, ...svg.querySelectorAll('*')]) {
    for (const attr of [...node.attributes]) if (/^on/i.test(attr.name) || /javascript:/i.test(attr.value)) node.removeAttribute(attr.name);
  }
  container.append(document.importNode(svg, true));
}

// ---------------------------------------------------------------- the board

function sortIncidents(list) {
  // Most severe first; within a severity, the one that has waited longest first.
  return [...list].sort(
    (a, b) => SEVERITY_RANK[b.severity] - SEVERITY_RANK[a.severity] || Date.parse(waitingSince(a)) - Date.parse(waitingSince(b)) || (a.id < b.id ? -1 : 1),
  );
}

async function loadBoard() {
  const result = await api('/v1/incidents?state=open&limit=500');
  if (!result.ok) {
    if (result.status === 401) return showSignIn('The token is no longer accepted; please sign in again.');
    $('summary').textContent = `Incidents could not be loaded. ${problemText(result)}`;
    return;
  }
  renderBoard(sortIncidents(result.body.incidents));
}

function renderBoard(incidents) {
  const counts = { alarm: 0, caution: 0, watch: 0 };
  for (const i of incidents) counts[i.severity] += 1;
  const summary = $('summary');
  summary.replaceChildren(
    ...['alarm', 'caution', 'watch'].map((s) => el('span', {}, severityBadge(s), `: ${counts[s]}`)),
    el('span', { text: `${incidents.filter((i) => !i.acknowledged).length} waiting for acknowledgement` }),
  );
  $('empty').hidden = incidents.length > 0;

  const list = $('incidents');
  const keep = new Set(incidents.map((i) => i.id));
  for (const [id, card] of cards) {
    if (!keep.has(id)) {
      card.node.remove();
      cards.delete(id);
    }
  }
  let previous = null;
  for (const incident of incidents) {
    let card = cards.get(incident.id);
    if (card === undefined) {
      card = createCard(incident);
      cards.set(incident.id, card);
      if (cards.size > 1 && !firstLoad) card.node.classList.add('is-new');
    }
    updateCard(card, incident);
    // Move a card only when it is out of place: moving the card holding the focus would lose it.
    const expected = previous === null ? list.firstElementChild : previous.nextElementSibling;
    if (expected !== card.node) list.insertBefore(card.node, expected);
    previous = card.node;
  }
  firstLoad = false;
}

function createCard(incident) {
  const id = `inc-${cards.size}-${Date.now().toString(36)}`;
  const title = el('h3', { id: `${id}-title` });
  const node = el('li', { class: 'incident', 'aria-labelledby': `${id}-title`, 'data-incident': incident.id });
  const badge = el('span');
  const state = el('p', { class: 'state' });
  const evidence = el('ul', { class: 'evidence', 'aria-label': 'Evidence, most severe first' });
  const chartCaption = el('p', { class: 'chart-caption' });
  const chart = el('div', { class: 'chart' }, el('p', { class: 'loading', text: 'Loading the trend chart…' }));
  const note = el('textarea', { id: `${id}-note`, maxlength: '2000', rows: '2' });
  const shelveFor = el('select', { id: `${id}-shelve`, 'aria-label': 'Shelve for' }, ...SHELVE_CHOICES.map(([value, label]) => el('option', { value, text: label })));
  const status = el('p', { class: 'action-status', role: 'status' });
  const buttons = {
    ack: el('button', { type: 'button', 'data-action': 'ack', text: 'Acknowledge' }),
    shelve: el('button', { type: 'button', 'data-action': 'shelve', text: 'Shelve' }),
    resolve: el('button', { type: 'button', 'data-action': 'resolve', text: 'Resolve' }),
  };
  const viewerNote = el('p', { class: 'hint', id: `${id}-why`, hidden: true, text: 'Acknowledge, shelve and resolve need a responder token; this token is a viewer token.' });
  // A sampling incident asks whoever takes samples, or the lab, whether the sample in doubt is genuine.
  const verdicts = {
    confirmed: el('button', { type: 'button', 'data-verdict': 'confirmed', text: 'Sample is genuine' }),
    rejected: el('button', { type: 'button', 'data-verdict': 'rejected', text: 'Sample is wrong' }),
  };
  const sampleQuestion = el('p', { class: 'hint' });
  const sampleRow = el('div', { class: 'sample-verdict', role: 'group', 'aria-label': 'The sample in doubt', hidden: true }, sampleQuestion, el('div', { class: 'action-row' }, verdicts.confirmed, verdicts.rejected));
  const actions = el(
    'div',
    { class: 'actions', role: 'group', 'aria-label': 'Respond' },
    el('label', { for: `${id}-note`, text: 'Note' }, el('span', { class: 'hint', text: ' (required to shelve or resolve)' })),
    note,
    el('div', { class: 'action-row' }, buttons.ack, buttons.shelve, shelveFor, buttons.resolve),
    sampleRow,
    viewerNote,
    status,
  );
  node.append(el('div', { class: 'incident-head' }, badge, title), state, evidence, chartCaption, chart, actions);
  const card = { node, title, badge, state, evidence, chartCaption, chart, note, shelveFor, status, buttons, viewerNote, incident, chartKey: '', verdicts, sampleRow, sampleQuestion };
  for (const [action, button] of Object.entries(buttons)) button.addEventListener('click', () => act(card, action));
  for (const [verdict, button] of Object.entries(verdicts)) button.addEventListener('click', () => judgeSample(card, verdict));
  return card;
}

function updateCard(card, incident) {
  card.incident = incident;
  const { node } = card;
  node.dataset.severity = incident.severity;
  node.dataset.acknowledged = String(Boolean(incident.acknowledged));
  card.badge.replaceChildren(severityBadge(incident.severity, incident.peakSeverity));
  const measurands = measurandsOf(incident);
  card.title.replaceChildren(
    el('a', { href: componentPath(incident.unit, incident.component), text: `${incident.unit} / ${incident.component}` }),
    measurands.length > 0 ? ` — ${measurands.join(', ')}` : '',
  );
  renderState(card);
  // Most severe first: the first one always carries the incident's severity. The board's cards show the first
  // few; the incident page shows every one.
  const evidence = bySeverity(incident.evidence);
  const shown = view === 'incident' ? evidence : evidence.slice(0, CARD_EVIDENCE);
  const forecasts = (incident.forecast ?? []).slice(0, 4);
  card.evidence.replaceChildren(
    ...shown.map((f) => el('li', { 'data-severity': f.severity }, el('strong', { text: `${f.measurand} · ${f.severity} · ${f.rule}: ` }), f.explanation)),
    evidence.length > shown.length
      ? el('li', { class: 'more' }, el('a', { href: incidentPagePath(incident.id), text: `${evidence.length - shown.length} more ${evidence.length - shown.length === 1 ? 'finding' : 'findings'} on the incident page` }))
      : null,
    ...forecasts.map((f) => el('li', { class: 'forecast', 'data-forecast': f.outcome }, el('strong', { text: 'time to limit: ' }), f.text)),
    ...(forecasts.length > 0 ? [el('li', { class: 'forecast-caution', text: FORECAST_CAUTION })] : []),
  );
  const enabled = canAct() && !incident.closed;
  for (const button of Object.values(card.buttons)) {
    button.disabled = !enabled;
    if (canAct()) button.removeAttribute('aria-describedby');
    else button.setAttribute('aria-describedby', card.viewerNote.id);
  }
  card.buttons.ack.disabled = !enabled || Boolean(incident.acknowledged);
  const doubt = sampleInDoubt(incident);
  card.sampleRow.hidden = doubt === undefined;
  if (doubt !== undefined) {
    card.sampleQuestion.textContent = `Sample ${doubt.sampleId} of ${formatTime(doubt.sampledAt)} is kept out of the trend until someone who knows says what it was.`;
    for (const button of Object.values(card.verdicts)) button.disabled = !enabled;
  }
  card.viewerNote.hidden = canAct();
  // The chart follows the incident's latest sample; a new result redraws it.
  // The chart shows the measurand of the most severe finding, and says so.
  const chartKey = `${measurands[0] ?? ''}@${incident.lastSampleId}`;
  card.chartCaption.textContent = measurands.length > 0 ? chartCaptionText(measurands[0], measurands.length) : '';
  card.chart.dataset.measurand = measurands[0] ?? '';
  if (measurands.length > 0 && chartKey !== card.chartKey) {
    card.chartKey = chartKey;
    void loadChart(card.chart, incident.unit, incident.component, measurands[0]);
  } else if (measurands.length === 0) {
    card.chart.replaceChildren(el('p', { class: 'chart-problem', text: 'No measurand to chart.' }));
  }
}

function chartCaptionText(measurand, count) {
  const others = count > 1 ? ` The other measurands are on the component page.` : '';
  return `Trend of ${measurand}, the measurand of the most severe finding.${others}`;
}

function renderState(card) {
  const incident = card.incident;
  const words = stateWords(incident);
  const parts = [el('strong', { text: words })];
  if (incident.acknowledged) {
    const ack = incident.acknowledged;
    parts.push(` · by ${ack.by} at ${formatTime(ack.at)}`);
    if (ack.note) parts.push(` — “${ack.note}”`);
  } else {
    parts.push(' · ', el('span', { class: 'waiting', text: `waiting ${duration(Date.now() - Date.parse(waitingSince(incident)))}` }));
    if (incident.escalation && incident.escalation.reachedTier > 0) parts.push(` · escalated to tier ${incident.escalation.reachedTier}`);
  }
  parts.push(` · opened by sample ${incident.openedBySampleId} of ${formatTime(incident.openedAt)}`);
  if (view !== 'incident') parts.push(' · ', el('a', { class: 'incident-link', href: incidentPagePath(incident.id), text: 'incident page and timeline' }));
  card.state.replaceChildren(...parts);
}

async function act(card, action) {
  const note = card.note.value.trim();
  const by = session.name.trim() || 'board user';
  let body;
  if (action === 'ack') body = note === '' ? { by } : { by, note };
  else if (note === '') {
    setStatus(card, 'error', `Write a note first: ${action === 'shelve' ? 'the reason for shelving' : 'how it was resolved'}.`);
    card.note.focus();
    return;
  } else if (action === 'shelve') body = { by, until: new Date(Date.now() + Number(card.shelveFor.value) * 3_600_000).toISOString(), reason: note };
  else body = { by, note };
  setStatus(card, 'busy', 'Sending…');
  const result = await api(`${incidentPath(card.incident.id)}/${action}`, { method: 'POST', body });
  if (!result.ok) {
    setStatus(card, 'error', problemText(result));
    return;
  }
  const verb = { ack: 'Acknowledged', shelve: 'Shelved', resolve: 'Resolved' }[action];
  card.note.value = '';
  setStatus(card, 'done', `${verb}.`);
  announce(`${verb}: ${card.incident.unit} / ${card.incident.component}.`);
  if (result.body.incident.closed) scheduleReload(0);
  else updateCard(card, { ...card.incident, ...result.body.incident });
}

/** The latest sample a sampling finding of the incident put in doubt, if any. */
function sampleInDoubt(incident) {
  return (incident.evidence ?? []).find((f) => f.rule === 'sampling');
}

async function judgeSample(card, verdict) {
  const doubt = sampleInDoubt(card.incident);
  if (doubt === undefined) return;
  const by = session.name.trim() || 'board user';
  setStatus(card, 'busy', 'Sending…');
  const path = `${apiComponentPath(card.incident.unit, card.incident.component)}/samples/${encodeURIComponent(doubt.sampleId)}/verdict`;
  const result = await api(path, { method: 'POST', body: { verdict, by } });
  if (!result.ok) {
    setStatus(card, 'error', problemText(result));
    return;
  }
  const words = verdict === 'confirmed' ? 'genuine: it goes back into the trend' : 'wrong: it stays out of the trend';
  setStatus(card, 'done', `Sample ${doubt.sampleId} marked ${words}. The component is judged again.`);
  announce(`Sample ${doubt.sampleId} marked ${verdict}.`);
}

function setStatus(card, kind, message) {
  card.status.dataset.kind = kind;
  card.status.textContent = message;
}

function announce(message) {
  $('announcer').textContent = message;
}

function scheduleReload(delay = 250) {
  clearTimeout(reloadTimer);
  reloadTimer = setTimeout(() => void (view === 'board' ? loadBoard() : view === 'incident' ? loadIncidentPage() : loadComponentPage()), delay);
}

// ---------------------------------------------------------------- live updates

function connectEvents() {
  events = new EventSource('/v1/events');
  const live = $('live');
  events.addEventListener('open', () => {
    live.dataset.live = 'on';
    live.textContent = 'Live updates: connected';
    // Whatever happened while the stream was down is in the next list.
    if (connectedBefore) scheduleReload(0);
    connectedBefore = true;
  });
  events.addEventListener('error', () => {
    const closed = events.readyState === EventSource.CLOSED;
    live.dataset.live = 'lost';
    live.textContent = closed ? 'Live updates: refused by the server (sign in again)' : 'Live updates: reconnecting…';
  });
  events.addEventListener('incident', (message) => {
    const event = JSON.parse(message.data);
    if (view === 'component' && (event.unit !== page.unit || event.component !== page.component)) return;
    if (view === 'incident' && event.incidentId !== undefined && event.incidentId !== page.incidentId) return;
    announce(`Incident ${event.change}: ${event.unit} / ${event.component}, ${event.severity}, ${event.state}.`);
    scheduleReload();
  });
  events.addEventListener('result', (message) => {
    const event = JSON.parse(message.data);
    if (view !== 'component') {
      for (const card of cards.values()) {
        if (card.incident.unit === event.unit && card.incident.component === event.component) {
          card.chartKey = '';
          updateCard(card, card.incident);
        }
      }
    } else if (event.unit === page.unit && event.component === page.component) {
      scheduleReload();
    }
  });
}

// ---------------------------------------------------------------- the component page

const view = ['component', 'incident'].includes(document.body.dataset.view) ? document.body.dataset.view : 'board';
const page = (() => {
  const match = /^\/units\/([^/]+)\/components\/([^/]+)\/?$/.exec(location.pathname);
  const incident = /^\/incidents\/(.+)$/.exec(location.pathname);
  return {
    unit: match ? decodeURIComponent(match[1]) : '',
    component: match ? decodeURIComponent(match[2]) : '',
    incidentId: incident ? decodeURIComponent(incident[1]) : '',
  };
})();

// ---------------------------------------------------------------- the incident page (where e-mail links lead)

async function loadIncidentPage() {
  const result = await api(incidentPath(page.incidentId));
  if (result.status === 401) return showSignIn('The token is no longer accepted; please sign in again.');
  const problem = $('incident-problem');
  if (!result.ok) {
    problem.hidden = false;
    problem.textContent = result.status === 404 ? `No incident "${page.incidentId}" is known here.` : `The incident could not be loaded. ${problemText(result)}`;
    return;
  }
  problem.hidden = true;
  const incident = result.body.incident;
  $('view-title').textContent = `Incident on ${incident.unit} / ${incident.component}`;
  document.title = `${incident.unit} / ${incident.component}: ${severityWords(incident.severity, incident.peakSeverity)} · wearshift`;
  $('incident-component').href = componentPath(incident.unit, incident.component);
  $('incident-component').textContent = `all of ${incident.unit} / ${incident.component}`;
  let card = cards.get(incident.id);
  if (card === undefined) {
    card = createCard(incident);
    cards.set(incident.id, card);
    $('incident-card').replaceChildren(card.node);
  }
  updateCard(card, incident);
  card.node.dataset.closed = String(Boolean(incident.closed));
  $('incident-timeline').replaceChildren(...incident.timeline.map((entry) => el('li', { text: timelineText(entry) })));
  const charts = $('incident-charts');
  const wanted = measurandsOf(incident);
  if (charts.dataset.measurands !== wanted.join(',')) {
    charts.dataset.measurands = wanted.join(',');
    charts.replaceChildren(
      ...wanted.map((m) => {
        const holder = el('div', { class: 'chart', 'data-measurand': m }, el('p', { class: 'loading', text: 'Loading…' }));
        void loadChart(holder, incident.unit, incident.component, m, 760);
        return el('figure', {}, el('figcaption', { text: `Trend of ${m}` }), holder);
      }),
    );
  }
}

async function loadComponentPage() {
  $('view-title').textContent = `${page.unit} / ${page.component}`;
  document.title = `${page.unit} / ${page.component} · wearshift`;
  const [history, series] = await Promise.all([
    api(`/v1/incidents?${new URLSearchParams({ state: 'all', unit: page.unit, limit: '1000' })}`),
    api(`${apiComponentPath(page.unit, page.component)}/series`),
  ]);
  if (history.status === 401 || series.status === 401) return showSignIn('The token is no longer accepted; please sign in again.');
  renderHistory(history);
  renderReadiness(series);
  renderCharts(series);
}

/** What the analysis cannot judge yet and what it needs, per measurand (first-day behaviour). */
function renderReadiness(result) {
  const list = $('readiness');
  const rows = result.ok ? (result.body.readiness ?? []) : [];
  $('readiness-empty').hidden = rows.length > 0;
  list.replaceChildren(...rows.map((r) => el('li', { 'data-measurand': r.measurand }, el('strong', { text: `${r.measurand}: ` }), r.summary)));
}

function renderHistory(result) {
  const list = $('history');
  if (!result.ok) {
    list.replaceChildren(el('li', { class: 'note', text: `The incident history could not be loaded. ${problemText(result)}` }));
    return;
  }
  const incidents = result.body.incidents.filter((i) => i.component === page.component).sort((a, b) => Date.parse(b.openedAt) - Date.parse(a.openedAt));
  $('history-empty').hidden = incidents.length > 0;
  list.replaceChildren(
    ...incidents.map((incident) => {
      const timeline = el('ol', { class: 'timeline' });
      const details = el('details', {}, el('summary', { text: 'Timeline' }), timeline);
      details.addEventListener('toggle', async () => {
        if (!details.open || timeline.childElementCount > 0) return;
        const full = await api(incidentPath(incident.id));
        if (!full.ok) return timeline.replaceChildren(el('li', { text: problemText(full) }));
        timeline.replaceChildren(...full.body.incident.timeline.map((entry) => el('li', { text: timelineText(entry) })));
      });
      return el(
        'li',
        { class: 'incident', 'data-severity': incident.severity, 'data-acknowledged': String(Boolean(incident.acknowledged)) },
        el('div', { class: 'incident-head' }, severityBadge(incident.severity, incident.peakSeverity), el('h3', {}, el('a', { href: incidentPagePath(incident.id), text: `${measurandsOf(incident).join(', ') || 'Incident'} — opened ${formatTime(incident.openedAt)}` }))),
        el('p', { class: 'state' }, el('strong', { text: stateWords(incident) }), incident.closed ? ` · ${incident.closed.how} ${formatTime(incident.closed.at)}` : ''),
        details,
      );
    }),
  );
}

function timelineText(entry) {
  const at = formatTime(entry.at);
  switch (entry.kind) {
    case 'finding':
      return `${at}: ${entry.measurand} ${entry.rule} ${entry.change.replace('-', ' ')} (${entry.severity})${entry.explanation ? ` — ${entry.explanation}` : ''}`;
    case 'acknowledged':
      return `${at}: acknowledged by ${entry.by}${entry.note ? ` — ${entry.note}` : ''}`;
    case 'shelved':
      return `${at}: shelved by ${entry.by} until ${formatTime(entry.until)} — ${entry.reason}`;
    case 'closed':
      return `${at}: closed (${entry.how})${entry.by ? ` by ${entry.by}` : ''}${entry.note ? ` — ${entry.note}` : ''}`;
    case 'notified':
      return `${at}: told tier ${entry.tier} (${entry.targets.length} recipients)`;
    default:
      return `${at}: ${entry.kind.replace('-', ' ')}${entry.by ? ` by ${entry.by}` : ''}${entry.note ? ` — ${entry.note}` : ''}`;
  }
}

/** Beside every forecast, as in the e-mail (src/domain/caution.ts). */
const FORECAST_CAUTION = 'A forecast assumes the present rate continues; wear can speed up or settle at any time.';

/** The forecast sentences of one measurand's series, under its chart on the component page. */
function forecastList(m) {
  const limits = m.forecast?.limits ?? [];
  if (limits.length === 0) return [];
  const seen = new Set();
  const lines = limits.filter((l) => !seen.has(l.text) && seen.add(l.text)).map((l) => el('li', { 'data-forecast': l.outcome, text: l.text }));
  return [el('ul', { class: 'evidence forecast', 'aria-label': `Time to limit, ${m.measurand}` }, ...lines), el('p', { class: 'hint', text: FORECAST_CAUTION })];
}

function renderCharts(result) {
  const charts = $('charts');
  if (!result.ok) {
    $('series-note').hidden = false;
    $('series-note').textContent = `No trends: ${problemText(result)}`;
    charts.replaceChildren();
    return;
  }
  $('series-note').hidden = true;
  charts.replaceChildren(
    ...result.body.measurands.map((m) => {
      const holder = el('div', { class: 'chart' }, el('p', { class: 'loading', text: 'Loading…' }));
      void loadChart(holder, page.unit, page.component, m.measurand, 760);
      return el('figure', {}, el('figcaption', { text: `${m.measurand} — ${m.label} (${m.unit})` }), holder, ...forecastList(m));
    }),
  );
}

// ---------------------------------------------------------------- start

async function start() {
  $('sign-in').hidden = true;
  $('time-note').textContent = timeZoneNote();
  renderWho();
  // Listen before loading, so that nothing that changes during the first load goes unseen.
  connectEvents();
  if (view === 'board') {
    $('board').hidden = false;
    const note = $('role-note');
    note.hidden = canAct();
    note.textContent = canAct() ? '' : 'This is a viewer token: the board is read-only. Acknowledge, shelve and resolve need a responder token.';
    await loadBoard();
    // Waiting times move on by themselves.
    setInterval(() => cards.forEach(renderState), 30_000);
  } else if (view === 'incident') {
    $('incident').hidden = false;
    await loadIncidentPage();
    setInterval(() => cards.forEach(renderState), 30_000);
  } else {
    $('component').hidden = false;
    await loadComponentPage();
  }
}

$('sign-in-form').addEventListener('submit', async (event) => {
  event.preventDefault();
  const token = $('token').value.trim();
  if (token === '') {
    $('sign-in-error').textContent = 'Enter the access token.';
    return;
  }
  const problem = await signIn(token, $('name').value.trim());
  if (problem !== undefined) {
    $('sign-in-error').textContent = problem;
    return;
  }
  $('token').value = '';
  await start();
});
$('sign-out').addEventListener('click', signOut);

if (session.token) {
  const problem = await signIn(session.token, session.name);
  if (problem === undefined) await start();
  else showSignIn(problem);
} else {
  showSignIn();
}
