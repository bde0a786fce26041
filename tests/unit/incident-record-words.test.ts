/**
 * What the incident record keeps for people beside the verdict's own entries (pure engine): a queued message the
 * incident outran, recorded on its entry as not sent, once, and kept so whatever the incident says later; and a
 * responder's word on a sample in doubt, in the timeline of the incidents that hold the sample, back in place after
 * the history is folded again.
 */
import { describe, expect, it } from 'vitest';
import { ConfigSchema } from '../../src/domain/config.ts';
import type { Finding } from '../../src/domain/finding.ts';
import { applyAction } from '../../src/incidents/applyAction.ts';
import { applySteps } from '../../src/incidents/applySteps.ts';
import { IncidentFold } from '../../src/incidents/incidentFold.ts';
import { emptyComponentIncidents, type ComponentIncidents, type Incident, type NotifyEffect } from '../../src/incidents/model.ts';
import { incidentRules } from '../../src/incidents/policy.ts';
import { applySampleVerdict } from '../../src/incidents/sampleVerdict.ts';
import { withdrawMessage } from '../../src/incidents/withdrawal.ts';

const UNIT = 'PS2-P3';
const COMPONENT = 'gearbox';
const T0 = Date.parse('2026-03-01T08:00:00Z');
const DAY = 86_400_000;
const RULES = incidentRules(
  ConfigSchema.parse({
    channels: { webhooks: [{ name: 'ops', url: 'https://ops.example/hooks', secrets: ['WEBHOOK_SECRET'] }, { name: 'duty', url: 'https://duty.example/hooks', secrets: ['WEBHOOK_SECRET'] }] },
    escalation: { policies: [{ name: 'gearboxes', tiers: [{ afterMinutes: 0, webhooks: ['ops'] }, { afterMinutes: 0, webhooks: ['duty'] }] }] },
  }),
);

function step(n: number, rule: 'limit' | 'sampling' | null) {
  const sampleId = `LAB-${n}`;
  const sampledAt = new Date(T0 + n * 10 * DAY).toISOString();
  const findings: Finding[] =
    rule === null
      ? []
      : [{ unit: UNIT, component: COMPONENT, group: 'gearboxes', measurand: 'Fe', rule, ...(rule === 'sampling' && { check: 'new-oil-mid-charge' }), disposition: 'incident', severity: 'caution', value: 90, threshold: 80, basis: 'reading', sampleId, sampledAt, explanation: `Fe ${rule}` } as Finding];
  return { sampleId, sampledAt, findings };
}

const ctx = (now: Date) => ({ group: 'gearboxes', now, quietBefore: new Date(0), rules: RULES });
const only = (state: ComponentIncidents, kind: Incident['kind'] = 'machine') => Object.values(state.incidents).find((i) => i.kind === kind)!;

describe('a message the incident outran', () => {
  const now = new Date(T0 + 12 * DAY);
  const opened = applySteps(emptyComponentIncidents(UNIT, COMPONENT), [step(1, 'limit')], ctx(now));
  const messages = opened.effects.filter((e): e is NotifyEffect => e.kind === 'notify');
  const escalation = messages.find((m) => m.type === 'wearshift.incident.escalated')!;
  const announcement = messages.find((m) => m.type === 'wearshift.incident.opened')!;
  const acked = applyAction(opened.state, { kind: 'acknowledge', incidentId: escalation.incidentId, by: 'R. Okafor', now }, RULES);

  it('is recorded on its entry as not sent, with why, once; the announcement still goes', () => {
    expect(withdrawMessage(acked.incident, announcement, now)).toBeUndefined();
    const first = withdrawMessage(acked.incident, escalation, now)!;
    expect(first.before).toBe(false);
    const entry = first.incident.notifications.find((n) => n.eventSeq === escalation.eventSeq)!;
    expect(entry.withdrawn).toEqual([{ target: 'webhook:duty', tier: 1, at: now.toISOString(), because: 'acknowledged', reason: `the incident was acknowledged by R. Okafor at ${now.toISOString()}` }]);
    // Another attempt finds the record: nothing recorded twice.
    const again = withdrawMessage(first.incident, escalation, new Date(now.getTime() + 60_000))!;
    expect(again.before).toBe(true);
    expect(again.incident).toBe(first.incident);
  });

  it('stays withdrawn once recorded, whatever the incident says later', () => {
    const shelved = applyAction(opened.state, { kind: 'shelve', incidentId: escalation.incidentId, by: 'R. Okafor', now, until: new Date(now.getTime() + 3_600_000), reason: 'overhaul' }, RULES);
    const recorded = withdrawMessage(shelved.incident, escalation, now)!;
    expect(recorded.withdrawn.because).toBe('shelved');
    // The shelving is over: judged afresh the escalation would go, but it was recorded as not sent.
    const later = new Date(now.getTime() + 2 * 3_600_000);
    expect(withdrawMessage({ ...recorded.incident, shelved: null }, escalation, later)).toMatchObject({ before: true, withdrawn: recorded.withdrawn });
    expect(withdrawMessage(shelved.incident, escalation, later)).toBeUndefined();
  });

  it('is written with an entry of its own when the bounded record no longer holds the event', () => {
    const without = { ...acked.incident, notifications: acked.incident.notifications.filter((n) => n.eventSeq !== escalation.eventSeq) };
    const r = withdrawMessage(without, escalation, now)!;
    expect(r.incident.notifications.at(-1)).toEqual({
      kind: 'notified',
      at: escalation.at,
      type: 'wearshift.incident.escalated',
      tier: 1,
      eventSeq: escalation.eventSeq,
      targets: ['webhook:duty'],
      reason: escalation.incident.reason,
      withdrawn: [r.withdrawn],
    });
  });
});

