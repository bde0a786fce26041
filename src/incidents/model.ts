/**
 * Incidents and what the engine hands back. States use the alarm-management vocabulary of ISA-18.2 /
 * IEC 62682: an incident is active or returned to normal, acknowledged or unacknowledged, may be shelved until a
 * time, and is finally closed. Everything here is plain JSON so that the store can keep it as it is.
 */
import { foundByWords, subjectOf, type Finding, type IncidentKind, type Severity } from '../domain/finding.ts';
import type { Measurand } from '../domain/measurands.ts';
import type { LimitForecast } from '../analysis/forecast/model.ts';

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

export type { ChannelKind } from '../domain/escalationConfig.ts';
import type { ChannelKind } from '../domain/escalationConfig.ts';

export interface Acknowledgement {
  readonly by: string;
  readonly at: string;
  readonly note?: string;
  /** Through a signed e-mail link: the address the link was sent to (`by` is the name typed on the page). */
  readonly recipient?: string;
  /** The credential presented: an API token's role and fingerprint, or the e-mail link and its recipient. */
  readonly credential?: string;
  /** What was acknowledged: evidence beyond it (a higher severity, a new measurand) withdraws the acknowledgement. */
  readonly severity: Severity;
  readonly measurands: readonly Measurand[];
}

export interface Shelving {
  readonly by: string;
  readonly at: string;
  readonly until: string;
  readonly reason: string;
}

/** Every way an incident closes (ClosedHow), for the published schemas. */
export const CLOSED_HOWS = ['acknowledged-and-returned', 'resolved', 'returned-unannounced', 'withdrawn', 'sample-verdict'] as const satisfies readonly ClosedHow[];
/** Every word on a sample that can close an incident (ClosingVerdict). */
export const CLOSING_VERDICTS = ['confirmed', 'rejected'] as const satisfies readonly ClosingVerdict[];

export type ClosedHow =
  /** Returned to normal and acknowledged, in either order. */
  | 'acknowledged-and-returned'
  /** Closed by hand with a note. */
  | 'resolved'
  /** Only ever seen in quiet backfill, so nobody was asked to acknowledge it. */
  | 'returned-unannounced'
  /** A late or corrected result changed the history so that this incident no longer stands; see the incident that replaced it. */
  | 'withdrawn'
  /**
   * A responder answered it: the sample that opened it, put in doubt, was judged (`sampleId`, `verdict`, `by`; `at`:
   * when the word was given) — rejected, or, for a sampling incident, confirmed as genuine — so it no longer stands.
   */
  | 'sample-verdict';

export interface Closure {
  readonly at: string;
  readonly how: ClosedHow;
  readonly by?: string;
  readonly note?: string;
  /** With `sample-verdict`: the sample judged. */
  readonly sampleId?: string;
  /** With `sample-verdict`: the word that closed it. */
  readonly verdict?: ClosingVerdict;
}

/** The words on a sample in doubt that can close an incident (see ClosedHow `sample-verdict`). */
export type ClosingVerdict = 'confirmed' | 'rejected';

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
      /** For the `sampling` family: which check (absent in entries recorded before it was kept). */
      readonly check?: Finding['check'];
      readonly direction?: 'up' | 'down';
      readonly severity: Severity;
      readonly previousSeverity?: Severity;
      readonly explanation?: string;
    }
  | {
      readonly kind: 'returned';
      readonly at: string;
      readonly sampleId: string;
      /** Consecutive samples without findings that returned it (`incidents.returnAfterSamples` when it returned); absent from entries recorded before it was kept. */
      readonly cleanSamples?: number;
    }
  | { readonly kind: 'active-again'; readonly at: string; readonly sampleId: string; readonly reopened: boolean }
  | { readonly kind: 'acknowledged'; readonly at: string; readonly by: string; readonly note?: string; readonly recipient?: string; readonly credential?: string }
  | { readonly kind: 'unacknowledged'; readonly at: string; readonly reason: string }
  | { readonly kind: 'shelved'; readonly at: string; readonly by: string; readonly until: string; readonly reason: string }
  | { readonly kind: 'unshelved'; readonly at: string; readonly by?: string }
  | { readonly kind: 'closed'; readonly at: string; readonly how: ClosedHow; readonly by?: string; readonly note?: string; readonly sampleId?: string; readonly verdict?: ClosingVerdict }
  | { readonly kind: 'note'; readonly at: string; readonly by: string; readonly note: string }
  | {
      /** A responder's word on a sample of this incident that a sampling finding put in doubt (`at`: when it was given). */
      readonly kind: 'sample-verdict';
      readonly at: string;
      readonly sampleId: string;
      readonly verdict: SampleVerdict;
      readonly by: string;
    };

