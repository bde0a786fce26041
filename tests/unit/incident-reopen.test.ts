/**
 * A closed incident that a finding reopens (within `incidents.reopenWithinSamples`) is, in the alarm-management
 * terms of ANSI/ISA-18.2 / IEC 62682 (from memory), a new unacknowledged alarm situation: the acknowledgement of the
 * closed one is withdrawn and recorded so in the timeline, tier 0 of the matching policy hears of the reopening and
 * the escalation chain starts again from tier 0. The verdict takes no clock: the same history folded again gives the
 * same incident and tells nothing twice.
 */
import { describe, expect, it } from 'vitest';
import { ConfigSchema } from '../../src/domain/config.ts';
import type { Finding, Severity } from '../../src/domain/finding.ts';
import type { Measurand } from '../../src/domain/measurands.ts';
import { applyAction } from '../../src/incidents/applyAction.ts';
import { applyEscalationCheck } from '../../src/incidents/applyEscalationCheck.ts';
import { applySteps, type IncidentStep } from '../../src/incidents/applySteps.ts';
import { IncidentFold } from '../../src/incidents/incidentFold.ts';
import { emptyComponentIncidents, type ComponentIncidents, type IncidentEffect, type NotifyEffect, type ScheduleEscalationEffect } from '../../src/incidents/model.ts';
import { incidentRules } from '../../src/incidents/policy.ts';

const UNIT = 'PS2-P3';
const COMPONENT = 'gearbox';
const T0 = Date.parse('2026-03-01T08:00:00Z');
const DAY = 86_400_000;
const HOUR = 3_600_000;
const MIN = 60_000;

const RULES = incidentRules(
  ConfigSchema.parse({
    channels: {
      email: { from: 'wearshift <alerts@plant.example>', smtp: { host: 'localhost' } },
      webhooks: [{ name: 'ops', url: 'https://ops.example/hooks', secrets: ['WEBHOOK_SECRET'] }],
    },
    escalation: {
      policies: [
        {
          name: 'gearboxes',
          tiers: [
            { afterMinutes: 0, email: ['oncall@plant.example'], webhooks: ['ops'] },
            { afterMinutes: 30, email: ['supervisor@plant.example'] },
          ],
          repeatMinutes: 60,
        },
      ],
    },
  }),
);

function step(n: number, ...found: Array<[Measurand, Severity]>): IncidentStep {
  const sampleId = `LAB-${String(n).padStart(4, '0')}`;
  const sampledAt = new Date(T0 + n * 10 * DAY).toISOString();
  const findings: Finding[] = found.map(([measurand, severity]) => ({
    unit: UNIT,
    component: COMPONENT,
    group: 'gearboxes',
    measurand,
    rule: 'cusum',
    disposition: 'incident',
    severity,
    value: 6,
    threshold: 5,
    basis: 'cusum',
    explanation: `${measurand} cusum`,
    sampleId,
    sampledAt,
  }));
  return { sampleId, sampledAt, findings };
}

/** Live operation: each result arrives an hour after its sample was drawn. */
const liveAt = (s: IncidentStep) => new Date(Date.parse(s.sampledAt) + HOUR);
const ctx = (now: Date) => ({ group: 'gearboxes', now, quietBefore: new Date(now.getTime() - 30 * DAY), rules: RULES });
const feed = (state: ComponentIncidents, s: IncidentStep) => applySteps(state, [s], ctx(liveAt(s)));

const notifies = (effects: readonly IncidentEffect[]) => effects.filter((e): e is NotifyEffect => e.kind === 'notify');
const schedules = (effects: readonly IncidentEffect[]) => effects.filter((e): e is ScheduleEscalationEffect => e.kind === 'schedule-escalation');
const only = (state: ComponentIncidents) => {
  const list = Object.values(state.incidents);
  expect(list).toHaveLength(1);
  return list[0]!;
};

/** Announced, escalated to tier 1, acknowledged, returned to normal over two clean samples: closed. */
function acknowledgedAndClosed() {
  const s1 = step(1, ['Fe', 'alarm']);
  let state = feed(emptyComponentIncidents(UNIT, COMPONENT), s1).state;
  const id = only(state).id;
  state = applyEscalationCheck(state, { incidentId: id, tier: 1, reason: 'tier', dueAt: new Date(liveAt(s1).getTime() + 30 * MIN).toISOString(), now: new Date(liveAt(s1).getTime() + 30 * MIN) }, RULES).state;
  expect(only(state).escalation.reachedTier).toBe(1);
  state = applyAction(state, { kind: 'acknowledge', incidentId: id, by: 'R. Tanaka', now: new Date(liveAt(s1).getTime() + HOUR) }, RULES).state;
  state = feed(state, step(2)).state;
  state = feed(state, step(3)).state;
  expect(only(state).closed).toMatchObject({ how: 'acknowledged-and-returned' });
  return { id, state };
}

