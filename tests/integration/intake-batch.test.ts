/**
 * The largest batch the intake takes (5 000 records in one `POST /v1/results`) through the API's own request
 * connection, with its 2 s command timeout, against a private redis-server and real queue workers: every record is
 * accepted and stored once. The batch is written in parts, so a Redis that refuses writes in the middle of it (here:
 * full, `maxmemory` with `noeviction`, as production runs it) answers 503 after some parts are on the queue; once
 * those are stored, sending the whole request again stores nothing twice. Nothing here depends on the machine's
 * speed: the refusal comes from Redis's memory limit, and every wait is for the queues to drain.
 */
import type { Queue } from 'bullmq';
import type { Redis } from 'ioredis';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { ConfigSchema } from '../../src/domain/config.ts';
import { buildServer, type WearshiftServer } from '../../src/http/server.ts';
import { createResultProducer, WRITE_PART_RECORDS, type ResultProducer } from '../../src/queue/producer.ts';
import { openQueue, QUEUE_NAMES, resolveQueueSettings } from '../../src/queue/queues.ts';
import { startWorkers, type RunningWorkers } from '../../src/queue/workers.ts';
import { connectRedis, REQUEST_COMMAND_TIMEOUT_MS, type RedisConnection } from '../../src/redis/connection.ts';
import { RedisStore } from '../../src/redis/redisStore.ts';
import { accessTokensFromEnv } from '../../src/runtime/accessTokensFromEnv.ts';
import { silentLogger } from '../../src/telemetry/logger.ts';
import { createMetrics, type Metrics } from '../../src/telemetry/metrics.ts';
import { drained } from '../helpers/queueDrain.ts';
import { startRedisServer, type RedisServer } from '../helpers/redisServer.ts';

const INGEST = 'ingest-batch-5a7c31';
const RECORDS = 5000;
const COMPONENTS = 100;
const PER_COMPONENT = RECORDS / COMPONENTS;
/** Draining thousands of results on a busy shared machine: a bound that only stops a hang. */
const DRAIN_MS = 480_000;

let redis: RedisServer;
let client: Redis;
const opened: Array<{ close(): Promise<unknown> }> = [];

beforeAll(async () => {
  redis = await startRedisServer();
  client = redis.client();
}, 60_000);

afterAll(async () => {
  await client?.config('SET', 'maxmemory', '0').catch(() => undefined);
  for (const o of opened.reverse()) await o.close().catch(() => undefined);
  await redis?.dispose();
});

/** `RECORDS` results over `COMPONENTS` gearboxes, each sampleId once; `tag` keeps two batches apart. */
function batch(tag: string): Record<string, unknown>[] {
  const start = Date.parse('2025-01-01T08:00:00Z');
  return Array.from({ length: RECORDS }, (_, i) => {
    const c = i % COMPONENTS;
    const n = Math.floor(i / COMPONENTS);
    return {
      sampleId: `${tag}-${c}-${n}`,
      unit: `${tag}-U${c}`,
      component: 'gearbox',
      sampledAt: new Date(start + n * 86_400_000).toISOString(),
      oilHours: 100 + n * 10,
      readings: { Fe: 10 + ((n * 7 + c) % 11) / 2, Cu: 2 + (n % 5) / 4, Si: 4 + ((n + c) % 3) },
    };
  });
}

interface Api {
  readonly prefix: string;
  readonly app: WearshiftServer;
  readonly results: Queue;
  readonly evaluate: Queue;
  readonly store: RedisStore;
  readonly metrics: Metrics;
  /** Starts queue workers for the prefix; resolves when they are closed again. */
  startWorkers(): { close(): Promise<void> };
}

/** The API as `wearshift api` wires its intake: the producer on the request connection, with its command timeout. */
async function api(prefix: string): Promise<Api> {
  const request: RedisConnection = connectRedis(redis.url, 'request');
  opened.push({ close: async () => request.disconnect() });
  await new Promise((resolve) => request.once('ready', resolve));
  const producer: ResultProducer = createResultProducer({ connection: request, prefix });
  opened.push(producer);
  const metrics = createMetrics({ defaultMetrics: false });
  const app = await buildServer({ tokens: accessTokensFromEnv({ WEARSHIFT_TOKEN_INGEST: INGEST }), logger: silentLogger(), metrics, ping: () => request.ping(), producer });
  opened.push(app);
  await app.ready();
  const settings = resolveQueueSettings({ prefix });
  const results = openQueue(QUEUE_NAMES.results, client, settings);
  const evaluate = openQueue(QUEUE_NAMES.evaluate, client, settings);
  opened.push(results, evaluate);
  return {
    prefix,
    app,
    results,
    evaluate,
    store: new RedisStore(client, { prefix }),
    metrics,
    startWorkers() {
      const connection = connectRedis(redis.url, 'worker');
      const workers: RunningWorkers = startWorkers({ connection, config: ConfigSchema.parse({}), logger: silentLogger(), metrics }, { prefix });
      let closing: Promise<void> | undefined;
      const running = { close: () => (closing ??= workers.close().then(() => void connection.quit().catch(() => connection.disconnect()))) };
      opened.push(running);
      return running;
    },
  };
}

