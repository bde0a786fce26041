/**
 * The annunciation: telling people what the verdict (verdict.ts) says. Announcing an incident to tier 0,
 * escalating tier by tier while nobody acknowledges, and passing on state changes to everyone told so far. It
 * compares each incident's verdict with what has been told (`announced`, `told`) and tells the difference, so
 * running it again changes nothing, and a verdict folded again after a late result is told as news, once.
 * Every message is an effect with a key derived from the incident's own event counter, so the same input always
 * yields the same keys and the queue de-duplicates.
 */
import { foundByWords, joinedWords, maxSeverity, severityRank, subjectOf, type Finding } from '../domain/finding.ts';
import type { Measurand } from '../domain/measurands.ts';
import type { EscalationPolicy } from '../domain/escalationConfig.ts';
import { isoOf, type DraftIncident, type Work } from './draft.ts';
import { borneOutText, closureText, describeState, lastWordOn, withdrawnEvidenceText, type Closure, type IncidentEventType, type IncidentSnapshot, type SampleVerdictEntry, type TimelineEntry } from './model.ts';
import { recipients, selectPolicy } from './policy.ts';
import { REOPENED } from './verdict.ts';

const MINUTE = 60_000;

/** The longest record of notifications kept per incident: the first and the latest. */
export const NOTIFICATION_LIMIT = 200;

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
    ...(inc.closed !== null && { closure: structuredClone(inc.closed) }),
    openedAt: inc.openedAt,
    lastSampleId: inc.lastSampleId,
    lastSampledAt: inc.lastSampledAt,
    tier: Math.max(0, inc.escalation.reachedTier),
    findings: structuredClone(inc.evidence),
    advisoryFindings: structuredClone(inc.context),
    ...(inc.forecast !== undefined && { forecast: structuredClone(inc.forecast) }),
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
  inc.notifications.push({ kind: 'notified', at, type, tier: toTier, eventSeq: inc.eventSeq, targets: to.map((r) => `${r.channel}:${r.target}`), reason });
  if (inc.notifications.length > NOTIFICATION_LIMIT) inc.notifications.splice(1, inc.notifications.length - NOTIFICATION_LIMIT);
  return true;
}

/** Acknowledgement, return to normal and closing go to everyone the current chain has told. */
export function tellReached(inc: DraftIncident, work: Work, type: IncidentEventType, reason: string): void {
  const policy = chainPolicy(inc, work);
  if (policy === undefined || inc.escalation.reachedTier < 0) return;
  sendEvent(inc, work, policy, type, 0, inc.escalation.reachedTier, reason);
}

/** Shelving hides an incident from annunciation until its time is up. */
export function shelvedAt(inc: Pick<DraftIncident, 'shelved'>, now: Date): boolean {
  return inc.shelved !== null && Date.parse(inc.shelved.until) > now.getTime();
}

/** A chain with more to tell (a tier or a reminder) and no check scheduled: it rested while the incident had returned. */
function restingChain(inc: DraftIncident, work: Work): boolean {
  const policy = chainPolicy(inc, work);
  const esc = inc.escalation;
  if (policy === undefined || esc.startedAt === null || esc.dueAt !== null) return false;
  return esc.nextTier < policy.tiers.length || (policy.repeatMinutes !== undefined && esc.reachedTier >= 0);
}

/** Tiers are told while the incident stays active, unacknowledged and not shelved; tier 0 (the announcement) also once it has returned. */
function mayEscalate(inc: DraftIncident, now: Date): boolean {
  return inc.closed === null && !shelvedAt(inc, now) && inc.acknowledged === null && (inc.alarm === 'active' || inc.escalation.nextTier === 0);
}

/**
 * Tells every tier that is due, then schedules the check for the next one (or the next reminder). Calling it
 * again at the same time changes nothing, which keeps redelivered checks harmless.
 *
 * @param dueBy what falls due by this instant counts as due although `work.now` is a little earlier: the pending
 *   check of this chain, run by a clock slightly behind the one that let it fall due (applyEscalationCheck). What is
 *   told is stamped `work.now` all the same.
 */
