/*
 * The sampling verdict on an incident card: a sampling incident asks whoever takes samples, or the lab, whether the
 * sample in doubt is genuine (it goes back into the trend) or wrong (it stays out), and sends the answer. Once a
 * verdict is given the card says which, by whom and when, and offers only to take it back (the API's `withdrawn`),
 * after which the sampling check judges the sample again and the question is asked anew.
 */
import { markPending, sendFor, setStatus } from './cardStatus.js';
import { announce, el } from './dom.js';
import { formatTime } from './format.js';
import { apiComponentPath, incidentPath } from './paths.js';
import { scheduleReload } from './reload.js';
import { api, problemText, session } from './session.js';
import { loadWhenSeen } from './whenSeen.js';

const VERDICT_SHOWN = {
  confirmed: 'genuine: it is back in the trend',
  rejected: 'wrong: it stays out of the trend',
};

/** The latest sample a sampling finding of the incident put in doubt, if any. */
export function sampleInDoubt(incident) {
  return (incident.evidence ?? []).find((f) => f.rule === 'sampling');
}

/** The question, its two answers and the taking back of a verdict given, hidden until the incident has a sample in doubt. */
export function createSampleVerdict() {
  const verdicts = {
    confirmed: el('button', { type: 'button', 'data-verdict': 'confirmed', text: 'Sample is genuine' }),
    rejected: el('button', { type: 'button', 'data-verdict': 'rejected', text: 'Sample is wrong' }),
    withdrawn: el('button', { type: 'button', 'data-verdict': 'withdrawn', text: 'Take the verdict back', hidden: true }),
  };
  const sampleQuestion = el('p', { class: 'hint' });
  const sampleRow = el(
    'div',
    { class: 'sample-verdict', role: 'group', 'aria-label': 'The sample in doubt', hidden: true },
    sampleQuestion,
    el('div', { class: 'action-row' }, verdicts.confirmed, verdicts.rejected, verdicts.withdrawn),
  );
  return { verdicts, sampleQuestion, sampleRow };
}

/** Sends the card's verdict when one of its answers is pressed. */
export function listenForVerdicts(card) {
  for (const [verdict, button] of Object.entries(card.verdicts)) button.addEventListener('click', () => void judgeSample(card, verdict));
}

/** The latest verdict on the sample in the incident's timeline (`{verdict, by, at}`), if any. */
function verdictIn(timeline, sampleId) {
  let latest;
  for (const entry of timeline) {
    if (entry.kind === 'sample-verdict' && entry.sampleId === sampleId && (latest === undefined || Date.parse(entry.at) >= Date.parse(latest.at))) latest = entry;
  }
  return latest;
}

/**
 * What the server says of the sample, unless this card has just given a verdict the server's answer does not show
 * yet (it was read before the verdict arrived): then the card's own, until the server's answer catches up.
 */
function knownVerdict(card, sampleId, fromServer) {
  const own = card.given?.own;
  if (own !== undefined && (fromServer === undefined || fromServer.verdict !== own.verdict || fromServer.by !== own.by)) {
    return { sampleId, known: true, entry: own, own };
  }
  return { sampleId, known: true, entry: fromServer, own: undefined };
}

/**
 * Shows the question, or the verdict given, when the card's incident has a sample in doubt; the answers are enabled
 * when it may act. The board's list carries no timeline: there the verdict is read from the incident itself when
 * the card comes near the window, and until then the card asks nothing it may have been answered already.
 */
export function updateSampleVerdict(card, incident, enabled) {
  const doubt = sampleInDoubt(incident);
  card.sampleRow.hidden = doubt === undefined;
  if (doubt === undefined) return;
  for (const button of Object.values(card.verdicts)) button.disabled = !enabled;
  if (card.given?.sampleId !== doubt.sampleId) card.given = { sampleId: doubt.sampleId, known: false, entry: undefined, own: undefined };
  if (incident.timeline !== undefined) {
    card.given = knownVerdict(card, doubt.sampleId, verdictIn(incident.timeline, doubt.sampleId));
  } else {
    loadWhenSeen(card.sampleRow, () => readVerdict(card, incident.id, doubt.sampleId));
  }
  renderVerdict(card, doubt);
}

async function readVerdict(card, incidentId, sampleId) {
  const result = await api(incidentPath(incidentId));
  if (!result.ok || card.incident.id !== incidentId || card.given?.sampleId !== sampleId) return;
  card.given = knownVerdict(card, sampleId, verdictIn(result.body.incident.timeline ?? [], sampleId));
  renderVerdict(card, sampleInDoubt(card.incident));
}

function renderVerdict(card, doubt) {
  if (doubt === undefined) return;
  const { known, entry } = card.given;
  const given = entry !== undefined && entry.verdict !== 'withdrawn';
  card.sampleRow.dataset.verdict = !known ? 'unknown' : given ? entry.verdict : 'none';
  card.verdicts.confirmed.hidden = !known || given;
  card.verdicts.rejected.hidden = !known || given;
  card.verdicts.withdrawn.hidden = !given;
  const sample = `Sample ${doubt.sampleId} of ${formatTime(doubt.sampledAt)}`;
  if (!known) card.sampleQuestion.textContent = `${sample} was put in doubt; looking up whether a verdict was given…`;
  else if (given) card.sampleQuestion.textContent = `${sample} was marked ${VERDICT_SHOWN[entry.verdict] ?? entry.verdict} — by ${entry.by} at ${formatTime(entry.at)}.`;
  else {
    const before = entry === undefined ? '' : ` (${entry.by} took an earlier verdict back at ${formatTime(entry.at)}.)`;
    card.sampleQuestion.textContent = `${sample} is kept out of the trend until someone who knows says what it was.${before}`;
  }
  markPending(card);
}

async function judgeSample(card, verdict) {
  const doubt = sampleInDoubt(card.incident);
  if (doubt === undefined || card.pending) return;
  const by = session.name.trim() || 'board user';
  const path = `${apiComponentPath(card.incident.unit, card.incident.component)}/samples/${encodeURIComponent(doubt.sampleId)}/verdict`;
  const result = await sendFor(card, () => {
    setStatus(card, 'busy', 'Sending…');
    return api(path, { method: 'POST', body: { verdict, by } });
  });
  if (result === undefined) return;
  if (!result.ok) {
    setStatus(card, 'error', problemText(result));
    return;
  }
  // Shown at once as the server took it; the reload brings the incident as the component's new judgement left it.
  const own = { verdict, by, at: new Date().toISOString() };
  card.given = { sampleId: doubt.sampleId, known: true, entry: own, own };
  card.redraw();
  const words = verdict === 'withdrawn' ? 'taken back: the sampling check judges it again' : `marked ${verdict === 'confirmed' ? 'genuine: it goes back into the trend' : 'wrong: it stays out of the trend'}`;
  setStatus(card, 'done', `Sample ${doubt.sampleId} ${words}. The component is judged again.`);
  announce(`Sample ${doubt.sampleId}: verdict ${verdict}.`);
  scheduleReload(0);
}
