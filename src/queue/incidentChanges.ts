/** What an incident operation changed, read off the timelines: every entry the operation appended. */
import { describeState, type ComponentIncidents } from '../incidents/model.ts';
import type { IncidentChange } from './incidentFeed.ts';

export function incidentChanges(before: ComponentIncidents, after: ComponentIncidents): IncidentChange[] {
  const known = new Map(Object.values(before.incidents).map((i) => [i.id, i.timeline.length]));
  const out: IncidentChange[] = [];
  for (const key of Object.keys(after.incidents).sort()) {
    const incident = after.incidents[key]!;
    const state = describeState(incident);
    for (const entry of incident.timeline.slice(known.get(incident.id) ?? 0)) {
      out.push({
        incidentId: incident.id,
        unit: incident.unit,
        component: incident.component,
        ...(incident.measurand !== undefined && { measurand: incident.measurand }),
        state,
        severity: incident.severity,
        entry,
      });
    }
  }
  return out;
}
