/**
 * A queued message the incident has outrun: judged on the incident as it stands when the message is about to be sent
 * (a message waits in the queue for a busy worker or its retries, up to hours), and recorded on the message's entry
 * of the incident's notifications, so that the record says it was not sent, and why. Once recorded, a message stays
 * withdrawn: a retried job finds the record and neither records it again nor sends it.
 */
import { NOTIFICATION_LIMIT } from './escalation.ts';
import type { Incident, NotifiedEntry, NotifyEffect, WithdrawnBecause, WithdrawnMessage } from './model.ts';

/**
 * Why a queued message no longer goes out; undefined when it still goes.
 *
 * - An escalation or reminder (`escalated`) asks someone new to act: only while the incident is still active,
 *   unacknowledged, not shelved and not closed.
 * - An announcement (`opened`, `updated`) tells tier 0 of the incident or of new evidence: not while it is shelved or
 *   once it is closed. An acknowledgement that came meanwhile does not stop it: the others on tier 0 still learn of
 *   the incident, the message shows the state it was sent for, and its acknowledgement link then opens a page that
 *   says who acknowledged it.
 * - `acknowledged`, `returned` and `closed` report a change of state that has happened: they always go.
 */
export function withdrawnBecause(
  effect: Pick<NotifyEffect, 'type'>,
  incident: Pick<Incident, 'alarm' | 'acknowledged' | 'shelved' | 'closed'>,
  now: number,
): { readonly because: WithdrawnBecause; readonly reason: string } | undefined {
  const escalation = effect.type === 'wearshift.incident.escalated';
  const announcement = effect.type === 'wearshift.incident.opened' || effect.type === 'wearshift.incident.updated';
  if (!escalation && !announcement) return undefined;
  if (incident.closed !== null) return { because: 'closed', reason: `the incident was closed at ${incident.closed.at}` };
  if (incident.shelved !== null && Date.parse(incident.shelved.until) > now) return { because: 'shelved', reason: `the incident is shelved until ${incident.shelved.until}` };
  if (!escalation) return undefined;
  if (incident.acknowledged !== null) return { because: 'acknowledged', reason: `the incident was acknowledged by ${incident.acknowledged.by} at ${incident.acknowledged.at}` };
  if (incident.alarm !== 'active') return { because: 'returned', reason: 'the incident has returned to normal' };
  return undefined;
}

export type WithdrawableMessage = Pick<NotifyEffect, 'eventSeq' | 'type' | 'channel' | 'target' | 'tier' | 'at' | 'incident'>;

export interface MessageWithdrawal {
  /** The incident with the withdrawal on the message's entry (the same object when it was recorded before). */
  readonly incident: Incident;
  readonly withdrawn: WithdrawnMessage;
  /** Recorded by an earlier attempt of the same message. */
  readonly before: boolean;
}

/** The withdrawal of this message on record, if any. */
export function recordedWithdrawal(incident: Pick<Incident, 'notifications'>, message: WithdrawableMessage): WithdrawnMessage | undefined {
  const target = `${message.channel}:${message.target}`;
  for (const entry of incident.notifications) {
    if (entry.eventSeq !== message.eventSeq) continue;
    const found = entry.withdrawn?.find((w) => w.target === target && w.tier === message.tier);
    if (found !== undefined) return found;
  }
  return undefined;
}

/**
 * Judges a queued message on the incident now: undefined when it still goes; else the incident with the message
 * recorded as withdrawn on its entry (an entry the bounded record has dropped meanwhile is written again for it).
 * A message recorded before stays withdrawn, whatever the incident says now, and is not recorded twice.
 * `attemptedAt`: an earlier attempt began then and ended without the channel's answer; the record says the message
 * may have reached its target then, and that it is not sent again.
 */
export function withdrawMessage(incident: Incident, message: WithdrawableMessage, now: Date, attemptedAt?: Date): MessageWithdrawal | undefined {
  const earlier = recordedWithdrawal(incident, message);
  if (earlier !== undefined) return { incident, withdrawn: earlier, before: true };
  const why = withdrawnBecause(message, incident, now.getTime());
  if (why === undefined) return undefined;
  const withdrawn: WithdrawnMessage = {
    target: `${message.channel}:${message.target}`,
    tier: message.tier,
    at: now.toISOString(),
    because: why.because,
    reason: attemptedAt === undefined ? why.reason : `${why.reason}; not sent again (an attempt begun at ${attemptedAt.toISOString()} ended without an answer and may have reached it)`,
    ...(attemptedAt !== undefined && { attemptedAt: attemptedAt.toISOString() }),
  };
  const notifications: NotifiedEntry[] = [...incident.notifications];
  const at = notifications.findIndex((e) => e.eventSeq === message.eventSeq);
  if (at >= 0) {
    const entry = notifications[at]!;
    notifications[at] = { ...entry, withdrawn: [...(entry.withdrawn ?? []), withdrawn] };
  } else {
    notifications.push({ kind: 'notified', at: message.at, type: message.type, tier: message.tier, eventSeq: message.eventSeq, targets: [withdrawn.target], reason: message.incident.reason, withdrawn: [withdrawn] });
    if (notifications.length > NOTIFICATION_LIMIT) notifications.splice(1, notifications.length - NOTIFICATION_LIMIT);
  }
  return { incident: { ...incident, notifications }, withdrawn, before: false };
}
