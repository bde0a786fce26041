/*
 * The sampling verdict on an incident card: a sampling incident asks whoever takes samples, or the lab, whether the
 * sample in doubt is genuine (it goes back into the trend) or wrong (it stays out), and sends the answer.
 */
import { setStatus } from './cardStatus.js';
import { announce, el } from './dom.js';
import { formatTime } from './format.js';
import { apiComponentPath } from './paths.js';
import { api, problemText, session } from './session.js';

/** The latest sample a sampling finding of the incident put in doubt, if any. */
export function sampleInDoubt(incident) {
  return (incident.evidence ?? []).find((f) => f.rule === 'sampling');
}

/** The question and its two answers, hidden until the incident has a sample in doubt. */
export function createSampleVerdict() {
  const verdicts = {
    confirmed: el('button', { type: 'button', 'data-verdict': 'confirmed', text: 'Sample is genuine' }),
    rejected: el('button', { type: 'button', 'data-verdict': 'rejected', text: 'Sample is wrong' }),
  };
  const sampleQuestion = el('p', { class: 'hint' });
  const sampleRow = el('div', { class: 'sample-verdict', role: 'group', 'aria-label': 'The sample in doubt', hidden: true }, sampleQuestion, el('div', { class: 'action-row' }, verdicts.confirmed, verdicts.rejected));
  return { verdicts, sampleQuestion, sampleRow };
}

/** Sends the card's verdict when one of its answers is pressed. */
export function listenForVerdicts(card) {
  for (const [verdict, button] of Object.entries(card.verdicts)) button.addEventListener('click', () => judgeSample(card, verdict));
}

/** Shows the question when the card's incident has a sample in doubt; the answers are enabled when it may act. */
export function updateSampleVerdict(card, incident, enabled) {
  const doubt = sampleInDoubt(incident);
  card.sampleRow.hidden = doubt === undefined;
  if (doubt !== undefined) {
    card.sampleQuestion.textContent = `Sample ${doubt.sampleId} of ${formatTime(doubt.sampledAt)} is kept out of the trend until someone who knows says what it was.`;
    for (const button of Object.values(card.verdicts)) button.disabled = !enabled;
  }
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