/**
 * What a responder says of a sample in doubt: `confirmed` (genuine: back into the trend), `rejected` (wrong: kept out
 * for good) or `withdrawn` (an earlier word taken back: the sampling check judges the sample again); of a sample at
 * which the change detectors signal a rise: `usual-rate` (the rate is the component's usual one: its detectors learn
 * a new baseline from there; analysis/model.ts SampleMark).
 */
export type SampleVerdict = 'confirmed' | 'rejected' | 'withdrawn' | 'usual-rate';

/** What had changed when a queued message was about to go out (see `withdrawnBecause` in withdrawal.ts). */
export type WithdrawnBecause = 'acknowledged' | 'shelved' | 'closed' | 'returned';

/** One message of an event that was not sent: by the time it was about to go out, the incident had changed. */
export interface WithdrawnMessage {
  /** `channel:target`, one of the entry's `targets`. */
  readonly target: string;
  readonly tier: number;
  /** When the notify worker held it back. */
  readonly at: string;
  readonly because: WithdrawnBecause;
  /** In full, as the worker logs it: "the incident was acknowledged by R. Okafor at …". */
  readonly reason: string;
  /**
   * When an earlier attempt of the message began that ended without the channel's answer (its worker stopped, or the
   * receiver took the message but did not answer in time): the message may have reached the target then. Absent when
   * no attempt had begun, or every earlier one was refused before anything was handed over.
   */
  readonly attemptedAt?: string;
}

/** One message event: who was told what, when. The annunciation's record, kept beside the verdict's timeline. */
export interface NotifiedEntry {
  readonly kind: 'notified';
  /** Processing time of the event. */
  readonly at: string;
  readonly type: IncidentEventType;
  readonly tier: number;
  readonly eventSeq: number;
  /** `channel:target` of every message queued; empty when the policy names nobody for this event. */
  readonly targets: readonly string[];
  readonly reason: string;
  /** The messages of `targets` not sent after all, each with why; absent while none was held back. */
  readonly withdrawn?: readonly WithdrawnMessage[];
}

/** What the annunciation has passed on of the verdict so far, so that it tells each change once. */
export interface Told {
  /** `at` of the acknowledgement last told (or cancelled escalations for); null when none. */
  readonly acknowledgedAt: string | null;
  /** sampleId of the return to normal last told; null when none. */
  readonly returnedAt: string | null;
  /** The closing was passed on (told to everyone told of the incident); still set after a reopening until the reopening is told (escalation.ts). */
  readonly closed: boolean;
  /** `until` of the shelving whose escalations were last cancelled; null when none. */
  readonly shelvedUntil: string | null;
}

