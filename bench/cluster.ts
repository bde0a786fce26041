/**
 * The pipeline on a private Redis Cluster of 3 masters (src/runtime/embeddedRedisCluster.ts): one `wearshift worker`
 * process named to it by REDIS_CLUSTER_NODES, keys and queues in 24 partitions, a backfill of 50 results per
 * component (the ratio of the projection: 50 million results over 1 million components). Measures how evenly the
 * shards hold the keys (target: each within ±20 % of the mean), the Redis server time and memory per result summed
 * over the shards, the worker's CPU per result, and projects from them what 1 million components and 50 million
 * results need.
 */
import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import type { Redis } from 'ioredis';
import { createResultProducer } from '../src/queue/producer.ts';
import { openPartitionedQueues, QUEUE_NAMES, resolveQueueSettings } from '../src/queue/queues.ts';
import { hashSlot } from '../src/redis/hashSlot.ts';
import { componentKeys, Partitions } from '../src/redis/keys.ts';
import { startRedisCluster } from '../src/runtime/embeddedRedisCluster.ts';
import { drainedAt, labFeed, pipelineMissing, redisWork, startClusterWorkerProcess, startReceiver, workersListening, writeConfig } from './pipeline.ts';
import { skipped, type PartResult } from './report.ts';
import type { RunOptions } from './runner.ts';
import { fmt, round } from './stats.ts';

const PREFIX = '{cbench}';
const PARTITIONS = 24;
const PER_COMPONENT = 50;
const SPREAD_TARGET = 0.2;
const PLACEMENT_COMPONENTS = 100_000;
/** Assumptions of the projection, stated in its notes. */
const PROJECTION = { components: 1_000_000, results: 50_000_000, shardMemoryGb: 16, shardBusyShare: 0.5, backfillHours: 24 } as const;

async function usedMemory(node: Redis): Promise<number> {
  return Number(/used_memory:(\d+)/.exec(await node.info('memory'))?.[1] ?? NaN);
}

