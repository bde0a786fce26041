/*
 * The board: the open incidents, most severe first and, within a severity, the one that has waited longest first,
 * with a count per severity. Cards are kept across reloads and moved only when out of place, so focus stays put.
 */
import { cards, createCard, updateCard } from './card.js';
import { $, el } from './dom.js';
import { SEVERITY_RANK, severityBadge, waitingSince } from './incidentText.js';
import { api, problemText } from './session.js';
import { showSignIn } from './signInView.js';

let firstLoad = true;

function sortIncidents(list) {
  // Most severe first; within a severity, the one that has waited longest first.
  return [...list].sort(
    (a, b) => SEVERITY_RANK[b.severity] - SEVERITY_RANK[a.severity] || Date.parse(waitingSince(a)) - Date.parse(waitingSince(b)) || (a.id < b.id ? -1 : 1),
  );
}

/** Open incidents the board shows at most: the API's order (most severe, then most recently opened) decides which. */
const BOARD_LIMIT = 500;

export async function loadBoard() {
  const result = await api(`/v1/incidents?state=open&limit=${BOARD_LIMIT}`);
  if (!result.ok) {
    if (result.status === 401) return showSignIn('The token is no longer accepted; please sign in again.');
    $('summary').textContent = `Incidents could not be loaded. ${problemText(result)}`;
    return;
  }
  const { incidents, next, total } = result.body;
  renderBoard(sortIncidents(incidents));
  // More open incidents than the board holds: say so, and where the rest are, instead of letting the counts pass for all.
  const more = $('more-incidents');
  more.hidden = next === null || next === undefined;
  more.textContent = more.hidden
    ? ''
    : `Showing ${incidents.length} of ${typeof total === 'number' ? total : 'more than ' + incidents.length} open incidents: the most severe, then the most recently opened. ` +
      'The counts above are of those shown; the full list pages through GET /v1/incidents?state=open, or `wearshift incidents list --cursor …` page by page.';
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
