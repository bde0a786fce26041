/**
 * A delayed escalation check belongs to the chain, tier and time it was scheduled for. A check left over from an
 * earlier chain (scheduled before an acknowledgement that new evidence withdrew, which started a new chain) tells
 * nothing, however close its time lies to the new chain's; a check of the current chain that runs a little early (a
 * worker clock slightly behind) tells its tier and records the time it ran, never its due time; one much earlier is
 * scheduled again. The escalate worker passes the check's tier, reason and due time from the job to the engine.
 * All clocks are passed in.
 */
import type { Job, Queue } from 'bullmq';
import { describe, expect, it } from 'vitest';
import { ConfigSchema } from '../../src/domain/config.ts';
import type { Finding, Severity } from '../../src/domain/finding.ts';
import type { Measurand } from '../../src/domain/measurands.ts';
import { applyAction } from '../../src/incidents/applyAction.ts';
import { applyEscalationCheck, CLOCK_SKEW_TOLERANCE_MS, type EscalationCheck } from '../../src/incidents/applyEscalationCheck.ts';
import { applySteps, type IncidentStep } from '../../src/incidents/applySteps.ts';
import { emptyComponentIncidents, type ComponentIncidents, type IncidentEffect, type NotifyEffect, type ScheduleEscalationEffect } from '../../src/incidents/model.ts';
import { incidentRules } from '../../src/incidents/policy.ts';
import { relayEffects, type EscalateJobData } from '../../src/queue/outboxRelay.ts';
import { escalateProcessor } from '../../src/queue/processors/escalateProcessor.ts';
import type { RedisIncidents } from '../../src/redis/redisIncidents.ts';

const UNIT = 'PS2-P3';
const COMPONENT = 'gearbox';
const MIN = 60_000;
const SEC = 1_000;
/** When the first sample's result arrives and the incident is announced. */
const L = Date.parse('2026-03-11T09:00:00Z');

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

function finding(measurand: Measurand, severity: Severity, sampleId: string, sampledAt: string): Finding {
  return { unit: UNIT, component: COMPONENT, group: 'gearboxes', measurand, rule: 'cusum', disposition: 'incident', severity, value: 6, threshold: 5, basis: 'cusum', explanation: `${measurand} cusum`, sampleId, sampledAt };
}

function sampleAt(sampleId: string, sampledAtMs: number, ...found: Array<[Measurand, Severity]>): IncidentStep {
  const sampledAt = new Date(sampledAtMs).toISOString();
  return { sampleId, sampledAt, findings: found.map(([m, s]) => finding(m, s, sampleId, sampledAt)) };
}

function feed(state: ComponentIncidents, step: IncidentStep, now: number) {
  return applySteps(state, [step], { group: 'gearboxes', now: new Date(now), quietBefore: new Date(now - 30 * 86_400_000), rules: RULES });
}

const notifies = (effects: readonly IncidentEffect[]) => effects.filter((e): e is NotifyEffect => e.kind === 'notify');
const schedules = (effects: readonly IncidentEffect[]) => effects.filter((e): e is ScheduleEscalationEffect => e.kind === 'schedule-escalation');
const only = (state: ComponentIncidents) => {
  const list = Object.values(state.incidents);
  expect(list).toHaveLength(1);
  return list[0]!;
};

/** The check the escalate worker makes of a schedule-escalation effect's job, run at `now`. */
function checkOf(effect: ScheduleEscalationEffect, now: number): EscalationCheck {
  return { incidentId: effect.incidentId, tier: effect.tier, reason: effect.reason, dueAt: effect.at, now: new Date(now) };
}

/**
 * Announced at L (tier 1 due at L + 30 min), acknowledged 10 s later, and 40 s after the announcement new evidence
 * withdraws the acknowledgement: a new chain starts at S = L + 40 s, its tier 1 due at S + 30 min. The first chain's
 * tier-1 check is still queued for L + 30 min, 40 s before the new chain's.
 */
function restartedChain() {
  const opened = feed(emptyComponentIncidents(UNIT, COMPONENT), sampleAt('LAB-0001', L - 3_600_000, ['Fe', 'caution']), L);
  const oldCheck = schedules(opened.effects)[0]!;
  expect(oldCheck).toMatchObject({ tier: 1, reason: 'tier', at: new Date(L + 30 * MIN).toISOString() });
  const id = only(opened.state).id;
  const acked = applyAction(opened.state, { kind: 'acknowledge', incidentId: id, by: 'R. Tanaka', now: new Date(L + 10 * SEC) }, RULES);
  const S = L + 40 * SEC;
  const news = feed(acked.state, sampleAt('LAB-0002', L - 1_800_000, ['Fe', 'caution'], ['Pb', 'watch']), S);
  expect(only(news.state).acknowledged).toBeNull();
  const newCheck = schedules(news.effects)[0]!;
  expect(newCheck).toMatchObject({ tier: 1, reason: 'tier', at: new Date(S + 30 * MIN).toISOString() });
  return { id, state: news.state, oldCheck, newCheck, S };
}