describe("a responder's word on a sample in doubt", () => {
  const now = new Date(T0 + 40 * DAY);
  const steps = [step(1, 'limit'), step(2, 'sampling'), step(3, null)];
  const base = emptyComponentIncidents(UNIT, COMPONENT);
  const state = applySteps(base, steps, ctx(now)).state;
  const word = { sampleId: 'LAB-2', verdict: 'rejected', by: 'lab desk', now: new Date(T0 + 41 * DAY) } as const;

  it('goes into the timeline of the incidents that hold the sample, and into the action log', () => {
    const r = applySampleVerdict(state, [], word, RULES);
    // The sampling incident the bottle opened, and the machine incident whose finding the bottle cleared.
    expect(only(state).timeline.some((e) => e.kind === 'finding' && e.change === 'cleared' && e.sampleId === 'LAB-2')).toBe(true);
    expect(r.concerned.map((i) => i.id)).toEqual([`${UNIT}/${COMPONENT}/sampling@LAB-2`, `${UNIT}/${COMPONENT}@LAB-1`]);
    const entry = { kind: 'sample-verdict', at: word.now.toISOString(), sampleId: 'LAB-2', verdict: 'rejected', by: 'lab desk' };
    expect(only(r.state, 'sampling').timeline.at(-1)).toEqual(entry);
    expect(only(r.state).timeline.at(-1)).toEqual(entry);
    expect(r.state.actions.map((a) => `${a.action.kind} ${a.action.incidentId}`)).toEqual([`sample-verdict ${UNIT}/${COMPONENT}/sampling@LAB-2`, `sample-verdict ${UNIT}/${COMPONENT}@LAB-1`]);
    // A sample no incident refers to is in no timeline.
    const none = applySampleVerdict(state, [], { ...word, sampleId: 'LAB-9' }, RULES);
    expect(none.concerned).toEqual([]);
    expect(none.state).toEqual(state);
    // The same word again from the same person changes nothing; another word is written.
    const again = applySampleVerdict(r.state, [], { ...word, now: new Date(T0 + 42 * DAY) }, RULES);
    expect(again.state).toEqual(r.state);
    const other = applySampleVerdict(r.state, [], { ...word, verdict: 'withdrawn', now: new Date(T0 + 42 * DAY) }, RULES);
    expect(only(other.state, 'sampling').timeline.filter((e) => e.kind === 'sample-verdict')).toHaveLength(2);
  });

  it('is put back after the step it followed when the history is folded again', () => {
    const r = applySampleVerdict(state, [], word, RULES);
    const fold = new IncidentFold(base, r.state, ctx(now));
    for (const s of steps) fold.step(s);
    const refolded = fold.finish();
    expect(only(refolded.state, 'sampling').timeline).toEqual(only(r.state, 'sampling').timeline);
  });

  it('reaches an incident that has left the state through its record', () => {
    const sampling = only(state, 'sampling');
    const withoutIt = { ...state, incidents: Object.fromEntries(Object.entries(state.incidents).filter(([, i]) => i.id !== sampling.id)) };
    const r = applySampleVerdict(withoutIt, [sampling], word, RULES);
    expect(r.archived.map((i) => i.id)).toEqual([sampling.id]);
    expect(r.archived[0]!.timeline.at(-1)).toMatchObject({ kind: 'sample-verdict', verdict: 'rejected', by: 'lab desk' });
    expect(r.state.actions.map((a) => a.action.incidentId)).toEqual([`${UNIT}/${COMPONENT}@LAB-1`, sampling.id]);
  });
});
