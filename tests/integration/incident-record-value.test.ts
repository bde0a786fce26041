/**
 * How an incident record is stored (src/redis/incidentRecordValue.ts), against a private redis-server: deflated
 * bytes (`z3:`), open or closed, several times smaller than its JSON, and every way of reading it (one incident, the open and closed
 * lists, a count by its fields, the recent incidents of the alarm figures) gives the incident exactly as its JSON
 * says. A record written plain or as deflated text (`z2:`), as before, reads the same.
 */
import type { Redis } from 'ioredis';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { Step } from '../../src/analysis/model.ts';
import { ConfigSchema } from '../../src/domain/config.ts';
import type { Finding, Severity } from '../../src/domain/finding.ts';
import { z2Form } from '../helpers/earlierStoredForms.ts';
import { IncidentFilterSchema } from '../../src/incidents/listFilter.ts';
import { incidentRules } from '../../src/incidents/policy.ts';
import { partitionKeys, Partitions } from '../../src/redis/keys.ts';
import { readRecentIncidents } from '../../src/redis/recentIncidents.ts';
import { RedisIncidents } from '../../src/redis/redisIncidents.ts';
import { startRedisServer, type RedisServer } from '../helpers/redisServer.ts';

const RULES = incidentRules(ConfigSchema.parse({}));
const PREFIX = '{records}';
const T0 = Date.parse('2026-02-02T08:00:00Z');
const DAY = 86_400_000;
const ref = { unit: 'PS3-P1', component: 'gearbox' };

/** A step of the invented gearbox: iron and copper findings that rise and fall, so the timeline grows. */
function step(n: number, fe: Severity | undefined, cu: Severity | undefined): Step {
  const sampleId = `PS3-P1-${String(n).padStart(3, '0')}`;
  const sampledAt = new Date(T0 + n * 14 * DAY).toISOString();
  const finding = (measurand: Finding['measurand'], severity: Severity, value: number): Finding =>
    ({
      ...ref,
      group: 'station-gearboxes',
      measurand,
      rule: severity === 'watch' ? 'cusum' : 'limit',
      disposition: 'incident',
      severity,
      value,
      threshold: 40,
      basis: severity === 'watch' ? 'rate' : 'reading',
      sampleId,
      sampledAt,
      explanation: `${measurand} ${value} ppm at sample ${sampleId}: ${severity === 'watch' ? 'the wear rate has shifted upward against its in-control rate' : 'above the caution level of 40 ppm'}.`,
    }) as Finding;
  return { sampleId, sampledAt, findings: [...(fe ? [finding('Fe', fe, 40 + n)] : []), ...(cu ? [finding('Cu', cu, 12 + n / 10)] : [])] };
}

let server: RedisServer;
let redis: Redis;

beforeAll(async () => {
  server = await startRedisServer();
  redis = server.client();
});
afterAll(async () => {
  await server.dispose();
});

describe('an incident record as stored', () => {
  it('is deflated, open or closed, and reads back the same every way', async () => {
    const store = new RedisIncidents(redis, { rules: RULES, prefix: PREFIX });
    const plan: Array<[Severity | undefined, Severity | undefined]> = [];
    for (let n = 0; n < 40; n++) plan.push([n % 3 === 0 ? 'watch' : 'caution', n % 4 === 0 ? undefined : 'watch']);
    for (const [n, [fe, cu]] of plan.entries()) {
      const s = step(n + 1, fe, cu);
      await store.applySteps(ref, [s], { group: 'station-gearboxes', now: new Date(Date.parse(s.sampledAt) + 3_600_000), quietBefore: new Date(0) });
    }
    const id = `${ref.unit}/${ref.component}@PS3-P1-001`;
    const records = partitionKeys(new Partitions(PREFIX, 1).tag(0)).records;

    const openStored = (await redis.hgetBuffer(records, id))!;
    expect(openStored.subarray(0, 3).toString()).toBe('z3:');
    const open = (await store.get(id))!;
    expect(open.closed).toBeNull();
    expect(open.timeline.length).toBeGreaterThan(40);
    expect(openStored.length).toBeLessThan(JSON.stringify(open).length / 4);
    expect((await store.list(IncidentFilterSchema.parse({}))).map((i) => i.id)).toEqual([id]);
    expect(await store.count(IncidentFilterSchema.parse({ unit: ref.unit }))).toBe(1);

    await store.applyAction({ kind: 'resolve', incidentId: id, by: 'station on-call', note: 'bearing replaced', now: new Date(T0 + 600 * DAY) });
    const closedStored = (await redis.hgetBuffer(records, id))!;
    expect(closedStored.subarray(0, 3).toString()).toBe('z3:');
    const closed = (await store.get(id))!;
    expect(closed.closed?.how).toBe('resolved');
    const json = JSON.stringify(closed);
    // Deflated against the dictionary, the record is a fraction of its JSON.
    expect(closedStored.length).toBeLessThan(json.length / 4);

    const byList = await store.list(IncidentFilterSchema.parse({ state: 'closed' }));
    expect(byList.map((i) => i.id)).toEqual([id]);
    expect(await store.count(IncidentFilterSchema.parse({ state: 'closed', unit: ref.unit }))).toBe(1);
    expect(await store.count(IncidentFilterSchema.parse({ state: 'closed', unit: 'PS9-P9' }))).toBe(0);
    const recent = await readRecentIncidents(redis, new Partitions(PREFIX, 1), { closedSince: 0, max: 10 });
    expect(recent.incidents.map((i) => JSON.stringify(i))).toEqual([json]);

    // A closed record written plain or as deflated text (`z2:`, base64), before this change, reads the same.
    await redis.hset(records, id, z2Form(json));
    expect((await redis.hget(records, id))!.startsWith('z2:')).toBe(true);
    expect(JSON.stringify(await store.get(id))).toBe(json);
    await redis.hset(records, id, json);
    expect(JSON.stringify(await store.get(id))).toBe(json);
    expect((await store.list(IncidentFilterSchema.parse({ state: 'closed' }))).map((i) => i.id)).toEqual([id]);
    expect((await readRecentIncidents(redis, new Partitions(PREFIX, 1), { closedSince: 0, max: 10 })).incidents.map((i) => JSON.stringify(i))).toEqual([json]);
  });
});