export function advanceEscalation(inc: DraftIncident, work: Work, firstReason?: string, dueBy?: number): void {
  const policy = chainPolicy(inc, work);
  const esc = inc.escalation;
  if (policy === undefined || esc.startedAt === null || !mayEscalate(inc, work.now)) return;
  const now = work.now.getTime();
  const reached = Math.max(now, dueBy ?? now);
  const started = Date.parse(esc.startedAt);
  while (esc.nextTier < policy.tiers.length && started + policy.tiers[esc.nextTier]!.afterMinutes * MINUTE <= reached) {
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
    if (due <= reached) {
      esc.lastSentAt = isoOf(work.now);
      sendEvent(inc, work, policy, 'wearshift.incident.escalated', esc.reachedTier, esc.reachedTier, `still not acknowledged: tier ${esc.reachedTier} reminded`);
      due = now + policy.repeatMinutes * MINUTE;
    }
  }
  if (due === null || (esc.dueAt !== null && Date.parse(esc.dueAt) === due)) return;
  esc.dueAt = new Date(due).toISOString();
  const tier = reason === 'tier' ? esc.nextTier : esc.reachedTier;
  // The event sequence tells apart the checks of two chains that fall due at the same instant (a chain started again
  // in the same millisecond as the one before it, as an unshelving right after a shelving does).
  work.effects.push({ kind: 'schedule-escalation', key: `${inc.id}:${reason}:${tier}:${due}:${inc.eventSeq}`, incidentId: inc.id, tier, at: esc.dueAt, reason });
}

function measurandsOf(inc: DraftIncident): Measurand[] {
  return [...new Set(inc.evidence.map((f) => f.measurand))].sort();
}

function announcementReason(inc: DraftIncident, type: IncidentEventType): string {
  // A finding about the whole sample is told by its check in words: "sample (duplicated bottle, caution)".
  const what = inc.evidence.map((f) => `${subjectOf(f)} (${foundByWords(f)}, ${f.severity})`).join(', ');
  return type === 'wearshift.incident.opened' ? `new incident, ${inc.severity}: ${what}` : `new evidence, ${inc.severity}: ${what}`;
}

/** What the evidence adds to what has been announced: a higher severity than ever told, or a new measurand. */
function newEvidence(inc: DraftIncident): string | null {
  const told = inc.announced;
  if (told === null) return 'not yet announced';
  const reasons: string[] = [];
  if (severityRank(inc.severity) > severityRank(told.severity)) reasons.push(`severity rose from ${told.severity} to ${inc.severity}`);
  const joined = measurandsOf(inc).filter((m) => !told.measurands.includes(m));
  if (joined.length > 0) reasons.push(`${joinedWords(inc.evidence, joined)} joined`);
  return reasons.length > 0 ? reasons.join('; ') : null;
}

/** Tier 0 hears of it; a new chain starts unless one is running for the same policy. */
function announce(inc: DraftIncident, work: Work, type: IncidentEventType, reason: string, restart: boolean): void {
  const told = inc.announced;
  inc.announced = {
    severity: told === null ? inc.severity : maxSeverity(told.severity, inc.severity),
    measurands: [...new Set([...(told?.measurands ?? []), ...measurandsOf(inc)])].sort(),
  };
  const policy = selectPolicy(work.rules.policies, inc.group, inc.severity, inc.kind);
  const esc = inc.escalation;
  const running = !restart && policy !== undefined && esc.policy === policy.name && esc.startedAt !== null;
  if (running) {
    if (esc.reachedTier >= 0) sendEvent(inc, work, policy, type, 0, esc.reachedTier, reason);
    advanceEscalation(inc, work);
    return;
  }
  inc.escalation = { policy: policy?.name ?? null, startedAt: isoOf(work.now), firstType: type, nextTier: 0, reachedTier: -1, lastSentAt: null, dueAt: null };
  if (policy === undefined) {
    inc.notifications.push({ kind: 'notified', at: isoOf(work.now), type, tier: 0, eventSeq: inc.eventSeq, targets: [], reason: `${reason}; no escalation policy matches` });
    return;
  }
  advanceEscalation(inc, work, reason);
}

export function cancelEscalations(inc: DraftIncident, work: Work, reason: 'acknowledged' | 'shelved' | 'closed'): void {
  if (inc.escalation.dueAt === null) return;
  inc.escalation.dueAt = null;
  work.effects.push({ kind: 'cancel-escalations', key: `${inc.id}:cancel:${reason}:${work.now.getTime()}`, incidentId: inc.id, reason });
}

