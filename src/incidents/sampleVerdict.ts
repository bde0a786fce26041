/**
 * A responder's word on a sample in doubt, in the timelines of the incidents that hold the sample: who said what of
 * which sample, and when. The word goes into the component's action log as one action per incident concerned, so a
 * history folded again (the word itself re-judges the component from that sample on) puts it back after the step
 * that was the latest when it was given. An incident concerned that has left the component's state (closed as
 * withdrawn, or replaced by a later one of its key) gets the entry in its record as well, since no fold writes that
 * record again unless the history brings the incident back, and then the logged action is replayed into it.
 */
import { InputError } from '../domain/errors.ts';
import { logAction } from './actionLog.ts';
import { draftOf, findDraft, isoOf, type DraftIncident } from './draft.ts';
import { lastWordOn, type ClosingVerdict, type ComponentIncidents, type Incident, type IncidentResult, type RecordedAction, type SampleVerdict } from './model.ts';
import type { IncidentRules } from './policy.ts';
import { judgeAction, sameVerdictAsLast, TIMELINE_LIMIT } from './verdict.ts';

export interface SampleVerdictWord {
  readonly sampleId: string;
  readonly verdict: SampleVerdict;
  /** Who gives it, as the timeline shows it. */
  readonly by: string;
  readonly now: Date;
}

export interface SampleVerdictResult extends IncidentResult {
  /** Every incident concerned, as it stands now with the word in its timeline (also those that showed it already). */
  readonly concerned: readonly Incident[];
  /** Incidents concerned outside the component's state whose record gains the entry (see IncidentResult.archived). */
  readonly archived: readonly Incident[];
}

/** Whether the incident refers to the sample: an entry of its timeline, or a finding of its evidence, was made at it. */
export function concernsSample(incident: Pick<Incident, 'timeline' | 'evidence' | 'context' | 'activeFindings'>, sampleId: string): boolean {
  return (
    incident.timeline.some((e) => 'sampleId' in e && e.sampleId === sampleId) ||
    [...incident.evidence, ...incident.context, ...incident.activeFindings].some((f) => f.sampleId === sampleId)
  );
}

/** The responder's word that ended an incident (see `closingVerdict`). */
export interface ClosingWord {
  readonly sampleId: string;
  readonly verdict: ClosingVerdict;
  readonly by: string;
  /** When the word was given. */
  readonly at: string;
}

/**
 * The word that makes the incident no longer stand, from its timeline alone: the latest word on the sample that opened
 * it, when that is `rejected` (the sample is kept out, its findings with it), or `confirmed` for a sampling incident
 * (a sample judged genuine raises no sampling finding). Neither lets the history produce the incident again, so a
 * person answered it; undefined otherwise (a word taken back, a word on another sample, or none).
 */
export function closingVerdict(incident: Pick<Incident, 'kind' | 'timeline'>): ClosingWord | undefined {
  const opening = incident.timeline.find((e) => e.kind === 'opened');
  if (opening?.kind !== 'opened') return undefined;
  const last = lastWordOn(incident.timeline, opening.sampleId);
  if (last === undefined) return undefined;
  if (last.verdict === 'rejected' || (last.verdict === 'confirmed' && incident.kind === 'sampling')) {
    return { sampleId: last.sampleId, verdict: last.verdict, by: last.by, at: last.at };
  }
  return undefined;
}

/**
 * Records the word in every incident concerned: those of `state`, and `onRecord` (the component's incidents on
 * record) for the ones no longer in it. The same word from the same person again changes nothing.
 */
export function applySampleVerdict(state: ComponentIncidents, onRecord: readonly Incident[], word: SampleVerdictWord, rules: IncidentRules): SampleVerdictResult {
  if (typeof word.by !== 'string' || word.by.trim() === '') throw new InputError('by: required');
  if (word.by.length > 80) throw new InputError('by: at most 80 characters');
  // eslint-disable-next-line no-control-regex
  if (/[\u0000-\u001f\u007f]/.test(word.by)) throw new InputError('by: must be one line of printable characters');
  if (!(word.now instanceof Date) || Number.isNaN(word.now.getTime())) throw new InputError('now: not a valid time');
  const draft = draftOf(state);
  const at = isoOf(word.now);
  const action = (incidentId: string): RecordedAction => ({ kind: 'sample-verdict', incidentId, by: word.by, at, sampleId: word.sampleId, verdict: word.verdict });
  const concerned: Incident[] = [];
  for (const inc of Object.values(draft.incidents).sort((a, b) => (a.id < b.id ? -1 : 1))) {
    if (!concernsSample(inc, word.sampleId)) continue;
    concerned.push(inc);
    if (sameVerdictAsLast(inc, word)) continue;
    judgeAction(draft, action(inc.id), rules);
    logAction(draft, action(inc.id));
  }
  const archived: Incident[] = [];
  for (const record of onRecord) {
    if (findDraft(draft, record.id) !== undefined || concerned.some((i) => i.id === record.id) || !concernsSample(record, word.sampleId)) continue;
    if (sameVerdictAsLast(record, word)) {
      concerned.push(record);
      continue;
    }
    const copy = structuredClone(record) as DraftIncident;
    concerned.push(copy);
    copy.timeline.push({ kind: 'sample-verdict', at, sampleId: word.sampleId, verdict: word.verdict, by: word.by });
    if (copy.timeline.length > TIMELINE_LIMIT) copy.timeline.splice(1, copy.timeline.length - TIMELINE_LIMIT);
    archived.push(copy);
    logAction(draft, action(record.id));
  }
  return { state: draft, effects: [], concerned, archived };
}