describe('a closed incident that reopens', () => {
  it('loses its acknowledgement, says so in the timeline, tells tier 0 and starts its escalation chain again', () => {
    const { id, state } = acknowledgedAndClosed();
    const s4 = step(4, ['Fe', 'alarm']);
    const back = feed(state, s4);
    const inc = only(back.state);
    expect(inc).toMatchObject({ id, alarm: 'active', closed: null, acknowledged: null });
    expect(inc.timeline.filter((t) => t.at === s4.sampledAt && t.kind !== 'finding')).toEqual([
      { kind: 'active-again', at: s4.sampledAt, sampleId: s4.sampleId, reopened: true },
      { kind: 'unacknowledged', at: s4.sampledAt, reason: 'reopened after it had been closed' },
    ]);

    // Same evidence as before: still told, to tier 0 only (the chain starts again), as news that asks for acknowledgement.
    const sent = notifies(back.effects);
    expect(sent.map((e) => [e.type, e.channel, e.target, e.tier])).toEqual([
      ['wearshift.incident.updated', 'email', 'oncall@plant.example', 0],
      ['wearshift.incident.updated', 'webhook', 'ops', 0],
    ]);
    for (const e of sent) {
      expect(e.incident.reason).toBe('reopened after it had been closed; acknowledgement withdrawn, acknowledge again');
      expect(e.incident).toMatchObject({ state: 'active, unacknowledged', closed: false, tier: 0 });
      expect(e.incident.acknowledgedBy).toBeUndefined();
    }
    const now = liveAt(s4).getTime();
    expect(inc.escalation).toMatchObject({ startedAt: new Date(now).toISOString(), firstType: 'wearshift.incident.updated', reachedTier: 0, nextTier: 1 });
    expect(schedules(back.effects)).toMatchObject([{ tier: 1, reason: 'tier', at: new Date(now + 30 * MIN).toISOString() }]);

    // Redelivered, the same step tells nobody twice.
    expect(feed(back.state, s4).effects).toEqual([]);

    // Nobody acknowledges: tier 1 hears of it 30 min after the reopening, as of a new chain.
    const tier1 = applyEscalationCheck(back.state, { incidentId: id, tier: 1, reason: 'tier', dueAt: new Date(now + 30 * MIN).toISOString(), now: new Date(now + 30 * MIN) }, RULES);
    expect(notifies(tier1.effects).map((e) => [e.type, e.target, e.tier])).toEqual([['wearshift.incident.escalated', 'supervisor@plant.example', 1]]);

    // It needs a new acknowledgement to close again.
    let after = feed(back.state, step(5)).state;
    after = feed(after, step(6)).state;
    expect(only(after)).toMatchObject({ alarm: 'returned', closed: null });
    const ack = applyAction(after, { kind: 'acknowledge', incidentId: id, by: 'A. Moreau', now: new Date(T0 + 61 * DAY) }, RULES);
    expect(ack.incident.closed).toMatchObject({ how: 'acknowledged-and-returned', by: 'A. Moreau' });
  });

  it('resolved by hand without an acknowledgement, it is announced again as a reopening, not reminded on the old chain', () => {
    const s1 = step(1, ['Fe', 'alarm']);
    let state = feed(emptyComponentIncidents(UNIT, COMPONENT), s1).state;
    const id = only(state).id;
    state = applyEscalationCheck(state, { incidentId: id, tier: 1, reason: 'tier', dueAt: new Date(liveAt(s1).getTime() + 30 * MIN).toISOString(), now: new Date(liveAt(s1).getTime() + 30 * MIN) }, RULES).state;
    state = applyAction(state, { kind: 'resolve', incidentId: id, by: 'R. Tanaka', note: 'breather replaced', now: new Date(liveAt(s1).getTime() + 2 * HOUR) }, RULES).state;
    expect(only(state).closed).toMatchObject({ how: 'resolved' });

    const s2 = step(2, ['Fe', 'alarm']);
    const back = feed(state, s2);
    expect(only(back.state).timeline.some((t) => t.kind === 'unacknowledged')).toBe(false);
    expect(notifies(back.effects).map((e) => [e.type, e.tier, e.incident.reason])).toEqual([
      ['wearshift.incident.updated', 0, 'reopened after it had been closed; not acknowledged'],
      ['wearshift.incident.updated', 0, 'reopened after it had been closed; not acknowledged'],
    ]);
    expect(only(back.state).escalation).toMatchObject({ startedAt: liveAt(s2).toISOString(), reachedTier: 0, nextTier: 1 });
  });

  it('reopened by a backfilled sample, it loses its acknowledgement at once and is told with the first live sample', () => {
    const { state } = acknowledgedAndClosed();
    const s4 = step(4, ['Fe', 'alarm']);
    const quiet = applySteps(state, [{ ...s4, quiet: true }], ctx(liveAt(s4)));
    expect(quiet.effects).toEqual([]);
    expect(only(quiet.state)).toMatchObject({ closed: null, acknowledged: null });
    expect(only(quiet.state).timeline.filter((t) => t.kind === 'unacknowledged')).toEqual([{ kind: 'unacknowledged', at: s4.sampledAt, reason: 'reopened after it had been closed' }]);

    const live = feed(quiet.state, step(5, ['Fe', 'alarm']));
    expect(notifies(live.effects).map((e) => [e.type, e.tier, e.incident.reason])).toEqual([
      ['wearshift.incident.updated', 0, 'reopened after it had been closed; acknowledgement withdrawn, acknowledge again'],
      ['wearshift.incident.updated', 0, 'reopened after it had been closed; acknowledgement withdrawn, acknowledge again'],
    ]);
    expect(only(live.state).escalation).toMatchObject({ reachedTier: 0, nextTier: 1 });
  });

  it('folded again from the start, the history gives the same incident and tells nothing twice', () => {
    const { state } = acknowledgedAndClosed();
    const live = feed(state, step(4, ['Fe', 'alarm'])).state;
    const fold = new IncidentFold(emptyComponentIncidents(UNIT, COMPONENT), live, ctx(new Date(T0 + 45 * DAY)));
    for (const s of [step(1, ['Fe', 'alarm']), step(2), step(3), step(4, ['Fe', 'alarm'])]) fold.step(s);
    const again = fold.finish();
    const { announced: _a, eventSeq: _e, escalation: _x, told: _t, notifications: _n, ...verdict } = only(live);
    expect(only(again.state)).toMatchObject(verdict);
    expect(only(again.state).acknowledged).toBeNull();
    expect(again.effects).toEqual([]);
  });
});
