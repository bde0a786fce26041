/**
 * Telling people: announcing an incident to tier 0, escalating tier by tier while nobody acknowledges, and
 * passing on state changes to everyone told so far. Every message is an effect with a key derived from the
 * incident's own event counter, so the same input always yields the same keys and the queue de-duplicates.
 */
import { maxSeverity, severityRank } from '../domain/finding.ts';
import type { Measurand } from '../domain/measurands.ts';
import type { EscalationPolicy } from '../domain/escalationConfig.ts';
import { isoOf, type DraftIncident, type Work } from './draft.ts';
import { describeState, type IncidentEventType, type IncidentSnapshot } from './model.ts';
import { recipients, selectPolicy } from './policy.ts';

const MINUTE = 60_000;

export function snapshot(inc: DraftIncident, reason: string): IncidentSnapshot {
  return {
    id: inc.id,
    unit: inc.unit,
    component: inc.component,
    group: inc.group,
    ...(inc.measurand !== undefined && { measurand: inc.measurand }),
    severity: inc.severity,
    peakSeverity: inc.peakSeverity,
    state: describeState(inc),
    alarm: inc.alarm,
    ...(inc.acknowledged !== null && { acknowledgedBy: inc.acknowledged.by }),
    ...(inc.shelved !== null && { shelvedUntil: inc.shelved.until }),
    closed: inc.closed !== null,
    openedAt: inc.openedAt,
    lastSampleId: inc.lastSampleId,
    lastSampledAt: inc.lastSampledAt,
    tier: Math.max(0, inc.escalation.reachedTier),
    findings: structuredClone(inc.evidence),
    reason,
  };
}

function chainPolicy(inc: DraftIncident, work: Work): EscalationPolicy | undefined {
  return inc.escalation.policy === null ? undefined : work.rules.policies.find((p) => p.name === inc.escalation.policy);
}

/** One event to the recipients of tiers `fromTier..toTier`. Returns false when the policy names nobody for it. */
function sendEvent(inc: DraftIncident, work: Work, policy: EscalationPolicy, type: IncidentEventType, fromTier: number, toTier: number, reason: string): boolean {
  const to = recipients(policy, fromTier, toTier, type);
  if (to.length === 0) return false;
  inc.eventSeq += 1;
  const at = isoOf(work.now);
  const payload = snapshot(inc, reason);
  for (const r of to) {
    work.effects.push({
      kind: 'notify',
      key: `${inc.id}:${inc.eventSeq}:${r.channel}:${r.tier}:${r.target}`,
      incidentId: inc.id,
      eventSeq: inc.eventSeq,
      type,
      channel: r.channel,
      target: r.target,
      tier: r.tier,
      at,
      incident: payload,
    });
  }
  inc.timeline.push({ kind: 'notified', at, type, tier: toTier, eventSeq: inc.eventSeq, targets: to.map((r) => `${r.channel}:${r.target}`), reason });
  return true;
}

/** Acknowledgement, return to normal and closing go to everyone the current chain has told. */
export function tellReached(inc: DraftIncident, work: Work, type: IncidentEventType, reason: string): void {
  const policy = chainPolicy(inc, work);
  if (policy === undefined || inc.escalation.reachedTier < 0) return;
  sendEvent(inc, work, policy, type, 0, inc.escalation.reachedTier, reason);
}

function mayEscalate(inc: DraftIncident): boolean {
  return inc.closed === null && inc.shelved === null && inc.acknowledged === null && inc.alarm === 'active';
}

/**
 * Tells every tier that is due, then schedules the check for the next one (or the next reminder). Calling it
 * again at the same time changes nothing, which keeps redelivered checks harmless.
 */
export function advanceEscalation(inc: DraftIncident, work: Work, firstReason?: string): void {
  const policy = chainPolicy(inc, work);
  const esc = inc.escalation;
  if (policy === undefined || esc.startedAt === null || !mayEscalate(inc)) return;
  const now = work.now.getTime();
  const started = Date.parse(esc.startedAt);
  while (esc.nextTier < policy.tiers.length && started + policy.tiers[esc.nextTier]!.afterMinutes * MINUTE <= now) {
    const tier = esc.nextTier;
    const first = tier === 0;
    const reason = first
      ? (firstReason ?? announcementReason(inc, esc.firstType))
      : `not acknowledged ${policy.tiers[tier]!.afterMinutes} min after it was announced: escalated to tier ${tier}`;
    esc.reachedTier = tier;
    esc.nextTier = tier + 1;
    esc.lastSentAt = isoOf(work.now);
    sendEvent(inc, work, policy, first ? esc.firstType : 'wearshift.incident.escalated', tier, tier, reason);
  }

  let due: number | null = null;
  let reason: 'tier' | 'repeat' = 'tier';
  if (esc.nextTier < policy.tiers.length) {
    due = started + policy.tiers[esc.nextTier]!.afterMinutes * MINUTE;
  } else if (policy.repeatMinutes !== undefined && esc.reachedTier >= 0 && esc.lastSentAt !== null) {
    reason = 'repeat';
    due = Date.parse(esc.lastSentAt) + policy.repeatMinutes * MINUTE;
    if (due <= now) {
      esc.lastSentAt = isoOf(work.now);
      sendEvent(inc, work, policy, 'wearshift.incident.escalated', esc.reachedTier, esc.reachedTier, `still not acknowledged: tier ${esc.reachedTier} reminded`);
      due = now + policy.repeatMinutes * MINUTE;
    }
  }
  if (due === null || (esc.dueAt !== null && Date.parse(esc.dueAt) === due)) return;
  esc.dueAt = new Date(due).toISOString();
  const tier = reason === 'tier' ? esc.nextTier : esc.reachedTier;
  work.effects.push({ kind: 'schedule-escalation', key: `${inc.id}:${reason}:${tier}:${due}`, incidentId: inc.id, tier, at: esc.dueAt, reason });
}

