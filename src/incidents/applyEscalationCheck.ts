/**
 * A delayed escalation check falls due. It tells the next tier only if the incident is still active,
 * unacknowledged, not shelved and not closed; checks that an acknowledgement or a newer chain overtook find
 * nothing due and change nothing. A check also ends shelving whose time is up.
 */
import { draftOf, findDraft, type Work } from './draft.ts';
import { advanceEscalation, annunciate } from './escalation.ts';
import type { ComponentIncidents, IncidentResult } from './model.ts';
import type { IncidentRules } from './policy.ts';
import { endExpiredShelving } from './shelving.ts';

export interface EscalationCheck {
  readonly incidentId: string;
  readonly now: Date;
}

/** Delayed jobs may run on a machine whose clock is a little behind the one that scheduled them. */
export const CLOCK_SKEW_TOLERANCE_MS = 60_000;

export function applyEscalationCheck(state: ComponentIncidents, check: EscalationCheck, rules: IncidentRules): IncidentResult {
  const draft = draftOf(state);
  const work: Work = { now: check.now, rules, effects: [] };
  endExpiredShelving(draft, work);
  const inc = findDraft(draft, check.incidentId);
  const dueAt = inc?.escalation.dueAt ?? null;
  if (inc !== undefined && dueAt !== null && check.now.getTime() >= Date.parse(dueAt) - CLOCK_SKEW_TOLERANCE_MS) {
    inc.escalation.dueAt = null;
    const at = new Date(Math.max(check.now.getTime(), Date.parse(dueAt)));
    advanceEscalation(inc, { ...work, now: at });
  }
  // A shelving that ended above is told now.
  annunciate(Object.values(draft.incidents), work);
  return { state: draft, effects: work.effects };
}
