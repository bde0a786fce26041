/*
 * An incident card, on the board and on the incident page: its severity, state, evidence and forecasts, the advisory
 * findings of the evidence's sample (which open nothing), the trend of its leading measurand, and acknowledge /
 * shelve (unshelve while shelved) / resolve with a note (enabled for a responder token only). While one of its requests is on its way, the card's actions are marked unavailable and
 * ignore presses, so that nothing is sent twice.
 */
/* global document */
import { markPending, sendFor, setStatus } from './cardStatus.js';
import { loadChart } from './chart.js';
import { announce, el } from './dom.js';
import { duration, formatTime } from './format.js';
import { ADVISORY_HEADING, bySeverity, closureText, FORECAST_CAUTION, measurandsOf, noChartText, severityBadge, stateWords, subjectOf, subjectsOf, waitingSince, withdrawnFindingText } from './incidentText.js';
import { view } from './page.js';
import { componentPath, incidentPagePath, incidentPath } from './paths.js';
import { scheduleReload } from './reload.js';
import { createSampleVerdict, listenForVerdicts, updateSampleVerdict } from './sampleVerdict.js';
import { api, canAct, problemText, session } from './session.js';
import { loadWhenSeen } from './whenSeen.js';

/** Findings a card on the board shows; the rest are a link away, on the incident page. */
const CARD_EVIDENCE = 3;
const SHELVE_CHOICES = [
  ['1', '1 hour'],
  ['8', '8 hours'],
  ['24', '24 hours'],
  ['72', '3 days'],
];

/** Incidents on the page by id, with the DOM of their card. */
export const cards = new Map();

/** Numbers the cards of this page: never reused, unlike the count of cards, which falls when one is removed. */
let cardsMade = 0;

export function createCard(incident) {
  cardsMade += 1;
  const id = `inc-${cardsMade}`;
  // Focusable by script only: where the keyboard goes when the card holding it is removed (boardView.js).
  const title = el('h3', { id: `${id}-title`, tabindex: '-1' });
  const node = el('li', { class: 'incident', 'aria-labelledby': `${id}-title`, 'data-incident': incident.id });
  const badge = el('span');
  const state = el('p', { class: 'state' });
  const evidence = el('ul', { class: 'evidence', 'aria-label': 'Evidence, most severe first' });
  // The advisory findings of the evidence's sample, under a heading of their own: they open nothing and set no severity.
  const advisoryList = el('ul', { class: 'evidence advisory-findings', 'aria-labelledby': `${id}-advisory` });
  const advisory = el('div', { class: 'advisory', hidden: true }, el('p', { class: 'advisory-heading', id: `${id}-advisory`, text: ADVISORY_HEADING }), advisoryList);
  const chartCaption = el('p', { class: 'chart-caption' });
  const chart = el('div', { class: 'chart' }, el('p', { class: 'loading', text: 'Loading the trend chart…' }));
  const note = el('textarea', { id: `${id}-note`, maxlength: '2000', rows: '2' });
  const shelveFor = el('select', { id: `${id}-shelve`, 'aria-label': 'Shelve for' }, ...SHELVE_CHOICES.map(([value, label]) => el('option', { value, text: label })));
  const status = el('p', { class: 'action-status', role: 'status' });
  const buttons = {
    ack: el('button', { type: 'button', 'data-action': 'ack', text: 'Acknowledge' }),
    shelve: el('button', { type: 'button', 'data-action': 'shelve', text: 'Shelve' }),
    unshelve: el('button', { type: 'button', 'data-action': 'unshelve', text: 'Unshelve', hidden: true }),
    resolve: el('button', { type: 'button', 'data-action': 'resolve', text: 'Resolve' }),
  };
  const viewerNote = el('p', { class: 'hint', id: `${id}-why`, hidden: true, text: 'Acknowledge, shelve, unshelve and resolve need a responder token; this token is a viewer token.' });
  // A sampling incident asks whoever takes samples, or the lab, whether the sample in doubt is genuine.
  const { verdicts, sampleQuestion, sampleRow } = createSampleVerdict();
  const actions = el(
    'div',
    { class: 'actions', role: 'group', 'aria-label': 'Respond' },
    el('label', { for: `${id}-note`, text: 'Note' }, el('span', { class: 'hint', text: ' (required to shelve or resolve)' })),
    note,
    // The duration comes before its button, so that a keyboard reaches the choice before the action.
    el('div', { class: 'action-row' }, buttons.ack, shelveFor, buttons.shelve, buttons.unshelve, buttons.resolve),
    sampleRow,
    viewerNote,
    status,
  );
  node.append(el('div', { class: 'incident-head' }, badge, title), state, evidence, advisory, chartCaption, chart, actions);
  const card = { node, title, badge, state, evidence, advisory, advisoryList, chartCaption, chart, note, shelveFor, status, buttons, viewerNote, incident, chartKey: '', verdicts, sampleRow, sampleQuestion, pending: false };
  // Drawn again after every answer to one of its requests (cardStatus.js sendFor).
  card.redraw = () => updateCard(card, card.incident);
  for (const [action, button] of Object.entries(buttons)) button.addEventListener('click', () => void act(card, action));
  listenForVerdicts(card);
  return card;
}