function post(app: WearshiftServer, records: unknown[]) {
  return app.inject({ method: 'POST', url: '/v1/results', headers: { authorization: `Bearer ${INGEST}`, 'content-type': 'application/json' }, payload: JSON.stringify(records) });
}

/** Results stored by the workers so far, by outcome (new, duplicate, …). */
async function storedByOutcome(metrics: Metrics): Promise<Record<string, number>> {
  const metric = await metrics.registry.getSingleMetric('wearshift_results_stored_total')!.get();
  return Object.fromEntries(metric.values.map((v) => [String(v.labels.status), v.value]));
}

/** Each component's stored revisions: every sampleId of the batch exactly once. */
async function expectStoredOnce(a: Api, tag: string): Promise<void> {
  for (let c = 0; c < COMPONENTS; c++) {
    const stored = await a.store.revisions({ unit: `${tag}-U${c}`, component: 'gearbox' });
    const ids = stored.map((s) => s.sample.sampleId).sort();
    expect(ids, `${tag}-U${c}`).toEqual(Array.from({ length: PER_COMPONENT }, (_, n) => `${tag}-${c}-${n}`).sort());
  }
}

describe('a batch of 5 000 results in one request', { timeout: 900_000 }, () => {
  it('is accepted whole through the request connection and every record is stored once', async () => {
    // The batch is written in parts far smaller than itself: no command grows with the request.
    expect(WRITE_PART_RECORDS).toBeLessThanOrEqual(RECORDS / 10);
    expect(REQUEST_COMMAND_TIMEOUT_MS).toBe(2000);
    const a = await api('{batch-whole}');
    const res = await post(a.app, batch('W'));
    expect(res.statusCode).toBe(202);
    const outcomes = res.json() as { status: string }[];
    expect(outcomes).toHaveLength(RECORDS);
    expect(outcomes.filter((o) => o.status !== 'accepted')).toEqual([]);
    expect(await a.results.count()).toBe(RECORDS);

    const workers = a.startWorkers();
    await drained([a.results, a.evaluate], DRAIN_MS);
    await workers.close();
    expect(await storedByOutcome(a.metrics)).toEqual({ new: RECORDS });
    await expectStoredOnce(a, 'W');
  });

  it('answered 503 part-way when Redis refuses writes, sent again after its first parts were stored: nothing is stored twice', async () => {
    const a = await api('{batch-partial}');
    const records = batch('P');
    // Room for about half the batch: Redis is full when its used memory passes maxmemory, and with noeviction it
    // refuses every write from then on. The room is measured with a part of the batch on another prefix, so it
    // follows this server's allocator rather than a guess.
    const probe = await api('{batch-probe}');
    const before = await usedMemory();
    expect((await post(probe.app, batch('Q').slice(0, 1000))).statusCode).toBe(202);
    const perThousand = (await usedMemory()) - before;
    expect(perThousand).toBeGreaterThan(0);
    await client.config('SET', 'maxmemory', String((await usedMemory()) + Math.round(2.5 * perThousand)));
    let first;
    const scriptsBefore = await scriptCalls();
    try {
      first = await post(a.app, records);
    } finally {
      await client.config('SET', 'maxmemory', '0');
    }
    const scriptsSent = (await scriptCalls()) - scriptsBefore;
    expect(first.statusCode).toBe(503);
    expect(first.headers['retry-after']).toBe('5');
    expect((first.json() as { message: string }).message).toContain('a result sent twice is stored once');
    // Part of the batch reached the queue before Redis refused: the resend below is the case that matters.
    const before503 = await a.results.count();
    expect(before503).toBeGreaterThan(0);
    expect(before503).toBeLessThan(RECORDS);
    // The batch went in parts, one after the other: once Redis refused, at most the rest of that part had been sent
    // (each job add is one script), not the whole remainder of the batch.
    expect(scriptsSent - before503).toBeLessThanOrEqual(WRITE_PART_RECORDS);
    expect(scriptsSent).toBeLessThan(RECORDS);

    const workers = a.startWorkers();
    await drained([a.results, a.evaluate], DRAIN_MS);
    expect(await storedByOutcome(a.metrics)).toEqual({ new: before503 });

    const again = await post(a.app, records);
    expect(again.statusCode).toBe(202);
    expect((again.json() as { status: string }[]).filter((o) => o.status !== 'accepted')).toEqual([]);
    await drained([a.results, a.evaluate], DRAIN_MS);
    await workers.close();
    // The records stored before the failure came again and were recognised; the rest were stored for the first time.
    expect(await storedByOutcome(a.metrics)).toEqual({ new: RECORDS, duplicate: before503 });
    await expectStoredOnce(a, 'P');
  });
});

async function usedMemory(): Promise<number> {
  const info = await client.info('memory');
  return Number(/^used_memory:(\d+)/m.exec(info)![1]);
}

/** Scripts Redis was asked to run (each job add is one), whether it ran, refused or failed them. */
async function scriptCalls(): Promise<number> {
  const info = await client.info('commandstats');
  let total = 0;
  for (const m of info.matchAll(/^cmdstat_(?:evalsha|eval):calls=(\d+),.*rejected_calls=(\d+)/gm)) total += Number(m[1]) + Number(m[2]);
  return total;
}
