/**
 * What live views (the board's event stream, the OPC UA server) are told: a stored result, or one change of an
 * incident. Best effort: a view that reconnects reloads, so nothing depends on an event arriving.
 *
 * Every incident event is made here (`liveIncidentEvent`), whoever sends it: the worker (a change of its evaluation),
 * the notify processor (a queued message withdrawn), a sample verdict, an operator's action. An event about a closed
 * incident says how it was closed (`closed`). An incident closed because its evidence was set aside (`how`
 * `withdrawn`: a late or corrected result took its findings away; `sample-verdict`: a responder's word on the sample
 * in doubt answered it) stands on nothing and asks nothing: every event about it, the closing and every one after
 * (the closing message's `notified`, a message withdrawn, a later word on its sample), has severity `none`, as in the
 * e-mail's `X-Wearshift-Severity` and on the acknowledgement page, with the severity last announced beside it.
 */
import { describeState, type ClosedHow, type ClosingVerdict, type Closure, type Incident } from '../incidents/model.ts';
import type { IncidentChange } from './incidentChanges.ts';

/** The severity of an incident closed because its evidence was set aside: nothing of it stands. */
export const NO_SEVERITY = 'none';

/** How an incident was closed, as the webhook's `data.incident.closed` gives it (without the note). */
export interface LiveClosure {
  readonly how: ClosedHow;
  readonly by?: string;
  /** With `sample-verdict`: the sample judged and the word on it. */
  readonly sampleId?: string;
  readonly verdict?: ClosingVerdict;
}

export type LiveEvent =
  | {
      readonly type: 'incident';
      readonly incidentId: string;
      readonly unit: string;
      readonly component: string;
      /**
       * The highest severity of the current evidence; `none` (NO_SEVERITY) on every event about an incident closed
       * because its evidence was set aside.
       */
      readonly severity: string;
      /** With severity `none`: the severity the incident had as last announced, which no longer stands. */
      readonly lastAnnouncedSeverity?: string;
      /** The incident's state after the change, in words. */
      readonly state: string;
      /**
       * What happened: the timeline entry's kind ("opened", "acknowledged", "finding", "notified", "sample-verdict",
       * ...), or "message withdrawn" when a queued message was not sent after all.
       */
      readonly change: string;
      readonly at: string;
      /** On every event about a closed incident (the closing and any after it): how it was closed. */
      readonly closed?: LiveClosure;
    }
  | {
      readonly type: 'result';
      readonly unit: string;
      readonly component: string;
      readonly sampleId: string;
      readonly sampledAt: string;
    };

/** A closing whose evidence was set aside: the incident stands on nothing any more. */
export function setAsideClosing(how: ClosedHow | undefined): boolean {
  return how === 'withdrawn' || how === 'sample-verdict';
}

/** What an incident event is about: the incident as it stands after the change. */
export interface LiveIncidentSubject {
  readonly incidentId: string;
  readonly unit: string;
  readonly component: string;
  /** The incident's severity: the highest of its evidence, or, once the evidence was set aside, the one last told. */
  readonly severity: string;
  /** The incident's state after the change, in words. */
  readonly state: string;
  /** How the incident was closed, when it is closed after the change. */
  readonly closed?: Omit<Closure, 'at'> | null;
}

/**
 * The live event of one change (`change`: what happened, at `at`) of an incident as it stands after it. The one rule
 * for every sender: a closed incident's event says how it was closed, and one closed because its evidence was set
 * aside has severity `none` with the severity last announced beside it.
 */
export function liveIncidentEvent(subject: LiveIncidentSubject, change: string, at: string): LiveEvent {
  const closure = subject.closed ?? undefined;
  const setAside = setAsideClosing(closure?.how);
  return {
    type: 'incident',
    incidentId: subject.incidentId,
    unit: subject.unit,
    component: subject.component,
    severity: setAside ? NO_SEVERITY : subject.severity,
    ...(setAside && { lastAnnouncedSeverity: subject.severity }),
    state: subject.state,
    change,
    at,
    ...(closure !== undefined && { closed: liveClosure(closure) }),
  };
}

/** The live event of a change of `incident` (as it stands after it): a sample verdict, a message withdrawn, an action. */
export function incidentLiveEvent(incident: Pick<Incident, 'id' | 'unit' | 'component' | 'severity' | 'alarm' | 'acknowledged' | 'shelved' | 'closed'>, change: string, at: string): LiveEvent {
  return liveIncidentEvent({ incidentId: incident.id, unit: incident.unit, component: incident.component, severity: incident.severity, state: describeState(incident), closed: incident.closed }, change, at);
}

/**
 * The live event for one incident change of an evaluation. The incident's closure after the evaluation decides, for
 * every entry the evaluation added; a closing entry of an incident open again by the evaluation's end still says how
 * it was closed.
 */
export function incidentEvent(change: IncidentChange): LiveEvent {
  const closed = change.closed ?? (change.entry.kind === 'closed' ? change.entry : undefined);
  return liveIncidentEvent({ ...change, closed }, change.entry.kind, change.entry.at);
}

function liveClosure(closure: Omit<Closure, 'at'>): LiveClosure {
  return {
    how: closure.how,
    ...(closure.by !== undefined && { by: closure.by }),
    ...(closure.sampleId !== undefined && { sampleId: closure.sampleId }),
    ...(closure.verdict !== undefined && { verdict: closure.verdict }),
  };
}
