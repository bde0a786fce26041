/**
 * Incidents and what the engine hands back. States use the alarm-management vocabulary of ISA-18.2 /
 * IEC 62682: an incident is active or returned to normal, acknowledged or unacknowledged, may be shelved until a
 * time, and is finally closed. Everything here is plain JSON so that the store can keep it as it is.
 */
import type { Finding, Severity } from '../domain/finding.ts';
import type { Measurand } from '../domain/measurands.ts';

export type AlarmCondition = 'active' | 'returned';

export const INCIDENT_EVENT_TYPES = [
  'wearshift.incident.opened',
  'wearshift.incident.updated',
  'wearshift.incident.escalated',
  'wearshift.incident.acknowledged',
  'wearshift.incident.returned',
  'wearshift.incident.closed',
] as const;
export type IncidentEventType = (typeof INCIDENT_EVENT_TYPES)[number];

export type ChannelKind = 'email' | 'webhook' | 'mqtt';

export interface Acknowledgement {
  readonly by: string;
  readonly at: string;
  readonly note?: string;
}

export interface Shelving {
  readonly by: string;
  readonly at: string;
  readonly until: string;
  readonly reason: string;
}

export type ClosedHow =
  /** Returned to normal and acknowledged, in either order. */
  | 'acknowledged-and-returned'
  /** Closed by hand with a note. */
  | 'resolved'
  /** Only ever seen in quiet backfill, so nobody was asked to acknowledge it. */
  | 'returned-unannounced';

export interface Closure {
  readonly at: string;
  readonly how: ClosedHow;
  readonly by?: string;
  readonly note?: string;
}

/** Where an incident's escalation chain stands. A chain starts when the incident is announced to tier 0. */
export interface EscalationProgress {
  readonly policy: string | null;
  readonly startedAt: string | null;
  /** The event type that tier 0 receives: `opened` for a new incident, `updated` for new evidence. */
  readonly firstType: IncidentEventType;
  readonly nextTier: number;
  /** Highest tier told in this chain; -1 before tier 0 is told. */
  readonly reachedTier: number;
  readonly lastSentAt: string | null;
  /** When the pending escalation check is due; null when none is pending. */
  readonly dueAt: string | null;
}

export type TimelineEntry =
  | { readonly kind: 'opened'; readonly at: string; readonly sampleId: string; readonly severity: Severity }
  | {
      readonly kind: 'finding';
      readonly at: string;
      readonly sampleId: string;
      readonly change: 'raised' | 'severity-changed' | 'cleared';
      readonly measurand: Measurand;
      readonly rule: Finding['rule'];
      readonly direction?: 'up' | 'down';
      readonly severity: Severity;
      readonly previousSeverity?: Severity;
      readonly explanation?: string;
    }
  | { readonly kind: 'returned'; readonly at: string; readonly sampleId: string }
  | { readonly kind: 'active-again'; readonly at: string; readonly sampleId: string; readonly reopened: boolean }
  | { readonly kind: 'acknowledged'; readonly at: string; readonly by: string; readonly note?: string }
  | { readonly kind: 'unacknowledged'; readonly at: string; readonly reason: string }
  | { readonly kind: 'shelved'; readonly at: string; readonly by: string; readonly until: string; readonly reason: string }
  | { readonly kind: 'unshelved'; readonly at: string; readonly by?: string }
  | { readonly kind: 'closed'; readonly at: string; readonly how: ClosedHow; readonly by?: string; readonly note?: string }
  | { readonly kind: 'note'; readonly at: string; readonly by: string; readonly note: string }
  | {
      readonly kind: 'notified';
      readonly at: string;
      readonly type: IncidentEventType;
      readonly tier: number;
      readonly eventSeq: number;
      /** `channel:target` of every message sent; empty when the policy names nobody for this event. */
      readonly targets: readonly string[];
      readonly reason: string;
    };

