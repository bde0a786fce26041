/** The Redis incident store against a private redis-server: atomic commits with the outbox, races, ordering. */
import { afterAll, beforeAll, describe, expect, it, vi } from 'vitest';
import type { Redis } from 'ioredis';
import type { Step } from '../../src/analysis/model.ts';
import { ConfigSchema } from '../../src/domain/config.ts';
import type { Finding, Severity } from '../../src/domain/finding.ts';
import { IncidentConflictError, IncidentNotFoundError } from '../../src/incidents/errors.ts';
import { IncidentFilterSchema } from '../../src/incidents/listFilter.ts';
import type { IncidentEffect } from '../../src/incidents/model.ts';
import { incidentRules } from '../../src/incidents/policy.ts';
import { RedisIncidents as RedisIncidentStore } from '../../src/redis/redisIncidents.ts';
import { startRedisServer, type RedisServer } from '../helpers/redisServer.ts';

const RULES = incidentRules(
  ConfigSchema.parse({
    channels: { email: { from: 'alerts@plant.example', smtp: { host: 'localhost' } }, webhooks: [{ name: 'ops', url: 'https://ops.example/', secrets: ['S'] }] },
    escalation: {
      policies: [{ name: 'all', tiers: [{ afterMinutes: 0, email: ['oncall@plant.example'], webhooks: ['ops'] }, { afterMinutes: 30, email: ['lead@plant.example'] }] }],
    },
  }),
);

const T0 = Date.parse('2026-01-05T06:00:00Z');
const DAY = 86_400_000;

function step(unit: string, component: string, n: number, ...f: [Finding['measurand'], Severity][]): Step {
  const sampleId = `${unit}-S${n}`;
  const sampledAt = new Date(T0 + n * DAY).toISOString();
  return {
    sampleId,
    sampledAt,
    findings: f.map(([measurand, severity]) => ({ unit, component, group: 'engines', measurand, rule: 'limit', disposition: 'incident', severity, value: 1, basis: 'reading', sampleId, sampledAt, explanation: `${measurand} high` })),
  };
}

const live = (s: Step) => ({ group: 'engines', now: new Date(Date.parse(s.sampledAt) + 3_600_000), quietBefore: new Date(0) });
const filter = (q: Record<string, string> = {}) => IncidentFilterSchema.parse(q);

let server: RedisServer;
let a: Redis;
let b: Redis;

beforeAll(async () => {
  server = await startRedisServer();
  a = server.client();
  b = server.client();
});
afterAll(async () => {
  await server.dispose();
});