/** What the message of a reopening says: whether it withdrew an acknowledgement (verdict.ts), and what else is new. */
function reopenedReason(inc: DraftIncident, news: string | null): string {
  const lastWord = [...inc.timeline].reverse().find((e) => e.kind === 'acknowledged' || e.kind === 'unacknowledged');
  const withdrawn = lastWord?.kind === 'unacknowledged' && lastWord.reason === REOPENED;
  const parts = [REOPENED, withdrawn ? 'acknowledgement withdrawn, acknowledge again' : 'not acknowledged'];
  if (inc.alarm === 'returned') parts.push('returned to normal since, still unacknowledged');
  if (news !== null) parts.push(`new evidence: ${news}`);
  return parts.join('; ');
}

/**
 * What the findings set aside at a closing mean now. A sample rejected by a responder bears out the sampling findings
 * that put it in doubt (the responder agreed with them), while any other finding of that sample no longer holds; a
 * withdrawal, or a sample confirmed as genuine, leaves none of them holding.
 */
function setAsideText(closure: Closure, findings: readonly Finding[]): string {
  if (closure.how !== 'sample-verdict' || closure.verdict !== 'rejected') return withdrawnEvidenceText(findings);
  const borne = findings.filter((f) => f.rule === 'sampling' && f.sampleId === closure.sampleId);
  const parts = [borneOutText(borne), withdrawnEvidenceText(findings.filter((f) => !borne.includes(f)))];
  return parts.filter((p) => p !== '').join('; ');
}

type ReturnEntry = Extract<TimelineEntry, { kind: 'returned' }>;

/** The latest return to normal, from the timeline; null when the incident has been active again since. */
function lastReturnEntry(inc: DraftIncident): ReturnEntry | null {
  for (let i = inc.timeline.length - 1; i >= 0; i--) {
    const e = inc.timeline[i]!;
    if (e.kind === 'returned') return e;
    if (e.kind === 'active-again') return null;
  }
  return null;
}

/** The sample of the latest return to normal. */
function lastReturn(inc: DraftIncident): string | null {
  return lastReturnEntry(inc)?.sampleId ?? null;
}

/**
 * The return as the verdict recorded it, not as the incident stands when it is told: results judged together after
 * the return (a batch, a backfill) add clean samples that did not bring it back.
 */
function returnedReason(inc: DraftIncident, entry: ReturnEntry): string {
  const count = entry.cleanSamples === undefined ? '' : `, after ${entry.cleanSamples} ${entry.cleanSamples === 1 ? 'sample' : 'samples'} without findings`;
  const word = usualRateWord(inc);
  // A return a responder's word on a usual rate brought about says so: the rate did not fall, it is judged afresh.
  const because = word === undefined ? '' : `, once ${word.by} had said that the rate signalled at sample ${word.sampleId} is this component's usual one (its change detectors learn a new baseline from there)`;
  return `returned to normal at sample ${entry.sampleId}${count}${because}; still unacknowledged`;
}

/** The latest word on a usual rate in the timeline that still stands (no later word on its sample). */
function usualRateWord(inc: DraftIncident): SampleVerdictEntry | undefined {
  return inc.timeline.findLast((e): e is SampleVerdictEntry => e.kind === 'sample-verdict' && e.verdict === 'usual-rate' && lastWordOn(inc.timeline, e.sampleId) === e);
}

/**
 * Tells what the verdict of every incident adds to what has been told: a new incident, new evidence or the reopening
 * of a closed incident is announced (if its latest sample arrived live), an acknowledgement, a return to normal and a closing go to
 * everyone told so far, shelving cancels the escalation until its time is up; the escalation itself goes on by its
 * scheduled checks.
 */
export function annunciate(incidents: Iterable<DraftIncident>, work: Work): void {
  for (const inc of incidents) annunciateOne(inc, work);
}

