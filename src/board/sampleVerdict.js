/*
 * A responder's word on a sample, from an incident card. A sampling incident asks whoever takes samples, or the lab,
 * whether the sample in doubt is genuine (it goes back into the trend) or wrong (it stays out). A machine incident
 * whose evidence holds a rise signalled by EWMA or CUSUM asks whether that rate is the component's usual one (a duty
 * change, a baseline learnt low): then its change detectors learn a new baseline from that sample on (the API's
 * `usual-rate`). Once a word is given the card says which, by whom and when, and offers only to take it back (the
 * API's `withdrawn`), after which the sample is judged again without it and the question is asked anew.
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
  'usual-rate': "as this component's usual rate: its change detectors learn a new baseline from there",
};

/** The latest sample a sampling finding of the incident put in doubt, if any. */
export function sampleInDoubt(incident) {
  return (incident.evidence ?? []).find((f) => f.rule === 'sampling');
}

/** A rise of a wear rate EWMA or CUSUM signal in the incident's evidence (its latest sample with findings), if any. */
function riseSignalled(incident) {
  return (incident.evidence ?? []).find((f) => (f.rule === 'ewma' || f.rule === 'cusum') && f.direction === 'up');
}

/** What the card asks of a sample: `doubt` (is it genuine?) or `rise` (is this rate the usual one?), with the finding. */
function questionOf(incident) {
  const doubt = sampleInDoubt(incident);
  if (doubt !== undefined) return { kind: 'doubt', finding: doubt };
  const rise = riseSignalled(incident);
  return rise === undefined ? undefined : { kind: 'rise', finding: rise };
}

/** The question, its answers and the taking back of a word given, hidden until the incident has a sample to ask about. */
export function createSampleVerdict() {
  const verdicts = {
    confirmed: el('button', { type: 'button', 'data-verdict': 'confirmed', text: 'Sample is genuine' }),
    rejected: el('button', { type: 'button', 'data-verdict': 'rejected', text: 'Sample is wrong' }),
    'usual-rate': el('button', { type: 'button', 'data-verdict': 'usual-rate', text: 'This rate is usual for it', hidden: true }),
    withdrawn: el('button', { type: 'button', 'data-verdict': 'withdrawn', text: 'Take the verdict back', hidden: true }),
  };
  const sampleQuestion = el('p', { class: 'hint' });
  const sampleRow = el(
    'div',
    { class: 'sample-verdict', role: 'group', 'aria-label': 'The sample in question', hidden: true },
    sampleQuestion,
    el('div', { class: 'action-row' }, verdicts.confirmed, verdicts.rejected, verdicts['usual-rate'], verdicts.withdrawn),
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
  const question = questionOf(incident);
  card.sampleRow.hidden = question === undefined;
  if (question === undefined) return;
  const { sampleId } = question.finding;
  for (const button of Object.values(card.verdicts)) button.disabled = !enabled;
  if (card.given?.sampleId !== sampleId) card.given = { sampleId, known: false, entry: undefined, own: undefined };
  if (incident.timeline !== undefined) {
    card.given = knownVerdict(card, sampleId, verdictIn(incident.timeline, sampleId));
  } else {
    loadWhenSeen(card.sampleRow, () => readVerdict(card, incident.id, sampleId));
  }
  renderVerdict(card, question);
}

async function readVerdict(card, incidentId, sampleId) {
  const result = await api(incidentPath(incidentId));
  if (!result.ok || card.incident.id !== incidentId || card.given?.sampleId !== sampleId) return;
  card.given = knownVerdict(card, sampleId, verdictIn(result.body.incident.timeline ?? [], sampleId));
  renderVerdict(card, questionOf(card.incident));
}

function renderVerdict(card, question) {
  if (question === undefined) return;
  const { known, entry } = card.given;
  const given = entry !== undefined && entry.verdict !== 'withdrawn';
  const doubt = question.kind === 'doubt';
  card.sampleRow.dataset.verdict = !known ? 'unknown' : given ? entry.verdict : 'none';
  card.sampleRow.dataset.question = question.kind;
  card.sampleRow.setAttribute('aria-label', doubt ? 'The sample in doubt' : 'The rate signalled as a rise');
  card.verdicts.confirmed.hidden = !doubt || !known || given;
  card.verdicts.rejected.hidden = !doubt || !known || given;
  card.verdicts['usual-rate'].hidden = doubt || !known || given;
  card.verdicts.withdrawn.hidden = !given;
  const f = question.finding;
  const sample = `Sample ${f.sampleId} of ${formatTime(f.sampledAt)}`;
  if (!known) card.sampleQuestion.textContent = `${sample} ${doubt ? 'was put in doubt' : 'shows a rise'}; looking up whether a word was given…`;
  else if (given) card.sampleQuestion.textContent = `${sample} was marked ${VERDICT_SHOWN[entry.verdict] ?? entry.verdict} — by ${entry.by} at ${formatTime(entry.at)}.`;
  else {
    const before = entry === undefined ? '' : ` (${entry.by} took an earlier verdict back at ${formatTime(entry.at)}.)`;
    card.sampleQuestion.textContent = doubt
      ? `${sample} is kept out of the trend until someone who knows says what it was.${before}`
      : `${sample}: the ${f.rule === 'cusum' ? 'CUSUM' : 'EWMA'} signals a rise of the ${f.measurand} wear rate. If this rate is usual for the component (a change of duty known to you, or a baseline learnt low), say so, and its change detectors learn a new baseline from this sample on; a real change stays flagged otherwise.${before}`;
  }
  markPending(card);
}

const DONE_WORDS = {
  withdrawn: 'taken back: it is judged again without it',
  confirmed: 'marked genuine: it goes back into the trend',
  rejected: 'marked wrong: it stays out of the trend',
  'usual-rate': "marked as the component's usual rate: its change detectors learn a new baseline from it on",
};

async function judgeSample(card, verdict) {
  const question = questionOf(card.incident);
  if (question === undefined || card.pending) return;
  const doubt = question.finding;
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
  setStatus(card, 'done', `Sample ${doubt.sampleId} ${DONE_WORDS[verdict]}. The component is judged again.`);
  announce(`Sample ${doubt.sampleId}: verdict ${verdict}.`);
  scheduleReload(0);
}
