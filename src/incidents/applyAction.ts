/**
 * Operator actions on one incident: acknowledge, shelve until a time, unshelve, resolve with a note, or add a
 * note. Acknowledging a returned incident closes it. Acknowledging twice is not an error: links in e-mails get
 * followed more than once, and the second time simply changes nothing.
 */
import { InputError } from '../domain/errors.ts';
import { closeIncident, cancelEscalations } from './closing.ts';
import { draftOf, findDraft, isoOf, type DraftIncident, type Work } from './draft.ts';
import { announceIfDue, tellReached } from './escalation.ts';
import { IncidentConflictError, IncidentNotFoundError } from './errors.ts';
import type { ComponentIncidents, Incident, IncidentResult } from './model.ts';
import type { IncidentRules } from './policy.ts';
import { endExpiredShelving } from './shelving.ts';

interface ActionBase {
  readonly incidentId: string;
  /** Who acts: a name or an address, shown in the timeline and in messages. */
  readonly by: string;
  readonly now: Date;
}

export type IncidentAction =
  | (ActionBase & { readonly kind: 'acknowledge'; readonly note?: string })
  | (ActionBase & { readonly kind: 'shelve'; readonly until: Date; readonly reason: string })
  | (ActionBase & { readonly kind: 'unshelve' })
  | (ActionBase & { readonly kind: 'resolve'; readonly note: string })
  | (ActionBase & { readonly kind: 'note'; readonly note: string });

export type IncidentActionKind = IncidentAction['kind'];

export interface ActionResult extends IncidentResult {
  /** The incident after the action. */
  readonly incident: Incident;
}

const HOUR = 3_600_000;

export function applyAction(state: ComponentIncidents, action: IncidentAction, rules: IncidentRules): ActionResult {
  checkText('by', action.by, 80);
  if (!(action.now instanceof Date) || Number.isNaN(action.now.getTime())) throw new InputError('now: not a valid time');
  const draft = draftOf(state);
  const work: Work = { now: action.now, rules, effects: [] };
  endExpiredShelving(draft, work);
  const inc = findDraft(draft, action.incidentId);
  if (inc === undefined) throw new IncidentNotFoundError(action.incidentId);
  const at = isoOf(action.now);

  switch (action.kind) {
    case 'acknowledge': {
      if (action.note !== undefined) checkText('note', action.note, 2000);
      refuseWhenClosed(inc, 'acknowledge');
      if (inc.acknowledged !== null) break;
      inc.acknowledged = { by: action.by, at, ...(action.note !== undefined && { note: action.note }) };
      inc.timeline.push({ kind: 'acknowledged', at, by: action.by, ...(action.note !== undefined && { note: action.note }) });
      cancelEscalations(inc, work, 'acknowledged');
      if (inc.alarm === 'returned') {
        closeIncident(inc, { at, how: 'acknowledged-and-returned', by: action.by }, work, { quiet: false });
      } else if (inc.shelved === null) {
        tellReached(inc, work, 'wearshift.incident.acknowledged', `acknowledged by ${action.by}${action.note === undefined ? '' : `: ${action.note}`}`);
      }
      break;
    }
    case 'shelve': {
      checkText('reason', action.reason, 500);
      if (!(action.until instanceof Date) || Number.isNaN(action.until.getTime())) throw new InputError('until: not a valid time');
      refuseWhenClosed(inc, 'shelve');
      const hours = (action.until.getTime() - action.now.getTime()) / HOUR;
      if (hours <= 0) throw new InputError(`until: ${isoOf(action.until)} is not in the future`);
      const max = rules.incidents.maxShelveHours;
      if (hours > max) throw new InputError(`until: shelving is limited to ${max} h (incidents.maxShelveHours); ${isoOf(action.until)} is ${Math.round(hours)} h away`);
      const until = isoOf(action.until);
      // Shelving again until the same time (a double click, a retried request) changes nothing.
      if (inc.shelved?.until === until) break;
      inc.shelved = { by: action.by, at, until, reason: action.reason };
      inc.timeline.push({ kind: 'shelved', at, by: action.by, until, reason: action.reason });
      cancelEscalations(inc, work, 'shelved');
      work.effects.push({ kind: 'schedule-escalation', key: `${inc.id}:shelving-ends:0:${action.until.getTime()}`, incidentId: inc.id, tier: 0, at: until, reason: 'shelving-ends' });
      break;
    }
    case 'unshelve': {
      if (inc.shelved === null) throw new IncidentConflictError(inc.id, 'is not shelved');
      inc.shelved = null;
      inc.timeline.push({ kind: 'unshelved', at, by: action.by });
      announceIfDue(inc, work, { quiet: false, shelvingEnded: true });
      break;
    }
    case 'resolve': {
      checkText('note', action.note, 2000);
      refuseWhenClosed(inc, 'resolve');
      closeIncident(inc, { at, how: 'resolved', by: action.by, note: action.note }, work, { quiet: false });
      break;
    }
    case 'note': {
      checkText('note', action.note, 2000);
      inc.timeline.push({ kind: 'note', at, by: action.by, note: action.note });
      break;
    }
  }
  return { state: draft, effects: work.effects, incident: inc };
}

function refuseWhenClosed(inc: DraftIncident, what: string): void {
  if (inc.closed !== null) throw new IncidentConflictError(inc.id, `is closed (${inc.closed.how} at ${inc.closed.at}); cannot ${what} it`);
}

function checkText(field: string, value: unknown, max: number): void {
  if (typeof value !== 'string' || value.trim() === '') throw new InputError(`${field}: required`);
  if (value.length > max) throw new InputError(`${field}: at most ${max} characters`);
  // eslint-disable-next-line no-control-regex
  if (field === 'by' && /[\u0000-\u001f\u007f]/.test(value)) throw new InputError('by: must be one line of printable characters');
}
