/** What an incident operation changed, read off the timelines: every entry the operation appended. */
import type { Measurand } from '../domain/measurands.ts';
import { describeState, type Closure, type ComponentIncidents, type Incident, type NotifiedEntry, type TimelineEntry } from '../incidents/model.ts';

/** One new entry of an incident's timeline (or of its notifications), with the incident it belongs to. */
export interface IncidentChange {
  readonly incidentId: string;
  readonly unit: string;
  readonly component: string;
  readonly measurand?: Measurand;
  /** The incident's state after the change, in words ("active, unacknowledged", "closed"). */
  readonly state: string;
  /** The incident's severity after the change (for one whose evidence was set aside, the one last told). */
  readonly severity: string;
  /**
   * How the incident was closed, when it is closed after the change (`state` "closed"): every change of an incident
   * closed because its evidence was set aside, the closing's own and those after it (the closing message's
   * `notified`, say), is shown with no severity standing (liveEvent.ts).
   */
  readonly closed?: Closure;
  readonly entry: TimelineEntry | NotifiedEntry;
}

export function incidentChanges(before: ComponentIncidents, after: ComponentIncidents, extra: readonly Incident[] = []): IncidentChange[] {
  const known = new Map(Object.values(before.incidents).map((i) => [i.id, i]));
  const out: IncidentChange[] = [];
  const incidents = [...Object.keys(after.incidents).sort().map((k) => after.incidents[k]!), ...extra];
  for (const incident of incidents) {
    const state = describeState(incident);
    const old = known.get(incident.id);
    for (const entry of [...newEntries(old?.timeline ?? [], incident.timeline), ...newEntries(old?.notifications ?? [], incident.notifications)]) {
      out.push({
        incidentId: incident.id,
        unit: incident.unit,
        component: incident.component,
        ...(incident.measurand !== undefined && { measurand: incident.measurand }),
        state,
        severity: incident.severity,
        ...(incident.closed !== null && { closed: incident.closed }),
        entry,
      });
    }
  }
  return out;
}

/**
 * Entries of `now` that `before` did not have. Timelines grow at the end; a bounded one drops entries after its first,
 * and a history folded again may rewrite it: entries are matched by content, so only the new ones are reported.
 */
function newEntries<T>(before: readonly T[], now: readonly T[]): T[] {
  if (before.length <= now.length && (before.length === 0 || JSON.stringify(before.at(-1)) === JSON.stringify(now[before.length - 1]))) return now.slice(before.length);
  const seen = new Map<string, number>();
  for (const e of before) {
    const k = JSON.stringify(e);
    seen.set(k, (seen.get(k) ?? 0) + 1);
  }
  return now.filter((e) => {
    const k = JSON.stringify(e);
    const n = seen.get(k) ?? 0;
    if (n === 0) return true;
    seen.set(k, n - 1);
    return false;
  });
}