export interface Incident {
  /** `unit/component[/measurand|/sampling]@openingSampleId`: the same history gives the same id, live or in replay. */
  readonly id: string;
  /** `unit/component[/measurand|/sampling]`: at most one incident per key is open. */
  readonly key: string;
  /** A machine incident (wear, condition, cleanliness) or a sampling incident (sampling and data faults). */
  readonly kind: IncidentKind;
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
  /** Advisory and held findings of the same sample, shown beside the evidence the way a lab report shows them. */
  readonly context: readonly Finding[];
  /**
   * Of an incident the history no longer produces (closed as `withdrawn` or `sample-verdict`): the evidence it stood
   * on, which no longer holds, set aside so that nothing shows it as current (`evidence` is then empty). Absent
   * otherwise. `severity` and `peakSeverity` stay as they were told.
   */
  readonly withdrawnEvidence?: readonly Finding[];
  /**
   * How long until the evidence's measurands cross their limits, as of the evidence's sample (analysis/forecast);
   * absent when forecasts are disabled. A forecast assumes the present trend continues.
   */
  readonly forecast?: readonly LimitForecast[];
  readonly acknowledged: Acknowledgement | null;
  readonly shelved: Shelving | null;
  readonly closed: Closure | null;
  /** Consecutive samples without findings. */
  readonly cleanSteps: number;
  /** Samples since the return to normal or the closing, for the reopen window; null while active. */
  readonly stepsSinceEnd: number | null;
  /** A sample of this incident arrived live (not as backfill): someone is asked to acknowledge it. */
  readonly live: boolean;
  /** The latest sample of the incident arrived live. */
  readonly lastLive: boolean;
  /** The verdict's record: findings, returns, operator actions. Depends only on the results and the actions. */
  readonly timeline: readonly TimelineEntry[];

  // The annunciation: what was told to whom. Never rewound; a late result that changes the verdict is told as news.
  /** What notifications have told so far: new evidence is what goes beyond it. Null until first announced. */
  readonly announced: { readonly severity: Severity; readonly measurands: readonly Measurand[] } | null;
  /** Counts the incident's events; part of every effect key, so a redelivered input yields the same keys. */
  readonly eventSeq: number;
  readonly escalation: EscalationProgress;
  readonly told: Told;
  readonly notifications: readonly NotifiedEntry[];
}

export type IncidentSummary = Omit<Incident, 'timeline' | 'notifications'>;

/** Where a step sorts in the history (see analysis/fold: time, unit hours, sampleId). */
export interface StepPosition {
  readonly sampleId: string;
  readonly time: number;
  readonly unitHours?: number;
}

/**
 * An operator's (or the shelving clock's) action, logged with the step that was the latest when it was taken, so that
 * folding the history again after a late result puts it back in the same place.
 */
export interface LoggedAction {
  readonly seq: number;
  /** The latest step judged when the action was taken; null before any. */
  readonly after: StepPosition | null;
  readonly action: RecordedAction;
}

/** An action as the log keeps it (plain JSON). */
export type RecordedAction =
  | { readonly kind: 'acknowledge'; readonly incidentId: string; readonly by: string; readonly at: string; readonly note?: string; readonly recipient?: string; readonly credential?: string }
  | { readonly kind: 'shelve'; readonly incidentId: string; readonly by: string; readonly at: string; readonly until: string; readonly reason: string }
  | { readonly kind: 'unshelve'; readonly incidentId: string; readonly by?: string; readonly at: string }
  | { readonly kind: 'resolve'; readonly incidentId: string; readonly by: string; readonly at: string; readonly note: string }
  | { readonly kind: 'note'; readonly incidentId: string; readonly by: string; readonly at: string; readonly note: string }
  | { readonly kind: 'sample-verdict'; readonly incidentId: string; readonly by: string; readonly at: string; readonly sampleId: string; readonly verdict: SampleVerdict };

/** The incident state of one component: its current (or most recently closed) incident per key. */
export interface ComponentIncidents {
  readonly unit: string;
  readonly component: string;
  /** The last step judged; steps at or before it are not judged again (redelivery). */
  readonly judged: StepPosition | null;
  readonly incidents: Readonly<Record<string, Incident>>;
  /** Actions, oldest first (the latest ACTION_LOG_LIMIT). */
  readonly actions: readonly LoggedAction[];
  /** Sequence number of the last action logged. */
  readonly actionSeq: number;
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
  /** How it was closed, when it is (absent from messages queued before it was carried). */
  readonly closure?: Closure;
  readonly openedAt: string;
  readonly lastSampleId: string;
  readonly lastSampledAt: string;
  /** Highest escalation tier told; 0 before the first escalation. */
  readonly tier: number;
  readonly findings: readonly Finding[];
  /**
   * The advisory and held findings of the evidence's sample (Incident.context): shown beside the evidence, never part
   * of it, so they take no part in the severity. Absent from messages queued before they were carried.
   */
  readonly advisoryFindings?: readonly Finding[];
  /** Time-to-limit forecasts of the evidence's measurands (see Incident.forecast). */
  readonly forecast?: readonly LimitForecast[];
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
  /** Closed incidents that a new one of the same key replaced in the state: their records stay as they are. */
  readonly archived?: readonly Incident[];
}