export function updateCard(card, incident) {
  card.incident = incident;
  const { node } = card;
  node.dataset.severity = incident.severity;
  node.dataset.acknowledged = String(Boolean(incident.acknowledged));
  card.badge.replaceChildren(severityBadge(incident.severity, incident.peakSeverity));
  const measurands = measurandsOf(incident);
  const subjects = subjectsOf(incident);
  card.title.replaceChildren(
    el('a', { href: componentPath(incident.unit, incident.component), text: `${incident.unit} / ${incident.component}` }),
    subjects.length > 0 ? ` — ${subjects.join(', ')}` : '',
  );
  renderState(card);
  // Most severe first: the first one always carries the incident's severity. The board's cards show the first
  // few; the incident page shows every one.
  const evidence = bySeverity(incident.evidence);
  const shown = view === 'incident' ? evidence : evidence.slice(0, CARD_EVIDENCE);
  const forecasts = (incident.forecast ?? []).slice(0, 4);
  card.evidence.replaceChildren(
    ...shown.map((f) => el('li', { 'data-severity': f.severity }, el('strong', { text: `${subjectOf(f)} · ${f.severity} · ${f.rule}: ` }), f.explanation)),
    ...(evidence.length > shown.length
      ? [el('li', { class: 'more' }, el('a', { href: incidentPagePath(incident.id), text: `${evidence.length - shown.length} more ${evidence.length - shown.length === 1 ? 'finding' : 'findings'} on the incident page` }))]
      : []),
    ...forecasts.map((f) => el('li', { class: 'forecast', 'data-forecast': f.outcome }, el('strong', { text: 'time to limit: ' }), f.text)),
    ...(forecasts.length > 0 ? [el('li', { class: 'forecast-caution', text: FORECAST_CAUTION })] : []),
  );
  // Findings the incident stood on that no longer hold (withdrawn, or answered by a sample verdict): marked so, and
  // the list named for what it then holds, so that a screen reader does not announce them as evidence.
  const setAside = evidence.length === 0 && (incident.withdrawnEvidence ?? []).length > 0;
  card.evidence.setAttribute('aria-label', setAside ? 'Findings it stood on, none of which stands now' : 'Evidence, most severe first');
  card.evidence.append(
    ...bySeverity(incident.withdrawnEvidence).map((f) => el('li', { class: 'withdrawn', 'data-severity': f.severity }, el('strong', { text: `${subjectOf(f)} · ${f.severity} · ${f.rule}: ` }), withdrawnFindingText(f, incident.closed))),
  );
  // Advisory findings (the API's `context`): the board's cards show the first few, the incident page every one.
  const advisories = bySeverity(incident.context);
  const advisoriesShown = view === 'incident' ? advisories : advisories.slice(0, CARD_EVIDENCE);
  card.advisory.hidden = advisories.length === 0;
  card.advisoryList.replaceChildren(
    ...advisoriesShown.map((f) => el('li', { 'data-severity': f.severity, 'data-rule': f.rule }, `${subjectOf(f)} · ${f.severity} · ${f.rule}: `, f.explanation)),
    ...(advisories.length > advisoriesShown.length
      ? [el('li', { class: 'more' }, el('a', { href: incidentPagePath(incident.id), text: `${advisories.length - advisoriesShown.length} more on the incident page` }))]
      : []),
  );
  const enabled = canAct() && !incident.closed;
  for (const button of Object.values(card.buttons)) {
    button.disabled = !enabled;
    if (canAct()) button.removeAttribute('aria-describedby');
    else button.setAttribute('aria-describedby', card.viewerNote.id);
  }
  card.buttons.ack.disabled = !enabled || Boolean(incident.acknowledged);
  // While shelved, the card offers to unshelve instead of shelving again; inputs follow the buttons.
  const shelved = Boolean(incident.shelved) && !incident.closed;
  card.buttons.shelve.hidden = shelved;
  card.shelveFor.hidden = shelved;
  card.buttons.unshelve.hidden = !shelved;
  card.note.disabled = !canAct();
  card.shelveFor.disabled = !enabled;
  node.dataset.shelved = String(shelved);
  updateSampleVerdict(card, incident, enabled);
  markPending(card);
  card.viewerNote.hidden = canAct();
  // The chart follows the incident's latest sample; a new result redraws it.
  // The chart shows the measurand of the most severe finding, and says so.
  const chartKey = `${measurands[0] ?? ''}@${incident.lastSampleId}`;
  card.chartCaption.textContent = measurands.length > 0 ? chartCaptionText(measurands[0], measurands.length) : '';
  card.chart.dataset.measurand = measurands[0] ?? '';
  if (measurands.length > 0 && chartKey !== card.chartKey) {
    card.chartKey = chartKey;
    // Drawn when the card comes near the window, a few at a time (whenSeen.js).
    loadWhenSeen(card.chart, () => loadChart(card.chart, incident.unit, incident.component, measurands[0]));
  } else if (measurands.length === 0) {
    card.chart.replaceChildren(el('p', { class: 'chart-problem', text: noChartText(incident) }));
  }
}