function measurandsOf(inc: DraftIncident): Measurand[] {
  return [...new Set(inc.evidence.map((f) => f.measurand))].sort();
}

function announcementReason(inc: DraftIncident, type: IncidentEventType): string {
  const what = inc.evidence.map((f) => `${f.measurand} (${f.rule}, ${f.severity})`).join(', ');
  return type === 'wearshift.incident.opened' ? `new incident, ${inc.severity}: ${what}` : `new evidence, ${inc.severity}: ${what}`;
}

/** What the evidence adds to what has been announced: a higher severity than ever told, or a new measurand. */
function newEvidence(inc: DraftIncident): string | null {
  const told = inc.announced;
  if (told === null) return 'not yet announced';
  const reasons: string[] = [];
  if (severityRank(inc.severity) > severityRank(told.severity)) reasons.push(`severity rose from ${told.severity} to ${inc.severity}`);
  const joined = measurandsOf(inc).filter((m) => !told.measurands.includes(m));
  if (joined.length > 0) reasons.push(`${joined.join(', ')} joined`);
  return reasons.length > 0 ? reasons.join('; ') : null;
}

/** Tier 0 hears of it; a new chain starts unless one is running for the same policy. */
function announce(inc: DraftIncident, work: Work, type: IncidentEventType, reason: string, restart: boolean): void {
  const told = inc.announced;
  inc.announced = {
    severity: told === null ? inc.severity : maxSeverity(told.severity, inc.severity),
    measurands: [...new Set([...(told?.measurands ?? []), ...measurandsOf(inc)])].sort(),
  };
  const policy = selectPolicy(work.rules.policies, inc.group, inc.severity);
  const esc = inc.escalation;
  const running = !restart && policy !== undefined && esc.policy === policy.name && esc.startedAt !== null;
  if (running) {
    if (esc.reachedTier >= 0) sendEvent(inc, work, policy, type, 0, esc.reachedTier, reason);
    advanceEscalation(inc, work);
    return;
  }
  inc.escalation = { policy: policy?.name ?? null, startedAt: isoOf(work.now), firstType: type, nextTier: 0, reachedTier: -1, lastSentAt: null, dueAt: null };
  if (policy === undefined) {
    inc.timeline.push({ kind: 'notified', at: isoOf(work.now), type, tier: 0, eventSeq: inc.eventSeq, targets: [], reason: `${reason}; no escalation policy matches` });
    return;
  }
  advanceEscalation(inc, work, reason);
}

/**
 * After the incident changed: announce it when it is new or the evidence is new, otherwise keep the
 * escalation going. New evidence withdraws an acknowledgement (ISA-18.2 practice: it needs a fresh look).
 * When shelving ends on an active, unacknowledged incident, it is announced again.
 */
export function announceIfDue(inc: DraftIncident, work: Work, options: { quiet: boolean; shelvingEnded?: boolean }): void {
  if (options.quiet || inc.shelved !== null || inc.closed !== null || inc.alarm !== 'active') return;
  if (inc.announced === null) {
    announce(inc, work, 'wearshift.incident.opened', announcementReason(inc, 'wearshift.incident.opened'), true);
    return;
  }
  const news = newEvidence(inc);
  const wasAcknowledged = inc.acknowledged !== null;
  if (news !== null) {
    if (wasAcknowledged) {
      inc.acknowledged = null;
      inc.timeline.push({ kind: 'unacknowledged', at: isoOf(work.now), reason: `new evidence: ${news}` });
    }
    announce(inc, work, 'wearshift.incident.updated', `new evidence: ${news}`, wasAcknowledged || options.shelvingEnded === true);
  } else if (!wasAcknowledged && options.shelvingEnded === true) {
    announce(inc, work, 'wearshift.incident.updated', 'shelving ended; still active and unacknowledged', true);
  } else if (!wasAcknowledged) {
    advanceEscalation(inc, work);
  }
}