export function emptyComponentIncidents(unit: string, component: string): ComponentIncidents {
  return { unit, component, judged: null, incidents: {}, actions: [], actionSeq: 0 };
}

export function summarize(incident: Incident): IncidentSummary {
  const { timeline: _timeline, notifications: _notifications, ...summary } = incident;
  return summary;
}

/** The verdict's timeline and the annunciation's record in one list for people, ordered by time (stable). */
export function mergedTimeline(incident: Pick<Incident, 'timeline' | 'notifications'>): Array<TimelineEntry | NotifiedEntry> {
  const all: Array<TimelineEntry | NotifiedEntry> = [...incident.timeline, ...incident.notifications];
  return all.map((e, i) => ({ e, i, t: Date.parse(e.at) })).sort((a, b) => a.t - b.t || a.i - b.i).map((x) => x.e);
}

/**
 * The state in the standards' words, for people. `time` writes the end of a shelving (default: the stored ISO 8601
 * text); the command line passes the site zone's format, as for every time it shows.
 */
export function describeState(incident: Pick<Incident, 'alarm' | 'acknowledged' | 'shelved' | 'closed'>, time: (iso: string) => string = (iso) => iso): string {
  if (incident.closed !== null) return 'closed';
  const parts = [incident.alarm === 'active' ? 'active' : 'returned to normal', incident.acknowledged ? 'acknowledged' : 'unacknowledged'];
  if (incident.shelved !== null) parts.push(`shelved until ${time(incident.shelved.until)}`);
  return parts.join(', ');
}

const VERDICT_WORDS: Record<SampleVerdict, (sampleId: string, by: string) => string> = {
  confirmed: (sampleId, by) => `sample ${sampleId} confirmed by ${by}: genuine, back into the trend`,
  rejected: (sampleId, by) => `sample ${sampleId} rejected by ${by}: wrong, kept out of the trend`,
  withdrawn: (sampleId, by) => `verdict on sample ${sampleId} taken back by ${by}: the sampling check judges it again`,
  'usual-rate': (sampleId, by) => `${by}: the wear rate signalled at sample ${sampleId} is this component's usual one; its change detectors learn a new baseline from there`,
};

/** A responder's word on a sample, as a timeline holds it. */
export type SampleVerdictEntry = Extract<TimelineEntry, { kind: 'sample-verdict' }>;

/** The latest word on the sample in the timeline (the one that stands, `withdrawn` included); undefined when none. */
export function lastWordOn(timeline: readonly TimelineEntry[], sampleId: string): SampleVerdictEntry | undefined {
  return timeline.findLast((e): e is SampleVerdictEntry => e.kind === 'sample-verdict' && e.sampleId === sampleId);
}

/** A sample verdict in the timeline, for people: who said what of which sample (the board carries a copy). */
export function sampleVerdictText(entry: Pick<Extract<TimelineEntry, { kind: 'sample-verdict' }>, 'sampleId' | 'verdict' | 'by'>): string {
  return VERDICT_WORDS[entry.verdict](entry.sampleId, entry.by);
}

const CLOSED_WORDS: Record<Exclude<ClosedHow, 'sample-verdict'>, string> = {
  'acknowledged-and-returned': 'returned to normal and acknowledged',
  resolved: 'resolved by hand',
  'returned-unannounced': 'returned to normal before anyone was told',
  withdrawn: 'withdrawn: a late or corrected result changed the history so that this incident no longer stands',
};

const CLOSING_VERDICT_WORDS: Record<ClosingVerdict, (by: string) => string> = {
  rejected: (by) => `rejected by ${by} (sample judged wrong; kept out of the trend)`,
  confirmed: (by) => `confirmed as genuine by ${by} (back into the trend)`,
};