export async function runCluster(o: RunOptions): Promise<PartResult> {
  const missing = pipelineMissing();
  if (missing !== undefined) return skipped('cluster', missing);
  const components = Math.max(30, Math.round(600 * o.scale));
  const cluster = await startRedisCluster({ masters: 3 });
  const receiver = await startReceiver();
  const dir = mkdtempSync(join(tmpdir(), 'wearshift-bench-cluster-'));
  const client = cluster.client();
  const nodes = cluster.nodes.map((n) => n.client());
  const settings = resolveQueueSettings({ prefix: PREFIX });
  const partitions = new Partitions(PREFIX, PARTITIONS);
  const queues = [...openPartitionedQueues(QUEUE_NAMES.results, client, settings, partitions), ...openPartitionedQueues(QUEUE_NAMES.evaluate, client, settings, partitions)];
  const configFile = writeConfig(dir, { prefix: PREFIX, webhookUrl: receiver.url, quietAfterDays: 30, partitions: PARTITIONS });
  const worker = startClusterWorkerProcess(cluster.seeds, configFile);
  const producer = createResultProducer({ connection: client, prefix: PREFIX, partitions: PARTITIONS });
  try {
    await workersListening(queues, 1, [worker], 120_000);
    const events = labFeed({ components, samplesPerComponent: PER_COMPONENT, faultyShare: 0.05, endsBeforeNowMs: 90 * 86_400_000, now: Date.now(), seed: o.seed + 3, unitPrefix: 'CL' });
    await Promise.all(nodes.map((n) => n.config('RESETSTAT')));
    const before = await Promise.all(nodes.map(usedMemory));
    const cpuBefore = worker.cpuSeconds();
    const t0 = performance.now();
    for (let i = 0; i < events.length; i += 500) await producer.add(events.slice(i, i + 500));
    const end = await drainedAt(queues, [worker], { pollMs: 200, timeoutMs: 3_600_000 });
    const seconds = (end - t0) / 1000;
    const cpu = worker.cpuSeconds() - cpuBefore;
    const work = await Promise.all(nodes.map((n) => redisWork(n)));
    const after = await Promise.all(nodes.map(usedMemory));
    const keys = await cluster.keysPerShard();
    const mean = keys.reduce((a, b) => a + b, 0) / keys.length;
    const spread = Math.max(...keys.map((k) => Math.abs(k - mean) / mean));
    // Where the keys of a large fleet go: each component's keys sit in its partition's slot, on the shard owning it.
    // The measured spread above carries the luck of a few dozen components; this one is the placement itself.
    const placed = cluster.nodes.map(() => 0);
    for (let i = 0; i < PLACEMENT_COMPONENTS; i++) {
      const slot = hashSlot(partitions.tag(partitions.of({ unit: `FLEET${i}`, component: i % 3 === 0 ? 'gearbox' : 'hydraulics' })));
      placed[cluster.nodes.findIndex((n) => slot >= n.slots[0] && slot <= n.slots[1])]! += 1;
    }
    const placementSpread = Math.max(...placed.map((k) => Math.abs(k - PLACEMENT_COMPONENTS / placed.length) / (PLACEMENT_COMPONENTS / placed.length)));
    const usPerResult = work.reduce((t, w) => t + w.usec, 0) / events.length;
    const perShardUs = work.map((w) => w.usec / events.length);
    const bytes = after.reduce((t, a, i) => t + a - before[i]!, 0);
    const bytesPerResult = bytes / events.length;
    // The component's own keys (MEMORY USAGE over them, every element counted), on a sample of components.
    const sample = [...new Set(events.map((e) => e.unit))].slice(0, 40);
    let componentBytes = 0;
    for (const unit of sample) {
      const ref = { unit, component: 'gearbox' };
      const c = componentKeys(partitions.tag(partitions.of(ref)), ref);
      for (const key of [c.revisions, c.winners, c.order, c.evaluation, c.steps, c.incidents]) componentBytes += Number((await client.memory('USAGE', key, 'SAMPLES', 0)) ?? 0);
    }
    componentBytes /= sample.length;
    const workerCpuMs = (1000 * cpu) / events.length;

    // Projection for 1 million components and 50 million results (50 per component, as measured).
    const memoryGb = (bytesPerResult * PROJECTION.results) / 1e9;
    const shardsForMemory = Math.ceil(memoryGb / PROJECTION.shardMemoryGb);
    // Redis runs commands on one core: a shard busy for shardBusyShare of the time.
    const shardResultsPerSec = (PROJECTION.shardBusyShare * 1e6) / usPerResult;
    const backfillRate = PROJECTION.results / (PROJECTION.backfillHours * 3600);
    const shardsForBackfill = Math.ceil(backfillRate / shardResultsPerSec);
    const workerCores = Math.ceil((backfillRate * workerCpuMs) / 1000);
    const met = spread <= SPREAD_TARGET && placementSpread <= SPREAD_TARGET;
    return {
      name: 'cluster',
      json: {
        results: events.length,
        components,
        partitions: PARTITIONS,
        shards: keys.length,
        wallSeconds: round(seconds),
        resultsPerSec: round(events.length / seconds),
        keysPerShard: keys,
        spread: round(spread),
        placement: { components: PLACEMENT_COMPONENTS, perShard: placed, spread: round(placementSpread) },
        redisUsPerResult: round(usPerResult),
        redisUsPerResultByShard: perShardUs.map((x) => round(x)),
        redisBytesPerResult: round(bytesPerResult),
        componentKeysBytes: round(componentBytes),
        workerCpuMsPerResult: round(workerCpuMs),
        projection: {
          ...PROJECTION,
          memoryGb: round(memoryGb),
          shardsForMemory,
          oneShardResultsPerSec: round(shardResultsPerSec),
          backfillResultsPerSec: round(backfillRate),
          shardsForBackfill,
          workerCoresForBackfill: workerCores,
        },
        target: { spreadAtMost: SPREAD_TARGET, met },
      },
      table: {
        columns: ['shard', 'keys', 'vs mean', 'Redis µs / result', 'memory MB'],
        rows: keys.map((k, i) => [`${i + 1} (port ${cluster.nodes[i]!.port})`, String(k), fmt(k / mean), fmt(perShardUs[i]!), fmt((after[i]! - before[i]!) / 2 ** 20)]),
      },
      notes: [
        `${events.length} results (${components} components × ${PER_COMPONENT}, older than 90 days), ${PARTITIONS} partitions, 1 worker process: ${fmt(seconds)} s, ${fmt(events.length / seconds)} results/s`,
        `keys within ${fmt(100 * spread)} % of the mean per shard (DBSIZE; ${components} components); placement of ${PLACEMENT_COMPONENTS.toLocaleString('en')} invented components: ${placed.join(' / ')}, within ${fmt(100 * placementSpread)} %; target ±${100 * SPREAD_TARGET} % for both: ${met ? 'MET' : 'MISSED'}`,
        `per result: Redis server time ${fmt(usPerResult)} µs (INFO commandstats, all shards), Redis memory ${fmt(bytesPerResult)} bytes (used_memory, all shards), worker CPU ${fmt(workerCpuMs)} ms; a component's own keys ${fmt(componentBytes / 1024)} KB at ${PER_COMPONENT} samples`,
        `projection, ${PROJECTION.components.toLocaleString('en')} components and ${PROJECTION.results.toLocaleString('en')} results: Redis ${fmt(memoryGb)} GB → ${shardsForMemory} shard(s) at ${PROJECTION.shardMemoryGb} GB each;`,
        `  one shard at ${100 * PROJECTION.shardBusyShare} % busy takes ${fmt(shardResultsPerSec)} results/s; a backfill of all of them in ${PROJECTION.backfillHours} h (${fmt(backfillRate)}/s) needs ${shardsForBackfill} shard(s) and ${workerCores} worker core(s)`,
      ],
    };
  } finally {
    await producer.close();
    await worker.stop();
    await Promise.all(queues.map((q) => q.close()));
    await receiver.close();
    await cluster.dispose();
    rmSync(dir, { recursive: true, force: true });
  }
}
