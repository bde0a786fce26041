/**
 * A delayed escalation check falls due. It tells the next tier only if the incident is still active,
 * unacknowledged, not shelved and not closed; checks that an acknowledgement or a newer chain overtook find
 * nothing due and change nothing. A check also ends shelving whose time is up.
 *
 * A check belongs to the chain that scheduled it: it carries the tier and the time (`dueAt`) of the
 * schedule-escalation effect it came from, and acts only while the incident's pending escalation is still that one.
 * A check left over from an earlier chain (scheduled before an acknowledgement, withdrawn since, cancelled the chain
 * and a new one started) does nothing, however close its time lies to the new chain's: the new chain has a check of
 * its own.
 *
 * Clock skew: the check runs by the clock of the worker that takes it, which may be a little behind the one that let
 * the delayed job fall due. A check of the pending escalation that arrives at most `CLOCK_SKEW_TOLERANCE_MS` before
 * its time tells the tier then — it was due by the other clock — and everything it records (the message, the chain's
 * `lastSentAt`) carries the time it ran, never its due time: nothing is stamped later than it happened. A check that
 * arrives earlier than that, or one queued without its due time that finds the escalation not yet due, tells nothing
 * and schedules the check again for the pending time, so a chain is never left without a check.
 */
import { draftOf, findDraft, type DraftIncident, type Work } from './draft.ts';
import { advanceEscalation, annunciate } from './escalation.ts';
import type { ComponentIncidents, IncidentResult, ScheduleEscalationEffect } from './model.ts';
import type { IncidentRules } from './policy.ts';
import { endExpiredShelving } from './shelving.ts';

export interface EscalationCheck {
  readonly incidentId: string;
  readonly now: Date;
  /**
   * What the check was scheduled for: the `reason`, `tier` and `at` of its schedule-escalation effect. Each is
   * optional: a check queued before they were passed on is matched by what it has.
   */
  readonly reason?: ScheduleEscalationEffect['reason'];
  readonly tier?: number;
  readonly dueAt?: string;
}

/** How early a check of the pending escalation may arrive and still tell its tier (see the file's comment). */
export const CLOCK_SKEW_TOLERANCE_MS = 60_000;

export function applyEscalationCheck(state: ComponentIncidents, check: EscalationCheck, rules: IncidentRules): IncidentResult {
  const draft = draftOf(state);
  const work: Work = { now: check.now, rules, effects: [] };
  endExpiredShelving(draft, work);
  const inc = findDraft(draft, check.incidentId);
  // The end of a shelving is the business of endExpiredShelving and the annunciation below, not of the chain.
  if (inc !== undefined && check.reason !== 'shelving-ends' && isPendingCheck(inc, check)) {
    const dueAt = Date.parse(inc.escalation.dueAt!);
    const now = check.now.getTime();
    if (now >= dueAt || (check.dueAt !== undefined && dueAt - now <= CLOCK_SKEW_TOLERANCE_MS)) {
      inc.escalation.dueAt = null;
      advanceEscalation(inc, work, undefined, dueAt);
    } else {
      scheduleAgain(inc, check, work);
    }
  }
  // A shelving that ended above is told now.
  annunciate(Object.values(draft.incidents), work);
  return { state: draft, effects: work.effects };
}

/** Whether the check is the one the incident's pending escalation was scheduled with (advanceEscalation). */
function isPendingCheck(inc: DraftIncident, check: EscalationCheck): boolean {
  const esc = inc.escalation;
  if (esc.dueAt === null) return false;
  if (check.dueAt !== undefined && Date.parse(check.dueAt) !== Date.parse(esc.dueAt)) return false;
  if (check.tier === undefined) return true;
  // advanceEscalation names a tier check by the tier it will tell, a reminder by the tier it reminds.
  if (check.reason === 'tier') return check.tier === esc.nextTier;
  if (check.reason === 'repeat') return check.tier === esc.reachedTier;
  return check.tier === esc.nextTier || check.tier === esc.reachedTier;
}

/** The check came too early: the same check again at the pending time, under a key of its own (the early job's key is taken). */
function scheduleAgain(inc: DraftIncident, check: EscalationCheck, work: Work): void {
  const at = inc.escalation.dueAt!;
  const reason = check.reason === 'repeat' ? 'repeat' : 'tier';
  const tier = check.tier ?? (reason === 'tier' ? inc.escalation.nextTier : inc.escalation.reachedTier);
  const due = Date.parse(at);
  work.effects.push({
    kind: 'schedule-escalation',
    key: `${inc.id}:${reason}:${tier}:${due}:${inc.eventSeq}:early:${work.now.getTime()}`,
    incidentId: inc.id,
    tier,
    at,
    reason,
  });
}
