/*
 * The board: the open incidents, most severe first and, within a severity, the one that has waited longest first,
 * with a count per severity. Cards are kept across reloads and moved only when out of place, so focus stays put; a
 * card removed while it holds the focus hands it to the next card's title.
 */
/* global document, URLSearchParams */
import { cards, createCard, updateCard } from './card.js';
import { $, el } from './dom.js';
import { SEVERITY_RANK, severityBadge, waitingSince } from './incidentText.js';
import { markLoaded } from './reload.js';
import { api, problemText } from './session.js';
import { showSignIn } from './signInView.js';
import { forget } from './whenSeen.js';

let firstLoad = true;

function sortIncidents(list) {
  // Most severe first; within a severity, the one that has waited longest first.
  return [...list].sort(
    (a, b) => SEVERITY_RANK[b.severity] - SEVERITY_RANK[a.severity] || Date.parse(waitingSince(a)) - Date.parse(waitingSince(b)) || (a.id < b.id ? -1 : 1),
  );
}

/**
 * Open incidents the board shows at most. The API pages its list most severe first, then most recently opened, while
 * the board puts the longest waiting first: it reads every page, so that the oldest are not the ones left out, up to
 * this bound (a page of a thousand cards is already more than anyone reads).
 */
export const BOARD_MOST = 5_000;
/** Incidents per request: the API's largest page. */
const PAGE_SIZE = 1_000;

let loading;
let loadAgain = false;

/** One load at a time: a reload asked while one pages through the list runs once it is done, not beside it. */
export function loadBoard() {
  if (loading !== undefined) {
    loadAgain = true;
    return loading;
  }
  loading = (async () => {
    do {
      loadAgain = false;
      await loadOnce();
    } while (loadAgain);
  })().finally(() => {
    loading = undefined;
  });
  return loading;
}

async function loadOnce() {
  const read = await readOpenIncidents();
  if (read.problem !== undefined && read.problem.status === 401) return showSignIn('The token is no longer accepted; please sign in again.');
  if (read.incidents.length === 0 && read.problem !== undefined) {
    $('summary').textContent = `Incidents could not be loaded. ${problemText(read.problem)}`;
    return;
  }
  renderBoard(sortIncidents(read.incidents));
  if (read.problem === undefined) markLoaded();
  renderMore(read);
}

/** Every open incident, page after page, up to the bound; a page that fails ends the reading with what came before. */
async function readOpenIncidents() {
  const byId = new Map();
  let cursor;
  let total = null;
  for (;;) {
    const query = new URLSearchParams({ state: 'open', limit: String(Math.min(PAGE_SIZE, BOARD_MOST - byId.size)) });
    if (cursor !== undefined) query.set('cursor', cursor);
    const result = await api(`/v1/incidents?${query}`);
    if (!result.ok) return { incidents: [...byId.values()], more: true, total, problem: result };
    if (typeof result.body.total === 'number') total = result.body.total;
    // An incident whose severity changed between two pages may come twice; the later page has it as it is now.
    for (const incident of result.body.incidents) byId.set(incident.id, incident);
    cursor = result.body.next ?? undefined;
    if (cursor === undefined) return { incidents: [...byId.values()], more: false, total };
    if (byId.size >= BOARD_MOST) return { incidents: [...byId.values()], more: true, total };
  }
}

/** More open incidents than the board shows: how many are not shown and where they are, instead of letting the counts pass for all. */
function renderMore({ incidents, more, total, problem }) {
  const note = $('more-incidents');
  note.hidden = !more;
  if (!more) {
    note.textContent = '';
    return;
  }
  const missing = typeof total === 'number' && total > incidents.length ? `${total - incidents.length} of the ${total} open incidents are` : 'More open incidents are';
  const why =
    problem !== undefined
      ? `not shown: the list could not be read to its end (${problemText(problem)}). The board tries again at the next change.`
      : `not shown: the board shows at most ${BOARD_MOST.toLocaleString('en')} (the most severe, then the most recently opened).`;
  note.textContent =
    `${missing} ${why} The counts above are of the ${incidents.length} shown. ` +
    'The full list pages through GET /v1/incidents?state=open, or `wearshift incidents list --cursor …` page by page; a unit\'s incidents are on its component pages.';
}

function renderBoard(incidents) {
  const counts = { alarm: 0, caution: 0, watch: 0 };
  for (const i of incidents) counts[i.severity] += 1;
  const summary = $('summary');
  summary.replaceChildren(
    // Each part ends with a separator a screen reader reads (the live region is read out at every reload).
    ...['alarm', 'caution', 'watch'].map((s) => el('span', {}, severityBadge(s), `: ${counts[s]}`, el('span', { class: 'visually-hidden', text: '; ' }))),
    el('span', { text: `${incidents.filter((i) => !i.acknowledged).length} waiting for acknowledgement` }),
  );
  $('empty').hidden = incidents.length > 0;

  const list = $('incidents');
  const keep = new Set(incidents.map((i) => i.id));
  for (const [id, card] of cards) {
    if (!keep.has(id)) {
      if (card.node.contains(document.activeElement)) keepFocusNear(card.node, keep);
      card.node.remove();
      forget(card.chart);
      forget(card.sampleRow);
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

/**
 * The card holding the keyboard focus is about to go (resolved, say): the focus moves to the title of the next card
 * that stays, else to the view's title, instead of falling to the page's top.
 */
function keepFocusNear(node, keep) {
  let next = node.nextElementSibling;
  while (next !== null && !keep.has(next.dataset.incident)) next = next.nextElementSibling;
  const target = next === null ? $('view-title') : (cards.get(next.dataset.incident)?.title ?? $('view-title'));
  target.focus();
}
