/**
 * Scaling out: two `wearshift worker` processes on one Redis must end in the state one process reaches on
 * the same input — histories, registry, population sums, baselines, findings and incidents. Incidents follow
 * the order in which the engine sees the steps; the evaluation debounce (queues.ts) lets a burst be stored
 * completely, whichever process stores which result, before a component is evaluated.
 */
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import type { Redis } from 'ioredis';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { parseConfig } from '../../src/domain/configFile.ts';
import { incidentRules } from '../../src/incidents/policy.ts';
import { RedisIncidentStore } from '../../src/incidents/redisIncidentStore.ts';
import { createResultProducer } from '../../src/intake/producer.ts';
import { openQueue, QUEUE_NAMES, resolveQueueSettings } from '../../src/queue/queues.ts';
import { RedisStorage } from '../../src/storage/redisStorage.ts';
import { startCli } from '../helpers/cli.ts';
import { inventedFleet } from '../helpers/fleetCsv.ts';
import { drained } from '../helpers/queueDrain.ts';
import { startRedisServer, type RedisServer } from '../helpers/redisServer.ts';

// Groups of two components and population limits out of reach: findings then depend on the results only,
// not on which process evaluated a component when (see replay.test.ts).
const config = (prefix: string) => `
redis: { prefix: "${prefix}" }
detection: { measurands: [Fe, Cu], runningInHours: 0, baselineIntervals: 6 }
population: { minResults: 500 }
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
  const workers = Array.from({ length: processes }, () => startCli(['worker', '--config', file], { REDIS_URL: server.url, LOG_LEVEL: 'warn' }));
  const settings = resolveQueueSettings({ prefix });
  const queues = [QUEUE_NAMES.results, QUEUE_NAMES.evaluate].map((n) => openQueue(n, redis, settings));
  try {
    // Every process must be taking jobs before the results arrive, or the first one does all the work.
    const deadline = Date.now() + 60_000;
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
  const storage = new RedisStorage(redis, { prefix });
  const components = await storage.components();
  const groups = [...new Set(components.map((c) => c.group))].sort();
  const incidents = new RedisIncidentStore(redis, { rules: incidentRules(parseConfig(config(prefix))), prefix });
  return {
    components,
    histories: await Promise.all(components.map(async (c) => (await storage.revisions(c)).map((s) => `${s.sampleId}#${s.revision}`).sort())),
    findings: await Promise.all(components.map((c) => storage.findings(c))),
    population: await Promise.all(groups.map(async (g) => Object.entries(await storage.population(g)).map(([m, b]) => [m, [...b!].sort((x, y) => x[0] - y[0]).map(([e, s]) => [e, s.n, Number(s.sum.toPrecision(12))])]))),
    baselines: await Promise.all(groups.map((g) => storage.groupBaselines(g))),
    incidents: await Promise.all(components.map(async (c) => (await incidents.component(c)).incidents)),
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
  });
});