function chartCaptionText(measurand, count) {
  const others = count > 1 ? ` The other measurands are on the component page.` : '';
  return `Trend of ${measurand}, the measurand of the most severe finding.${others}`;
}

export function renderState(card) {
  const incident = card.incident;
  const words = stateWords(incident);
  const parts = [el('strong', { text: words })];
  // Closed: how, in the words of the closing message (a withdrawn incident says that nothing of it stands).
  if (incident.closed) parts.push(` — ${closureText(incident.closed)}`);
  if (incident.acknowledged) {
    const ack = incident.acknowledged;
    parts.push(` · by ${ack.by} at ${formatTime(ack.at)}`);
    if (ack.note) parts.push(` — “${ack.note}”`);
  } else if (!incident.closed) {
    parts.push(' · ', el('span', { class: 'waiting', text: `waiting ${duration(Date.now() - Date.parse(waitingSince(incident)))}` }));
    if (incident.escalation && incident.escalation.reachedTier > 0) parts.push(` · escalated to tier ${incident.escalation.reachedTier}`);
  }
  parts.push(` · opened by sample ${incident.openedBySampleId} of ${formatTime(incident.openedAt)}`);
  if (view !== 'incident') parts.push(' · ', el('a', { class: 'incident-link', href: incidentPagePath(incident.id), text: 'incident page and timeline' }));
  card.state.replaceChildren(...parts);
}

async function act(card, action) {
  if (card.pending) return;
  const note = card.note.value.trim();
  const by = session.name.trim() || 'board user';
  let body;
  if (action === 'ack') body = note === '' ? { by } : { by, note };
  else if (action === 'unshelve') body = { by };
  else if (note === '') {
    setStatus(card, 'error', `Write a note first: ${action === 'shelve' ? 'the reason for shelving' : 'how it was resolved'}.`);
    card.note.focus();
    return;
  } else if (action === 'shelve') body = { by, until: new Date(Date.now() + Number(card.shelveFor.value) * 3_600_000).toISOString(), reason: note };
  else body = { by, note };
  const result = await sendFor(card, () => {
    setStatus(card, 'busy', 'Sending…');
    return api(`${incidentPath(card.incident.id)}/${action}`, { method: 'POST', body });
  });
  if (result === undefined) return;
  if (!result.ok) {
    setStatus(card, 'error', problemText(result));
    return;
  }
  const verb = { ack: 'Acknowledged', shelve: 'Shelved', unshelve: 'Unshelved', resolve: 'Resolved' }[action];
  card.note.value = '';
  setStatus(card, 'done', `${verb}.`);
  announce(`${verb}: ${card.incident.unit} / ${card.incident.component}.`);
  if (result.body.incident.closed) scheduleReload(0);
  else updateCard(card, { ...card.incident, ...result.body.incident });
  keepFocus(card, card.buttons[action]);
}

/**
 * A focused button the answer disabled or hid (Acknowledge once acknowledged, Shelve while shelved) would drop the
 * keyboard focus to the page (the browser moves it there a moment later): it goes to the card's title instead, as
 * when a card holding it is removed.
 */
function keepFocus(card, button) {
  const lost = document.activeElement === button || document.activeElement === document.body;
  if (button.isConnected && (button.disabled || button.hidden) && lost) card.title.focus();
}

