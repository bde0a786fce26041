/**
 * Operator actions on one incident: acknowledge, shelve until a time, unshelve, resolve with a note, or add a
 * note. The verdict takes the action (verdict.ts) and logs it after the latest step, the annunciation tells what
 * changed. Acknowledging a returned incident closes it. Acknowledging twice is not an error: links in e-mails get
 * followed more than once, and the second time simply changes nothing.
 */
import { InputError } from '../domain/errors.ts';
import { logAction } from './actionLog.ts';
import { draftOf, findDraft, isoOf, type Work } from './draft.ts';
import { annunciate } from './escalation.ts';
import { IncidentNotFoundError } from './errors.ts';
import type { ComponentIncidents, Incident, IncidentResult, RecordedAction } from './model.ts';
import type { IncidentRules } from './policy.ts';
import { endExpiredShelving } from './shelving.ts';
import { judgeAction } from './verdict.ts';

interface ActionBase {
  readonly incidentId: string;
  /** Who acts: a name or an address, shown in the timeline and in messages. */
  readonly by: string;
  readonly now: Date;
}

export type IncidentAction =
  | (ActionBase & {
      readonly kind: 'acknowledge';
      readonly note?: string;
      readonly recipient?: string;
      /** The credential the action came with ("responder token 3f2a9c1e", "e-mail link to ..."): who it really was, beside the name given. */
      readonly credential?: string;
    })
  | (ActionBase & { readonly kind: 'shelve'; readonly until: Date; readonly reason: string })
  | (ActionBase & { readonly kind: 'unshelve' })
  | (ActionBase & { readonly kind: 'resolve'; readonly note: string })
  | (ActionBase & { readonly kind: 'note'; readonly note: string });

export type IncidentActionKind = IncidentAction['kind'];

export interface ActionResult extends IncidentResult {
  /** The incident after the action. */
  readonly incident: Incident;
}

export function applyAction(state: ComponentIncidents, action: IncidentAction, rules: IncidentRules): ActionResult {
  checkText('by', action.by, 80);
  if (!(action.now instanceof Date) || Number.isNaN(action.now.getTime())) throw new InputError('now: not a valid time');
  const recorded = record(action);
  const draft = draftOf(state);
  const work: Work = { now: action.now, rules, effects: [] };
  endExpiredShelving(draft, work);
  if (findDraft(draft, action.incidentId) === undefined) throw new IncidentNotFoundError(action.incidentId);
  const before = JSON.stringify(findDraft(draft, action.incidentId));
  const inc = judgeAction(draft, recorded, rules)!;
  if (JSON.stringify(inc) !== before) logAction(draft, recorded);
  annunciate(Object.values(draft.incidents), work);
  return { state: draft, effects: work.effects, incident: inc };
}

function record(action: IncidentAction): RecordedAction {
  const base = { incidentId: action.incidentId, by: action.by, at: isoOf(action.now) };
  switch (action.kind) {
    case 'acknowledge':
      if (action.note !== undefined) checkText('note', action.note, 2000);
      if (action.recipient !== undefined) checkText('recipient', action.recipient, 320);
      if (action.credential !== undefined) checkText('credential', action.credential, 400);
      return {
        kind: 'acknowledge',
        ...base,
        ...(action.note !== undefined && { note: action.note }),
        ...(action.recipient !== undefined && { recipient: action.recipient }),
        ...(action.credential !== undefined && { credential: action.credential }),
      };
    case 'shelve':
      checkText('reason', action.reason, 500);
      if (!(action.until instanceof Date) || Number.isNaN(action.until.getTime())) throw new InputError('until: not a valid time');
      return { kind: 'shelve', ...base, until: isoOf(action.until), reason: action.reason };
    case 'unshelve':
      return { kind: 'unshelve', ...base };
    case 'resolve':
      checkText('note', action.note, 2000);
      return { kind: 'resolve', ...base, note: action.note };
    case 'note':
      checkText('note', action.note, 2000);
      return { kind: 'note', ...base, note: action.note };
  }
}

function checkText(field: string, value: unknown, max: number): void {
  if (typeof value !== 'string' || value.trim() === '') throw new InputError(`${field}: required`);
  if (value.length > max) throw new InputError(`${field}: at most ${max} characters`);
  // eslint-disable-next-line no-control-regex
  if ((field === 'by' || field === 'recipient' || field === 'credential') && /[\u0000-\u001f\u007f]/.test(value)) throw new InputError(`${field}: must be one line of printable characters`);
}
