/**
 * What live views (the board's event stream, the OPC UA server) are told: a stored result, or one change of an
 * incident. Best effort: a view that reconnects reloads, so nothing depends on an event arriving.
 */
import type { IncidentChange } from './incidentChanges.ts';

export type LiveEvent =
  | {
      readonly type: 'incident';
      readonly incidentId: string;
      readonly unit: string;
      readonly component: string;
      readonly severity: string;
      /** The incident's state after the change, in words. */
      readonly state: string;
      /** What happened: the timeline entry's kind ("opened", "acknowledged", "finding", ...). */
      readonly change: string;
      readonly at: string;
    }
  | {
      readonly type: 'result';
      readonly unit: string;
      readonly component: string;
      readonly sampleId: string;
      readonly sampledAt: string;
    };

/** The live event for one incident change. */
export function incidentEvent(change: IncidentChange): LiveEvent {
  return {
    type: 'incident',
    incidentId: change.incidentId,
    unit: change.unit,
    component: change.component,
    severity: change.severity,
    state: change.state,
    change: change.entry.kind,
    at: change.entry.at,
  };
}
