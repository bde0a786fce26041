/**
 * Alarm-flood handling after ISA-18.2 (group, rate-limit, summarise): each target — an e-mail address, a webhook,
 * an MQTT channel — gets at most `maxMessages` messages in a window of `windowMinutes`. Further incidents in the
 * window are held back, not dropped: at the window's end one summary message lists every one of them (id, where,
 * severity, what happened, link), so the person on call sees the flood as one event and can open each incident.
 * Counting is per message (a retried delivery counts once) and shared by every worker process (floodLedger.ts).
 */
import { createHash } from 'node:crypto';
import type { IncidentMessage, IncidentMessageType, MessageSeverity } from './message.ts';
import { ADVISORY_CAUTION } from '../domain/caution.ts';
import type { ChannelKind } from '../domain/escalationConfig.ts';

export interface FloodControlSettings {
  /** Messages per target per window. Default 10. */
  readonly maxMessages: number;
  /** Window length in minutes. Default 10. */
  readonly windowMinutes: number;
}

/** One incident message held back in a flood, as the summary lists it. */
export interface HeldMessage {
  readonly incidentId: string;
  readonly unit: string;
  readonly component: string;
  readonly severity: MessageSeverity;
  readonly type: IncidentMessageType;
  readonly url: string;
  readonly at: string;
}

/** Where the message would have gone: the channel and its target. */
export interface FloodTarget {
  readonly channel: ChannelKind;
  readonly target: string;
}

export interface FloodWindow {
  readonly index: number;
  readonly startsAt: number;
  readonly endsAt: number;
}

export interface FloodSummary extends FloodTarget {
  readonly window: { readonly from: string; readonly until: string };
  readonly maxMessages: number;
  readonly held: readonly HeldMessage[];
}

/** The fixed window `now` falls in (windows are aligned on the epoch, so every process agrees). */
export function floodWindow(now: number, settings: FloodControlSettings): FloodWindow {
  const length = settings.windowMinutes * 60_000;
  const index = Math.floor(now / length);
  return { index, startsAt: index * length, endsAt: (index + 1) * length };
}

/** A stable key for a target and window, fit for Redis keys and job ids. */
export function floodKey(target: FloodTarget, window: number): string {
  return createHash('sha256').update(`${target.channel}\u0000${target.target}\u0000${window}`).digest('hex').slice(0, 32);
}

export function heldMessage(message: IncidentMessage, at: string): HeldMessage {
  const i = message.incident;
  return { incidentId: i.id, unit: i.unit, component: i.component, severity: i.severity, type: message.type, url: i.url, at };
}

const RANK: Record<MessageSeverity, number> = { watch: 0, caution: 1, alarm: 2 };

/** The summary's held messages, most severe first, then in time order. */
export function summaryOrder(held: readonly HeldMessage[]): HeldMessage[] {
  return [...held].sort((a, b) => RANK[b.severity] - RANK[a.severity] || a.at.localeCompare(b.at));
}

/**
 * One line: the messages held back, the components they are about, and how many distinct incidents among them are
 * at alarm. One incident can be held more than once in a window (opened, then escalated), so the alarm figure counts
 * incidents, not messages: otherwise 30 incidents would read as more alarms than components.
 */
export function summaryHeadline(summary: FloodSummary): string {
  const n = summary.held.length;
  const alarms = new Set(summary.held.filter((h) => h.severity === 'alarm').map((h) => h.incidentId)).size;
  const components = new Set(summary.held.map((h) => `${h.unit}/${h.component}`)).size;
  return `Alarm flood: ${n} more incident message${n === 1 ? '' : 's'} on ${components} component${components === 1 ? '' : 's'} held back${alarms > 0 ? ` (${alarms} incident${alarms === 1 ? '' : 's'} at alarm)` : ''}`;
}


/** The summary as a CloudEvent for webhooks and MQTT (`wearshift.incidents.flood-summary`). */
export function floodSummaryEvent(summary: FloodSummary, window: number) {
  return {
    specversion: '1.0' as const,
    id: `flood-summary-${floodKey(summary, window)}`,
    source: '/wearshift/flood-control',
    type: 'wearshift.incidents.flood-summary',
    time: summary.window.until,
    datacontenttype: 'application/json' as const,
    subject: summary.target,
    // `advisory`, as in every incident event: integrators pass it on with what the summary lists.
    data: { headline: summaryHeadline(summary), ...summary, held: summaryOrder(summary.held), advisory: ADVISORY_CAUTION },
  };
}
