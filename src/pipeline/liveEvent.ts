/**
 * What live views (the board's event stream, the OPC UA server) are told: a stored result, or one change of an
 * incident. Best effort: a view that reconnects reloads, so nothing depends on an event arriving.
 *
 * The event of a closing says how the incident was closed (`closed`). A closing whose evidence was set aside (`how`
 * `withdrawn`: a late or corrected result took its findings away; `sample-verdict`: a responder's word on the sample
 * in doubt answered it) stands on nothing and asks nothing: its severity is `none`, as in the e-mail's
 * `X-Wearshift-Severity` and on the acknowledgement page, with the severity last announced beside it.
 */
import type { ClosedHow, ClosingVerdict, TimelineEntry } from '../incidents/model.ts';
import type { IncidentChange } from './incidentChanges.ts';

/** The severity of a closing whose evidence was set aside: nothing of the incident stands. */
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
       * The highest severity of the current evidence; `none` (NO_SEVERITY) on the closing of an incident whose evidence
       * was set aside.
       */
      readonly severity: string;
      /** With severity `none`: the severity the incident had as last announced, which no longer stands. */
      readonly lastAnnouncedSeverity?: string;
      /** The incident's state after the change, in words. */
      readonly state: string;
      /** What happened: the timeline entry's kind ("opened", "acknowledged", "finding", ...). */
      readonly change: string;
      readonly at: string;
      /** On the event of a closing (`change` "closed"): how it was closed. */
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

/** The live event for one incident change. */
export function incidentEvent(change: IncidentChange): LiveEvent {
  const closing = change.entry.kind === 'closed' ? change.entry : undefined;
  const setAside = setAsideClosing(closing?.how);
  return {
    type: 'incident',
    incidentId: change.incidentId,
    unit: change.unit,
    component: change.component,
    severity: setAside ? NO_SEVERITY : change.severity,
    ...(setAside && { lastAnnouncedSeverity: change.severity }),
    state: change.state,
    change: change.entry.kind,
    at: change.entry.at,
    ...(closing !== undefined && { closed: liveClosure(closing) }),
  };
}

function liveClosure(entry: Extract<TimelineEntry, { kind: 'closed' }>): LiveClosure {
  return {
    how: entry.how,
    ...(entry.by !== undefined && { by: entry.by }),
    ...(entry.sampleId !== undefined && { sampleId: entry.sampleId }),
    ...(entry.verdict !== undefined && { verdict: entry.verdict }),
  };
}