describe('an escalation check belongs to the chain that scheduled it', () => {
  it("a check left over from an earlier chain does nothing, though it falls due within the skew tolerance of the new chain's", () => {
    const { state, oldCheck } = restartedChain();
    const stale = applyEscalationCheck(state, checkOf(oldCheck, L + 30 * MIN), RULES);
    expect(stale.effects).toEqual([]);
    expect(stale.state).toEqual(state);
    expect(only(stale.state).escalation).toMatchObject({ reachedTier: 0, nextTier: 1 });
  });

  it("a check queued without its due time (before the time was passed on) does not tell the new chain's tier early, and leaves the chain a check", () => {
    const { state, oldCheck, newCheck } = restartedChain();
    const legacy = applyEscalationCheck(state, { incidentId: oldCheck.incidentId, tier: oldCheck.tier, reason: oldCheck.reason, now: new Date(L + 30 * MIN) }, RULES);
    expect(notifies(legacy.effects)).toEqual([]);
    expect(only(legacy.state).escalation).toMatchObject({ reachedTier: 0, nextTier: 1, dueAt: newCheck.at });
    // Scheduled again for the pending time, under a key of its own (the running job's key is taken).
    expect(schedules(legacy.effects)).toMatchObject([{ tier: 1, reason: 'tier', at: newCheck.at }]);
    expect(schedules(legacy.effects)[0]!.key).not.toBe(newCheck.key);
  });

  it("the new chain's own check tells tier 1 at its time, once", () => {
    const { state, newCheck, S } = restartedChain();
    const due = applyEscalationCheck(state, checkOf(newCheck, S + 30 * MIN), RULES);
    expect(notifies(due.effects).map((e) => [e.type, e.target, e.tier, e.at])).toEqual([
      ['wearshift.incident.escalated', 'supervisor@plant.example', 1, new Date(S + 30 * MIN).toISOString()],
    ]);
    expect(only(due.state).escalation).toMatchObject({ reachedTier: 1, lastSentAt: new Date(S + 30 * MIN).toISOString() });
    // Redelivered: nothing more.
    expect(applyEscalationCheck(due.state, checkOf(newCheck, S + 30 * MIN + 5), RULES).effects).toEqual([]);
  });
});

describe('clock skew: a check of the current chain that runs early', () => {
  it('within the tolerance tells its tier and records the time it ran, never its due time', () => {
    const { state, newCheck, S } = restartedChain();
    const ranAt = S + 30 * MIN - 20 * SEC;
    const early = applyEscalationCheck(state, checkOf(newCheck, ranAt), RULES);
    const sent = notifies(early.effects);
    expect(sent.map((e) => [e.type, e.target, e.tier])).toEqual([['wearshift.incident.escalated', 'supervisor@plant.example', 1]]);
    const inc = only(early.state);
    expect(inc.escalation.lastSentAt).toBe(new Date(ranAt).toISOString());
    // Nothing of this check is stamped later than the moment it ran.
    const stamps = [...sent.map((e) => e.at), ...inc.notifications.map((n) => n.at), ...inc.timeline.map((t) => t.at), inc.escalation.lastSentAt!];
    for (const at of stamps) expect(Date.parse(at)).toBeLessThanOrEqual(ranAt);
    // The reminder follows from the time tier 1 was told.
    expect(schedules(early.effects)).toMatchObject([{ reason: 'repeat', tier: 1, at: new Date(ranAt + 60 * MIN).toISOString() }]);
  });

  it('earlier than the tolerance tells nothing and schedules the check again for its time', () => {
    const { state, newCheck, S } = restartedChain();
    const ranAt = S + 30 * MIN - CLOCK_SKEW_TOLERANCE_MS - SEC;
    const early = applyEscalationCheck(state, checkOf(newCheck, ranAt), RULES);
    expect(notifies(early.effects)).toEqual([]);
    expect(schedules(early.effects)).toMatchObject([{ incidentId: newCheck.incidentId, tier: 1, reason: 'tier', at: newCheck.at }]);
    expect(only(early.state).escalation).toEqual(only(state).escalation);
    // The check scheduled again finds the escalation due and tells tier 1 then.
    const again = applyEscalationCheck(early.state, checkOf(schedules(early.effects)[0]!, S + 30 * MIN), RULES);
    expect(notifies(again.effects).map((e) => [e.tier, e.at])).toEqual([[1, newCheck.at]]);
  });
});

describe('the escalate job carries what the check was scheduled for', () => {
  it('the relay puts the due time into the job, and the worker hands tier, reason and due time to the engine', async () => {
    const added: Array<{ data: EscalateJobData; delay: number | undefined }> = [];
    const queue = {
      add: async (_name: string, data: EscalateJobData, opts: { delay?: number }) => void added.push({ data, delay: opts.delay }),
      addBulk: async () => [],
    } as unknown as Queue;
    const effect: ScheduleEscalationEffect = { kind: 'schedule-escalation', key: 'U/c@S1:tier:1:1:1', incidentId: 'U/c@S1', tier: 1, at: new Date(L + 30 * MIN).toISOString(), reason: 'tier' };
    await relayEffects([effect], { notify: queue, escalate: queue }, L);
    expect(added).toEqual([{ data: { incidentId: 'U/c@S1', tier: 1, reason: 'tier', dueAt: effect.at }, delay: 30 * MIN }]);

    const checks: EscalationCheck[] = [];
    const incidents = { applyEscalationCheck: async (c: EscalationCheck) => (checks.push(c), { effects: [] }) } as unknown as RedisIncidents;
    const run = escalateProcessor(incidents, () => L + 30 * MIN, () => undefined);
    await run({ data: added[0]!.data } as Job<EscalateJobData>);
    // A job queued before the due time was passed on still runs, matched by its tier and reason.
    await run({ data: { incidentId: 'U/c@S1', tier: 1, reason: 'tier' } } as Job<EscalateJobData>);
    expect(checks).toEqual([
      { incidentId: 'U/c@S1', tier: 1, reason: 'tier', dueAt: effect.at, now: new Date(L + 30 * MIN) },
      { incidentId: 'U/c@S1', tier: 1, reason: 'tier', now: new Date(L + 30 * MIN) },
    ]);
  });
});