/**
 * Why an incident was closed, for people and in the closing message: "resolved by hand", "closed: sample QX-1-026
 * rejected by Jo Sampler (sample judged wrong; kept out of the trend)". The board carries a copy.
 */
export function closureText(closure: Pick<Closure, 'how' | 'by' | 'sampleId' | 'verdict'>): string {
  if (closure.how !== 'sample-verdict') return CLOSED_WORDS[closure.how];
  const by = closure.by ?? 'a responder';
  const words = closure.verdict === undefined ? `judged by ${by}` : CLOSING_VERDICT_WORDS[closure.verdict](by);
  return `closed: sample ${closure.sampleId ?? '(unknown)'} ${words}`;
}

/** How a closing message starts its account of what no longer holds (see `withdrawnEvidenceText`). */
export const NO_LONGER_HOLD = 'the findings it stood on no longer hold';

/**
 * What a closed incident stood on and no longer holds (Incident.withdrawnEvidence), for people and in the closing
 * message: "the findings it stood on no longer hold: Fe (limit, caution) of sample D-16-2". Empty when there is
 * nothing set aside. The board carries a copy.
 */
export function withdrawnEvidenceText(findings: readonly Pick<Finding, 'measurand' | 'rule' | 'check' | 'severity' | 'sampleId'>[] | undefined): string {
  const listed = findingsOfSamples(findings);
  return listed === '' ? '' : `${NO_LONGER_HOLD}: ${listed}`;
}

/** How a closing message starts its account of sampling findings a rejected sample bore out (see `borneOutText`). */
export const BORNE_OUT = 'the sampling findings it was raised on were borne out';

/**
 * Of an incident closed because a responder rejected its sample: the sampling findings that put the sample in doubt,
 * which the word agreed with, in the closing message: "the sampling findings it was raised on were borne out: sample
 * (duplicated bottle, caution) of sample GB-8-L1". Empty when there are none.
 */
export function borneOutText(findings: readonly Pick<Finding, 'measurand' | 'rule' | 'check' | 'severity' | 'sampleId'>[] | undefined): string {
  const listed = findingsOfSamples(findings);
  return listed === '' ? '' : `${BORNE_OUT}: ${listed}`;
}

/** "Fe (limit, caution), sample (duplicated bottle, caution) of sample D-16-2": a sample-wide finding by its check in words. */
function findingsOfSamples(findings: readonly Pick<Finding, 'measurand' | 'rule' | 'check' | 'severity' | 'sampleId'>[] | undefined): string {
  if (findings === undefined || findings.length === 0) return '';
  const samples = [...new Set(findings.map((f) => f.sampleId))];
  return samples.map((id) => `${findings.filter((f) => f.sampleId === id).map((f) => `${subjectOf(f)} (${foundByWords(f)}, ${f.severity})`).join(', ')} of sample ${id}`).join('; ');
}

const WITHDRAWN_WORDS: Record<WithdrawnBecause, string> = { acknowledged: 'acknowledged', shelved: 'shelved', closed: 'closed', returned: 'returned to normal' };

/**
 * A message event's targets for people, each one held back marked so, with why: "webhook:duty-manager (not sent:
 * acknowledged meanwhile)", or, when an earlier attempt ended without an answer, "(not sent again: … meanwhile; an
 * attempt begun at … may have reached it)". The board carries a copy.
 */
export function notifiedTargetsText(entry: Pick<NotifiedEntry, 'targets' | 'withdrawn'>): string {
  return entry.targets
    .map((target) => {
      const held = entry.withdrawn?.find((w) => w.target === target);
      if (held === undefined) return target;
      if (held.attemptedAt === undefined) return `${target} (not sent: ${WITHDRAWN_WORDS[held.because]} meanwhile)`;
      return `${target} (not sent again: ${WITHDRAWN_WORDS[held.because]} meanwhile; an attempt begun at ${held.attemptedAt} may have reached it)`;
    })
    .join(', ');
}

export function findIncident(state: ComponentIncidents, incidentId: string): Incident | undefined {
  return Object.values(state.incidents).find((i) => i.id === incidentId);
}
