/**
 * Sharding on Redis Cluster: a private cluster of 3 masters (tests/helpers/redisCluster.ts), two `wearshift worker`
 * processes named to it by REDIS_CLUSTER_NODES (the second with a history thread, `--history-threads 1`), keys and queues in 12 partitions, an invented fleet imported twice
 * with `wearshift import` (first as history jobs, `--history`; then a redelivery of every record). Every result
 * is stored once, the incidents are those `wearshift replay` gives on the same file, both processes took part, and
 * each of the three shards holds a share of the keys: the partitions, not one hash tag, decide where a component lives.
 */
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import type { Cluster } from 'ioredis';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { parseConfig } from '../../src/domain/configFile.ts';
import { incidentRules } from '../../src/incidents/policy.ts';
import { openPartitionedQueues, openSharedQueue, QUEUE_NAMES, resolveQueueSettings } from '../../src/queue/queues.ts';
import { hashSlot } from '../../src/redis/hashSlot.ts';
import { componentKeys, Partitions } from '../../src/redis/keys.ts';
import { RedisIncidents } from '../../src/redis/redisIncidents.ts';
import { RedisStore } from '../../src/redis/redisStore.ts';
import { runCli } from '../helpers/cli.ts';
import { fleetCsv, inventedFleet } from '../helpers/fleetCsv.ts';
import { startWearshift, stopAll, type WearshiftProcess } from '../helpers/processes.ts';
import { drained } from '../helpers/queueDrain.ts';
import { liftGearboxJudging } from '../helpers/populationFleet.ts';
import { replayVerdictRows, storedVerdictRows } from '../helpers/incidentVerdict.ts';
import { startRedisCluster, type RedisCluster } from '../../src/runtime/embeddedRedisCluster.ts';

const PREFIX = '{ws}';
const PARTITIONS = 12;
const CONFIG = `
redis: { prefix: "${PREFIX}", partitions: ${PARTITIONS} }${liftGearboxJudging(false)}`;
const UNITS = 18;
const SAMPLES = 30;

let cluster: RedisCluster;
let dir: string;
let redis: Cluster;

beforeAll(async () => {
  cluster = await startRedisCluster({ masters: 3 });
  redis = cluster.client();
  dir = mkdtempSync(join(tmpdir(), 'wearshift-cluster-test-'));
}, 120_000);
afterAll(async () => {
  await stopAll();
  await cluster?.dispose();
  if (dir) rmSync(dir, { recursive: true, force: true });
});

