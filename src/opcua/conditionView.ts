/**
 * How an incident looks as an OPC UA alarm condition (IEC 62541-9, Alarms & Conditions). Pure: the server
 * applies the view to the address space.
 *
 * Severity: OPC UA severities run 1..1000; Part 9 groups them in five bands (from memory: 801-1000 high,
 * 601-800 medium high, 401-600 medium, 201-400 medium low, 1-200 low). wearshift's watch, caution and alarm sit in
 * the middle of the medium-low, medium and medium-high bands: an oil-analysis finding is an early warning over
 * weeks, not a process trip, so none is put in the high band.
 *
 * States: ActiveState = the incident is active (not returned to normal, not closed); AckedState = acknowledged;
 * ConfirmedState = closed (acknowledged and returned, or resolved by hand; Confirm from a client resolves);
 * ShelvingState = TimedShelved or OneShotShelved while shelved (a one-shot shelving is a shelving whose reason
 * starts with ONE_SHOT_REASON); Retain = not closed.
 */
import { ADVISORY_TEXT } from './advisory.ts';
import type { Incident } from '../incidents/model.ts';
import { subjectOf, type Severity } from '../domain/finding.ts';

export const OPCUA_SEVERITY: Readonly<Record<Severity, number>> = { watch: 300, caution: 500, alarm: 700 };

/** Reason of a shelving taken by the OneShotShelve method; the server lifts it when the incident returns to normal. */
export const ONE_SHOT_REASON = 'one-shot shelving from OPC UA';

export type ShelvingStateName = 'Unshelved' | 'TimedShelved' | 'OneShotShelved';

export interface ConditionView {
  readonly incidentId: string;
  readonly unit: string;
  readonly component: string;
  readonly measurand: string;
  readonly active: boolean;
  readonly acked: boolean;
  readonly confirmed: boolean;
  readonly retain: boolean;
  readonly shelving: ShelvingStateName;
  /** When the shelving ends (epoch ms), while shelved. */
  readonly unshelveAt?: number;
  readonly shelvedAt?: number;
  readonly severity: number;
  readonly message: string;
  /** The evidence, one line per finding. */
  readonly evidence: readonly string[];
  /** The latest comment: the acknowledgement's note, or the last note. */
  readonly comment?: string;
  readonly time: Date;
}

export function conditionView(incident: Incident): ConditionView {
  const closed = incident.closed !== null;
  const shelving: ShelvingStateName = incident.shelved === null ? 'Unshelved' : incident.shelved.reason.startsWith(ONE_SHOT_REASON) ? 'OneShotShelved' : 'TimedShelved';
  const where = `${incident.unit}/${incident.component}${incident.measurand !== undefined ? ` ${incident.measurand}` : ''}`;
  const lead = incident.evidence[0]?.explanation ?? 'no finding on the latest sample';
  const evidence = incident.evidence.map((f) => `${subjectOf(f)} ${f.rule} ${f.severity}: ${f.explanation}`);
  const lastNote = [...incident.timeline].reverse().find((e) => e.kind === 'note' || e.kind === 'acknowledged') as { note?: string } | undefined;
  const last = incident.timeline[incident.timeline.length - 1];
  return {
    incidentId: incident.id,
    unit: incident.unit,
    component: incident.component,
    measurand: incident.measurand ?? '',
    active: !closed && incident.alarm === 'active',
    acked: incident.acknowledged !== null,
    confirmed: closed,
    retain: !closed,
    shelving,
    ...(incident.shelved !== null && { unshelveAt: Date.parse(incident.shelved.until), shelvedAt: Date.parse(incident.shelved.at) }),
    severity: OPCUA_SEVERITY[incident.severity],
    message: `${incident.severity} ${where}: ${lead} (${ADVISORY_TEXT})`.slice(0, 2000),
    evidence,
    ...(lastNote?.note !== undefined && { comment: lastNote.note }),
    time: new Date(last?.at ?? incident.openedAt),
  };
}