describe('RedisIncidentStore', () => {
  it('commits state, record, index and outbox together, and the outbox drains once', async () => {
    const store = new RedisIncidentStore(a, { rules: RULES, prefix: '{t1}' });
    const s1 = step('U1', 'engine', 1, ['Fe', 'alarm']);
    const r = await store.applySteps({ unit: 'U1', component: 'engine' }, [s1], live(s1));
    expect(r.effects.map((e) => e.kind)).toEqual(['notify', 'notify', 'schedule-escalation']);
    expect(Object.keys(r.before.incidents)).toEqual([]);

    const got = await store.get('U1/engine@U1-S1');
    expect(got).toMatchObject({ alarm: 'active', severity: 'alarm', unit: 'U1' });
    expect(await store.outboxSize()).toEqual({ waiting: 3, claimed: 0 });

    // Redelivery: nothing new in the outbox.
    await store.applySteps({ unit: 'U1', component: 'engine' }, [s1], live(s1));
    expect(await store.outboxSize()).toEqual({ waiting: 3, claimed: 0 });

    const handed: IncidentEffect[] = [];
    expect(await store.drainOutbox(async (effects) => void handed.push(...effects), { batchSize: 2 })).toBe(3);
    expect(handed.map((e) => e.key)).toEqual(r.effects.map((e) => e.key));
    expect(await store.outboxSize()).toEqual({ waiting: 0, claimed: 0 });
    expect(await store.drainOutbox(async () => {})).toBe(0);
  });

  it('keeps effects whose hand-over failed, and hands them out again after the claim timeout', async () => {
    const store = new RedisIncidentStore(a, { rules: RULES, prefix: '{t2}' });
    const s1 = step('U2', 'engine', 1, ['Cu', 'caution']);
    await store.applySteps({ unit: 'U2', component: 'engine' }, [s1], live(s1));
    await expect(store.drainOutbox(async () => Promise.reject(new Error('queue down')))).rejects.toThrow('queue down');
    expect(await store.outboxSize()).toEqual({ waiting: 0, claimed: 3 });

    // Another process (another connection) picks them up once the claim is stale, not before.
    const other = new RedisIncidentStore(b, { rules: RULES, prefix: '{t2}' });
    expect(await other.drainOutbox(async () => {}, { claimTimeoutMs: 60_000 })).toBe(0);
    const handed: IncidentEffect[] = [];
    expect(await other.drainOutbox(async (e) => void handed.push(...e), { claimTimeoutMs: 60_000, now: () => Date.now() + 61_000 })).toBe(3);
    expect(new Set(handed.map((e) => e.kind))).toEqual(new Set(['notify', 'schedule-escalation']));
    expect(await other.outboxSize()).toEqual({ waiting: 0, claimed: 0 });
  });

  it('an acknowledgement racing an evaluation: both take effect', async () => {
    const ref = { unit: 'U3', component: 'gearbox' };
    const worker = new RedisIncidentStore(a, { rules: RULES, prefix: '{t3}' });
    const api = new RedisIncidentStore(b, { rules: RULES, prefix: '{t3}' });
    const s1 = step('U3', 'gearbox', 1, ['Fe', 'caution']);
    await worker.applySteps(ref, [s1], live(s1));
    const id = 'U3/gearbox@U3-S1';
    const evalSpy = vi.spyOn(a, 'eval');
    const apiSpy = vi.spyOn(b, 'eval');

    const steps = [2, 3, 4, 5, 6].map((n) => step('U3', 'gearbox', n, ['Fe', 'caution']));
    const now = new Date(T0 + 7 * DAY);
    await Promise.all([
      ...steps.map((s, i) => worker.applySteps(ref, steps.slice(0, i + 1), { group: 'engines', now, quietBefore: new Date(0) })),
      api.applyAction({ kind: 'acknowledge', incidentId: id, by: 'R. Tanaka', now }),
      ...Array.from({ length: 10 }, (_, i) => api.applyAction({ kind: 'note', incidentId: id, by: 'R. Tanaka', note: `note ${i}`, now })),
    ]);
    const inc = (await api.get(id))!;
    expect(inc.lastSampleId).toBe('U3-S6');
    expect(inc.acknowledged).toMatchObject({ by: 'R. Tanaka' });
    expect(inc.timeline.filter((t) => t.kind === 'note')).toHaveLength(10);
    expect(inc.timeline.filter((t) => t.kind === 'acknowledged')).toHaveLength(1);
    // The component state and the incident record agree.
    expect(Object.values((await worker.component(ref)).incidents)[0]).toEqual(inc);
    // Commits lost races and were retried: more scripts ran than operations succeeded.
    const commits = [...evalSpy.mock.calls, ...apiSpy.mock.calls].filter((c) => String(c[0]).includes('cjson')).length;
    expect(commits).toBeGreaterThan(16);
    evalSpy.mockRestore();
    apiSpy.mockRestore();
  });

  it('lists open incidents by severity, then newest first, with filters; closed ones apart', async () => {
    const store = new RedisIncidentStore(a, { rules: RULES, prefix: '{t4}' });
    const plan: [string, string, number, Severity][] = [
      ['P1', 'engine', 1, 'caution'],
      ['P2', 'engine', 2, 'alarm'],
      ['P3', 'hydraulic', 3, 'watch'],
      ['P4', 'engine', 4, 'alarm'],
      ['P5', 'engine', 5, 'caution'],
    ];
    for (const [unit, component, n, severity] of plan) {
      const s = step(unit, component, n, ['Fe', severity]);
      await store.applySteps({ unit, component }, [s], { ...live(s), group: component === 'engine' ? 'engines' : 'hydraulics' });
    }
    const ids = (q?: Record<string, string>) => store.list(filter(q)).then((l) => l.map((i) => i.unit));
    expect(await ids()).toEqual(['P4', 'P2', 'P5', 'P1', 'P3']);
    expect(await ids({ severity: 'alarm,watch' })).toEqual(['P4', 'P2', 'P3']);
    expect(await ids({ group: 'hydraulics' })).toEqual(['P3']);
    expect(await ids({ unit: 'P1' })).toEqual(['P1']);
    expect(await ids({ limit: '2' })).toEqual(['P4', 'P2']);

    const now = new Date(T0 + 10 * DAY);
    await store.applyAction({ kind: 'acknowledge', incidentId: 'P2/engine@P2-S2', by: 'R. Tanaka', now });
    await store.applyAction({ kind: 'shelve', incidentId: 'P5/engine@P5-S5', by: 'R. Tanaka', until: new Date(now.getTime() + DAY), reason: 'oil change today', now });
    await store.applyAction({ kind: 'resolve', incidentId: 'P1/engine@P1-S1', by: 'R. Tanaka', note: 'bottle mislabelled', now });
    expect(await ids({ state: 'acknowledged' })).toEqual(['P2']);
    expect(await ids({ state: 'unacknowledged' })).toEqual(['P4', 'P5', 'P3']);
    expect(await ids({ state: 'shelved' })).toEqual(['P5']);
    expect(await ids({ state: 'closed' })).toEqual(['P1']);
    expect(await ids()).toEqual(['P4', 'P2', 'P5', 'P3']);
    expect(await ids({ state: 'all' })).toEqual(['P4', 'P2', 'P5', 'P3', 'P1']);
    const listed = await store.list(filter({ unit: 'P4' }));
    expect(listed[0]).not.toHaveProperty('timeline');
  });

  it('counts what a filter matches in all, whatever the limit, across partitions: by the indexes alone or by the records', async () => {
    const store = new RedisIncidentStore(a, { rules: RULES, prefix: '{t4count}', partitions: 3 });
    const severities: Severity[] = ['alarm', 'caution', 'watch', 'alarm', 'caution', 'alarm', 'watch'];
    for (const [i, severity] of severities.entries()) {
      const unit = `C${i + 1}`;
      const s = step(unit, 'engine', i + 1, ['Fe', severity]);
      await store.applySteps({ unit, component: 'engine' }, [s], live(s));
    }
    const now = new Date(T0 + 10 * DAY);
    await store.applyAction({ kind: 'resolve', incidentId: 'C3/engine@C3-S3', by: 'R. Tanaka', note: 'bottle mislabelled', now });
    await store.applyAction({ kind: 'acknowledge', incidentId: 'C1/engine@C1-S1', by: 'R. Tanaka', now });
    // Every count equals the length of the whole list, and does not depend on the limit asked for.
    const queries: Record<string, string>[] = [{}, { state: 'closed' }, { state: 'all' }, { severity: 'alarm' }, { state: 'acknowledged' }, { state: 'all', severity: 'watch' }, { unit: 'C2' }, { group: 'none' }];
    for (const q of queries) {
      const whole = await store.list(filter({ ...q, limit: '1000' }));
      expect(await store.count(filter({ ...q, limit: '1' })), JSON.stringify(q)).toBe(whole.length);
    }
    expect(await store.count(filter({}))).toBe(6);
    expect(await store.count(filter({ severity: 'alarm' }))).toBe(3);
    expect(await store.count(filter({ state: 'all' }))).toBe(7);
  });

  it('refuses unknown and archived incidents clearly', async () => {
    const store = new RedisIncidentStore(a, { rules: incidentRules(ConfigSchema.parse({ incidents: { reopenWithinSamples: 0, returnAfterSamples: 1 } })), prefix: '{t5}' });
    const ref = { unit: 'U5', component: 'engine' };
    const now = new Date(T0 + 30 * DAY);
    const ctx = { group: 'engines', now, quietBefore: new Date(0) };
    await store.applySteps(ref, [step('U5', 'engine', 1, ['Fe', 'alarm'])], ctx);
    await store.applyAction({ kind: 'resolve', incidentId: 'U5/engine@U5-S1', by: 'R. Tanaka', note: 'false alarm', now });
    await store.applySteps(ref, [step('U5', 'engine', 2, ['Fe', 'alarm'])], ctx);
    expect((await store.get('U5/engine@U5-S2'))!.closed).toBeNull();
    await expect(store.applyAction({ kind: 'note', incidentId: 'U5/engine@U5-S1', by: 'x', note: 'y', now })).rejects.toThrow(IncidentConflictError);
    await expect(store.applyAction({ kind: 'acknowledge', incidentId: 'nope', by: 'x', now })).rejects.toThrow(IncidentNotFoundError);
    expect((await store.applyEscalationCheck({ incidentId: 'nope', now })).effects).toEqual([]);
  });

  it('runs escalation checks against the stored state', async () => {
    const store = new RedisIncidentStore(a, { rules: RULES, prefix: '{t6}' });
    const s1 = step('U6', 'engine', 1, ['Pb', 'alarm']);
    const r = await store.applySteps({ unit: 'U6', component: 'engine' }, [s1], live(s1));
    const schedule = r.effects.find((e) => e.kind === 'schedule-escalation')!;
    const check = await store.applyEscalationCheck({ incidentId: 'U6/engine@U6-S1', now: new Date(schedule.kind === 'schedule-escalation' ? schedule.at : 0) });
    expect(check.effects).toMatchObject([{ kind: 'notify', type: 'wearshift.incident.escalated', target: 'lead@plant.example', tier: 1 }]);
    expect((await store.get('U6/engine@U6-S1'))!.escalation.reachedTier).toBe(1);
  });
});