describe('two worker processes on a Redis Cluster of 3 masters', () => {
  it('store every result once, reach the incidents of replay, and spread the keys over the shards', async () => {
    const file = join(dir, 'fleet.csv');
    const configFile = join(dir, 'config.yaml');
    const fleet = inventedFleet({ units: UNITS, samplesPerUnit: SAMPLES, seed: 23 });
    writeFileSync(file, fleetCsv(fleet));
    writeFileSync(configFile, CONFIG);
    // No REDIS_URL: the cluster's seed nodes name the Redis for every command.
    const env = { REDIS_CLUSTER_NODES: cluster.seeds, REDIS_URL: '', LOG_LEVEL: 'warn' };

    const settings = resolveQueueSettings({ prefix: PREFIX });
    const partitions = new Partitions(PREFIX, PARTITIONS);
    const resultQueues = openPartitionedQueues(QUEUE_NAMES.results, redis, settings, partitions);
    const queues = [
      ...resultQueues,
      openSharedQueue(QUEUE_NAMES.history, redis, settings, partitions),
      ...openPartitionedQueues(QUEUE_NAMES.evaluate, redis, settings, partitions),
      openSharedQueue(QUEUE_NAMES.escalate, redis, settings, partitions),
    ];
    const workers: WearshiftProcess[] = [];
    try {
      // The second evaluates history months on a thread of its own too (its own connection to the cluster).
      // A few results at a time each (`--results-at-once`), so that the redelivery below is shared by both processes.
      for (let i = 0; i < 2; i++) workers.push(await startWearshift('worker', { env, args: ['--config', configFile, '--history-threads', String(i), '--results-at-once', '8'], readyTimeoutMs: 120_000 }));
      // Both processes take jobs from every partition before the results arrive.
      const deadline = Date.now() + 60_000;
      while ((await Promise.all(resultQueues.map((q) => q.getWorkersCount()))).some((n) => n < 2)) {
        if (Date.now() > deadline) throw new Error('the workers did not all come up on every partition');
        await new Promise((r) => setTimeout(r, 200));
      }

      // First as history jobs of 50 results (one queue for every partition), stored and evaluated month by month.
      const first = await runCli(['import', file, '--config', configFile, '--history', '--batch-size', '50'], env, 120_000);
      // The only line on stderr says which Redis the import writes to: the cluster, named by REDIS_CLUSTER_NODES.
      expect(first.stderr.trim().split('\n')).toEqual([expect.stringMatching(/^wearshift: Redis cluster .*\(REDIS_CLUSTER_NODES\)/)]);
      expect(first.code).toBe(0);
      expect(first.stdout).toContain(`${UNITS * SAMPLES} enqueued`);
      // A redelivery of every record, one job each, while the first copies are being processed.
      const again = await runCli(['import', file, '--config', configFile], env, 120_000);
      expect(again.code).toBe(0);
      await drained(queues, 600_000);
      // None failed: the history jobs were stored and evaluated (a completed one is removed).
      expect((await Promise.all(queues.map((q) => q.getFailedCount()))).every((n) => n === 0)).toBe(true);

      // Every result stored once: one revision per sampleId, in the component's own partition.
      const config = parseConfig(CONFIG);
      const storage = new RedisStore(redis, { prefix: PREFIX, partitions: PARTITIONS, config });
      const components = await storage.components();
      expect(components).toHaveLength(UNITS);
      const stored = (await Promise.all(components.map((c) => storage.revisions(c)))).flat().map((s) => `${s.sample.sampleId}#${s.sample.revision}`);
      expect(stored.sort()).toEqual(fleet.map((e) => `${e.sampleId}#${e.revision ?? 0}`).sort());
      expect(components.every((c) => c.samples === SAMPLES)).toBe(true);

      // Both processes took part.
      const completed = (await Promise.all(resultQueues.map((q) => q.getCompleted(0, 1000)))).flat();
      expect(new Set(completed.map((j) => j.processedBy)).size).toBe(2);

      // The incidents of replay on the same file.
      const store = new RedisIncidents(redis, { rules: incidentRules(config), prefix: PREFIX, partitions: PARTITIONS });
      const live = await storedVerdictRows(store, { withoutWithdrawn: true });
      const replayed = await runCli(['replay', file, '--config', configFile, '--json'], env, 300_000);
      expect(replayed.code).toBe(0);
      const verdicts = replayVerdictRows(replayed.stdout);
      expect(live.length).toBeGreaterThan(2);
      expect(live).toEqual(verdicts);

      // Each shard holds a share of the keys, and each component's keys sit on the shard serving its partition's slot.
      const perShard = await cluster.keysPerShard();
      const total = perShard.reduce((a, b) => a + b, 0);
      for (const n of perShard) expect(n / total).toBeGreaterThan(0.1);
      const nodeOf = (slot: number) => cluster.nodes.findIndex((n) => slot >= n.slots[0] && slot <= n.slots[1]);
      const shardsOfComponents = new Set<number>();
      for (const c of components) {
        const key = componentKeys(partitions.tag(partitions.of(c)), c).revisions;
        const slot = Number(await redis.cluster('KEYSLOT', key));
        const owner = cluster.nodes[nodeOf(slot)]!.client();
        expect(await owner.exists(key)).toBe(1);
        shardsOfComponents.add(nodeOf(slot));
      }
      expect(shardsOfComponents.size).toBe(3);
      // The partitions' tags land where the cluster says, four of the twelve on each shard.
      const partitionsPerShard = [0, 0, 0];
      for (const p of partitions.all()) {
        const slot = Number(await redis.cluster('KEYSLOT', partitions.tag(p)));
        expect(hashSlot(partitions.tag(p))).toBe(slot);
        partitionsPerShard[nodeOf(slot)]! += 1;
      }
      expect(partitionsPerShard).toEqual([4, 4, 4]);
      console.info(`keys per shard: ${perShard.join(', ')}`);
      // No script or multi-key command crossed slots, and no job failed for good (a loaded machine may make a slot
      // refresh time out and a job be retried; that is not a failure).
      for (const w of workers) expect(w.output()).not.toMatch(/CROSSSLOT|non local key|"msg":"job failed"/);
    } finally {
      await Promise.all(queues.map((q) => q.close()));
      for (const w of workers) expect(await w.stop()).toBe(0);
    }
  }, 900_000);
});