function annunciateOne(inc: DraftIncident, work: Work): void {
  const told = inc.told;
  if (inc.closed !== null) {
    if (told.closed) return;
    told.closed = true;
    cancelEscalations(inc, work, 'closed');
    const note = inc.closed.note === undefined ? '' : `: ${inc.closed.note}`;
    // An incident the history no longer produces carries no findings (incidentFold.ts): the message names what it stood on.
    const setAside = setAsideText(inc.closed, inc.withdrawnEvidence ?? []);
    if (inc.announced !== null) tellReached(inc, work, 'wearshift.incident.closed', `${closureText(inc.closed)}${note}${setAside === '' ? '' : `; ${setAside}`}`);
    return;
  }
  const ack = inc.acknowledged;
  const shelved = shelvedAt(inc, work.now);
  // Reopened after a closing that was told (`told.closed` still set): those told of the closing hear of the reopening
  // with its first live sample (below), and until then it stays told as closed. Acknowledged or shelved since, someone
  // has seen it open; never announced, its announcement covers it.
  if (told.closed && (ack !== null || shelved || inc.announced === null)) told.closed = false;
  let ackWithdrawn = false;
  if (ack !== null && told.acknowledgedAt !== ack.at) {
    told.acknowledgedAt = ack.at;
    cancelEscalations(inc, work, 'acknowledged');
    if (!shelved) tellReached(inc, work, 'wearshift.incident.acknowledged', `acknowledged by ${ack.by}${ack.note === undefined ? '' : `: ${ack.note}`}`);
  } else if (ack === null && told.acknowledgedAt !== null) {
    told.acknowledgedAt = null;
    ackWithdrawn = true;
  }
  if (shelved) {
    if (told.shelvedUntil !== inc.shelved!.until) {
      told.shelvedUntil = inc.shelved!.until;
      cancelEscalations(inc, work, 'shelved');
      const until = Date.parse(inc.shelved!.until);
      work.effects.push({ kind: 'schedule-escalation', key: `${inc.id}:shelving-ends:0:${until}`, incidentId: inc.id, tier: 0, at: inc.shelved!.until, reason: 'shelving-ends' });
    }
    return;
  }
  const shelvingEnded = told.shelvedUntil !== null;
  told.shelvedUntil = null;
  if (inc.announced === null) {
    if (!inc.live || !(inc.lastLive || shelvingEnded)) return;
    announce(inc, work, 'wearshift.incident.opened', announcementReason(inc, 'wearshift.incident.opened'), true);
  } else if (told.closed && inc.lastLive) {
    // A closed incident that came back is a new unacknowledged alarm situation (ISA-18.2): announced to tier 0 as
    // news, its escalation chain started again from tier 0 — also when it has returned to normal since (the later
    // tiers then wait for it to turn active). Its next closing is news again.
    told.closed = false;
    told.returnedAt = inc.alarm === 'returned' ? lastReturn(inc) : null;
    announce(inc, work, 'wearshift.incident.updated', reopenedReason(inc, newEvidence(inc)), true);
  } else if (inc.alarm === 'active' && (inc.lastLive || shelvingEnded)) {
    // Those told of a return to normal hear that it is active again, once.
    const activeAgain = told.returnedAt !== null;
    told.returnedAt = null;
    const news = newEvidence(inc);
    if (news !== null) announce(inc, work, 'wearshift.incident.updated', `new evidence: ${news}${activeAgain ? '; active again after it had returned to normal' : ''}${ackWithdrawn ? '; acknowledgement withdrawn, acknowledge again' : ''}`, ackWithdrawn || shelvingEnded);
    else if (ackWithdrawn) {
      // Evidence beyond what was acknowledged, though not beyond what was ever announced (the severity fell before the
      // acknowledgement and rose again): the acknowledgement is withdrawn, so the chain starts again — an
      // unacknowledged active alarm is never left silent.
      const withdrawn = [...inc.timeline].reverse().find((e) => e.kind === 'unacknowledged');
      announce(inc, work, 'wearshift.incident.updated', `acknowledgement withdrawn: ${withdrawn?.reason ?? 'new evidence'}; acknowledge again`, true);
    } else if (ack === null && shelvingEnded) announce(inc, work, 'wearshift.incident.updated', 'shelving ended; still active and unacknowledged', true);
    else if (ack === null && (activeAgain || restingChain(inc, work))) {
      // Active again after a return to normal, still unacknowledged: the chain, whose checks found nothing to tell
      // while it had returned, goes on (a tier that fell due meanwhile is told at once).
      if (activeAgain) tellReached(inc, work, 'wearshift.incident.updated', 'active again after it had returned to normal; still not acknowledged');
      advanceEscalation(inc, work);
    }
  }
  if (inc.alarm === 'returned') {
    const returned = lastReturnEntry(inc);
    if (returned !== null && told.returnedAt !== returned.sampleId && ack === null && inc.lastLive) {
      told.returnedAt = returned.sampleId;
      tellReached(inc, work, 'wearshift.incident.returned', returnedReason(inc, returned));
    }
  }
  // Otherwise the escalation goes on by its scheduled checks (applyEscalationCheck).
}
