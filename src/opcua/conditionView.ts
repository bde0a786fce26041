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
 *
 * A closing whose evidence was set aside (closed as `withdrawn`: a late or corrected result took its findings away;
 * or as `sample-verdict`: a responder's word on the sample in doubt answered it) stands on nothing: its last event
 * has Severity OPCUA_SEVERITY_NONE (LastSeverity keeps the one shown before), no Evidence, and a Message that says
 * how it was closed, what no longer holds and that nothing of it stands, as the e-mail and the acknowledgement page
 * say. ActiveState is false and AckedState stays as it was: nobody acknowledged it, and nothing asks for it.
 */
import { ADVISORY_TEXT } from './advisory.ts';
import { borneOutText, closureText, NO_LONGER_HOLD, withdrawnEvidenceText, type Closure, type Incident } from '../incidents/model.ts';
import { subjectOf, type Finding, type Severity } from '../domain/finding.ts';

export const OPCUA_SEVERITY: Readonly<Record<Severity, number>> = { watch: 300, caution: 500, alarm: 700 };

/**
 * The Severity of the last event of a condition whose evidence was set aside: 1, the lowest OPC UA allows (Part 9's
 * low band, below every severity a finding gets), since nothing of the incident stands.
 */
export const OPCUA_SEVERITY_NONE = 1;

/** Longest Message; a longer list of findings is cut short, never the caution at its end. */
const MESSAGE_MAX = 2000;

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
  const setAside = incident.closed !== null && (incident.closed.how === 'withdrawn' || incident.closed.how === 'sample-verdict');
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
    severity: setAside ? OPCUA_SEVERITY_NONE : OPCUA_SEVERITY[incident.severity],
    message: setAside ? setAsideMessage(incident, incident.closed!, where) : `${incident.severity} ${where}: ${lead} (${ADVISORY_TEXT})`.slice(0, MESSAGE_MAX),
    evidence,
    ...(lastNote?.note !== undefined && { comment: lastNote.note }),
    time: new Date(last?.at ?? incident.openedAt),
  };
}

/**
 * The Message of a closing whose evidence was set aside: "closed PS2-P3/gearbox Fe: withdrawn: a late or corrected
 * result changed the history so that this incident no longer stands; the findings it stood on no longer hold: Fe
 * (limit, caution) of sample D-16-2; severity none: nothing of it stands and nothing is asked (last announced as
 * caution) (wearshift advises; …)". The sampling findings of a sample a responder rejected were borne out, and say so
 * (as the closing message does).
 */
function setAsideMessage(incident: Incident, closure: Closure, where: string): string {
  const aside = incident.withdrawnEvidence ?? [];
  const borne: readonly Finding[] = closure.how === 'sample-verdict' && closure.verdict === 'rejected' ? aside.filter((f) => f.rule === 'sampling' && f.sampleId === closure.sampleId) : [];
  const held = [borneOutText(borne), withdrawnEvidenceText(aside.filter((f) => !borne.includes(f)))].filter((t) => t !== '');
  const head = `closed ${where}: ${closureText(closure)}; ${held.length > 0 ? held.join('; ') : NO_LONGER_HOLD}`;
  const tail = `; severity none: nothing of it stands and nothing is asked (last announced as ${incident.severity}) (${ADVISORY_TEXT})`;
  const room = MESSAGE_MAX - tail.length;
  return `${head.length > room ? `${head.slice(0, room - 1)}\u2026` : head}${tail}`;
}