export interface Incident {
  /** `unit/component[/measurand]@openingSampleId`: the same history gives the same id, live or in replay. */
  readonly id: string;
  /** `unit/component[/measurand]`: at most one incident per key is open. */
  readonly key: string;
  readonly unit: string;
  readonly component: string;
  readonly group: string;
  readonly measurand?: Measurand;
  /** Sample time of the opening sample. */
  readonly openedAt: string;
  readonly openedBySampleId: string;
  readonly lastSampleId: string;
  readonly lastSampledAt: string;
  readonly alarm: AlarmCondition;
  /** Highest severity of `evidence`. */
  readonly severity: Severity;
  readonly peakSeverity: Severity;
  /** The findings of the latest sample; empty when that sample was clean. */
  readonly activeFindings: readonly Finding[];
  /** The findings of the latest sample that had any: what the incident is about. */
  readonly evidence: readonly Finding[];
  readonly acknowledged: Acknowledgement | null;
  readonly shelved: Shelving | null;
  readonly closed: Closure | null;
  /** Consecutive samples without findings. */
  readonly cleanSteps: number;
  /** Samples since the return to normal or the closing, for the reopen window; null while active. */
  readonly stepsSinceEnd: number | null;
  /** What notifications have told so far: new evidence is what goes beyond it. Null until first announced. */
  readonly announced: { readonly severity: Severity; readonly measurands: readonly Measurand[] } | null;
  /** Counts the incident's events; part of every effect key, so a redelivered input yields the same keys. */
  readonly eventSeq: number;
  readonly escalation: EscalationProgress;
  readonly timeline: readonly TimelineEntry[];
}

export type IncidentSummary = Omit<Incident, 'timeline'>;

/** The last step judged, so that redelivered steps change nothing. */
export interface JudgedSteps {
  readonly sampledAt: string;
  /** Samples at exactly `sampledAt` already judged (ties in sample time are possible). */
  readonly sampleIds: readonly string[];
  readonly lastSampleId: string;
  /** The last step's findings as judged; a re-evaluation that changes them is applied as a revision. */
  readonly lastFingerprint: string;
}

/** The incident state of one component: its current (or most recently closed) incident per key. */
export interface ComponentIncidents {
  readonly unit: string;
  readonly component: string;
  readonly judged: JudgedSteps | null;
  readonly incidents: Readonly<Record<string, Incident>>;
}

/** The incident as a message shows it, frozen at the moment of the event. */
export interface IncidentSnapshot {
  readonly id: string;
  readonly unit: string;
  readonly component: string;
  readonly group: string;
  readonly measurand?: Measurand;
  readonly severity: Severity;
  readonly peakSeverity: Severity;
  /** For people: e.g. "active, unacknowledged". */
  readonly state: string;
  readonly alarm: AlarmCondition;
  readonly acknowledgedBy?: string;
  readonly shelvedUntil?: string;
  readonly closed: boolean;
  readonly openedAt: string;
  readonly lastSampleId: string;
  readonly lastSampledAt: string;
  /** Highest escalation tier told; 0 before the first escalation. */
  readonly tier: number;
  readonly findings: readonly Finding[];
  /** One sentence: why this message goes out. */
  readonly reason: string;
}

export interface NotifyEffect {
  readonly kind: 'notify';
  /** `${incidentId}:${eventSeq}:${channel}:${tier}:${target}`; the same input always yields the same key. */
  readonly key: string;
  readonly incidentId: string;
  readonly eventSeq: number;
  readonly type: IncidentEventType;
  readonly channel: ChannelKind;
  /** An e-mail address or the name of a webhook or MQTT channel. */
  readonly target: string;
  readonly tier: number;
  readonly at: string;
  readonly incident: IncidentSnapshot;
}

export interface ScheduleEscalationEffect {
  readonly kind: 'schedule-escalation';
  readonly key: string;
  readonly incidentId: string;
  /** The tier the check will tell, for naming and logs; the check itself finds what is due. */
  readonly tier: number;
  readonly at: string;
  readonly reason: 'tier' | 'repeat' | 'shelving-ends';
}

export interface CancelEscalationsEffect {
  readonly kind: 'cancel-escalations';
  readonly key: string;
  readonly incidentId: string;
  readonly reason: 'acknowledged' | 'shelved' | 'closed';
}

export type IncidentEffect = NotifyEffect | ScheduleEscalationEffect | CancelEscalationsEffect;

export interface IncidentResult {
  readonly state: ComponentIncidents;
  readonly effects: readonly IncidentEffect[];
}

export function emptyComponentIncidents(unit: string, component: string): ComponentIncidents {
  return { unit, component, judged: null, incidents: {} };
}

export function summarize(incident: Incident): IncidentSummary {
  const { timeline: _timeline, ...summary } = incident;
  return summary;
}

/** The state in the standards' words, for people. */
export function describeState(incident: Pick<Incident, 'alarm' | 'acknowledged' | 'shelved' | 'closed'>): string {
  if (incident.closed !== null) return 'closed';
  const parts = [incident.alarm === 'active' ? 'active' : 'returned to normal', incident.acknowledged ? 'acknowledged' : 'unacknowledged'];
  if (incident.shelved !== null) parts.push(`shelved until ${incident.shelved.until}`);
  return parts.join(', ');
}

export function findIncident(state: ComponentIncidents, incidentId: string): Incident | undefined {
  return Object.values(state.incidents).find((i) => i.id === incidentId);
}
