/**
 * Scaling out: two `wearshift worker` processes on one Redis must end in the state one process reaches on the same
 * input — histories, registry, group statistics, findings and incidents — whichever process stored and evaluated
 * what, in whatever order: the verdict depends on the set of results only.
 */
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { parseConfig } from '../../src/domain/configFile.ts';
import { incidentRules } from '../../src/incidents/policy.ts';
import { RedisIncidents as RedisIncidentStore } from '../../src/redis/redisIncidents.ts';
import { createResultProducer } from '../../src/queue/producer.ts';
import { openQueue, QUEUE_NAMES, resolveQueueSettings } from '../../src/queue/queues.ts';
import type { RedisConnection as Redis } from '../../src/redis/connection.ts';
import { RedisStore } from '../../src/redis/redisStore.ts';
import { startCli } from '../helpers/cli.ts';
import { inventedFleet } from '../helpers/fleetCsv.ts';
import { drained } from '../helpers/queueDrain.ts';
import { startRedisServer, type RedisServer } from '../helpers/redisServer.ts';
import { verdict } from '../helpers/incidentVerdict.ts';

// Groups of two components, population limits within reach: group statistics are read as of each sample's month.
const config = (prefix: string) => `
redis: { prefix: "${prefix}" }
detection: { measurands: [Fe, Cu], runningInHours: 0, baselineIntervals: 6 }
population: { minResults: 8 }
groups:
  - name: north
    match: { unit: "^LS[12]-" }
    limits: { Fe: { caution: 45, alarm: 70 }, Si: { caution: 15, alarm: 25 } }
  - name: south
    match: { unit: "^LS[34]-" }
    limits: { Fe: { caution: 45, alarm: 70 }, Si: { caution: 15, alarm: 25 } }
`;

let server: RedisServer;
let dir: string;
beforeAll(async () => {
  server = await startRedisServer();
  dir = mkdtempSync(join(tmpdir(), 'wearshift-procs-'));
});
afterAll(async () => {
  await server?.dispose();
  rmSync(dir, { recursive: true, force: true });
});

const fleet = inventedFleet({ units: 4, samplesPerUnit: 24, seed: 7 });

async function runWith(processes: number, prefix: string, redis: Redis) {
  const file = join(dir, `${processes}.yaml`);
  writeFileSync(file, config(prefix));
  // A few results at a time each (`--results-at-once`; 1 000 by default), so that a burst of this size is shared by both
  // processes rather than taken whole by the first to wake.
  const workers = Array.from({ length: processes }, () => startCli(['worker', '--config', file, '--results-at-once', '8'], { REDIS_URL: server.url, LOG_LEVEL: 'warn' }));
  const settings = resolveQueueSettings({ prefix });
  const queues = [QUEUE_NAMES.results, QUEUE_NAMES.evaluate].map((n) => openQueue(n, redis, settings));
  try {
    // Every process must be taking jobs before the results arrive, or the first one does all the work.
    const deadline = Date.now() + 240_000;
    while ((await queues[0]!.getWorkersCount()) < processes) {
      if (Date.now() > deadline) throw new Error(`only ${await queues[0]!.getWorkersCount()} of ${processes} workers came up`);
      await new Promise((r) => setTimeout(r, 200));
    }
    const producer = createResultProducer({ connection: redis, prefix });
    // Twice, shuffled the second time: redeliveries arrive while the first copies are being processed.
    await producer.add(fleet);
    await producer.add([...fleet].reverse());
    await producer.close();
    await drained(queues, 120_000);
    const completed = await queues[0]!.getCompleted(0, 1000);
    const processedBy = new Set(completed.map((j) => j.processedBy));
    return { processedBy, state: await snapshot(redis, prefix) };
  } finally {
    await Promise.all(queues.map((q) => q.close()));
    for (const w of workers) expect(await w.stop()).toBe(0);
  }
}

async function snapshot(redis: Redis, prefix: string) {
  const parsed = parseConfig(config(prefix));
  const storage = new RedisStore(redis, { prefix, config: parsed });
  const components = await storage.components();
  const incidents = new RedisIncidentStore(redis, { rules: incidentRules(parsed), prefix });
  const ids = (await incidents.list({ state: 'all', limit: 1000 })).map((i) => i.id).sort();
  return {
    components,
    histories: await Promise.all(components.map(async (c) => (await storage.revisions(c)).map((s) => `${s.sample.sampleId}#${s.sample.revision}`).sort())),
    findings: await Promise.all(components.map((c) => storage.findings(c))),
    groups: await Promise.all(components.map((c) => storage.asOf(c.group, '9999-12', c))),
    incidents: (await Promise.all(ids.map(async (id) => verdict((await incidents.get(id))!)))).filter((i) => i.closed?.how !== 'withdrawn'),
  };
}

describe('several worker processes on one Redis', () => {
  it('reach the state of one process, and both take part', async () => {
    const redis = server.client();
    const one = await runWith(1, '{one}', redis);
    const two = await runWith(2, '{two}', redis);
    expect(two.processedBy.size).toBe(2);
    expect(one.state.components.map((c) => c.samples)).toEqual([24, 24, 24, 24]);
    expect(one.state.findings.flat().length).toBeGreaterThan(5);
    expect(two.state).toEqual(one.state);
  }, 600_000);
});
