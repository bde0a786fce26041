/**
 * `wearshift_results_accepted_total{path}` counts results however they came in. The HTTP API counts its own as it
 * accepts them; `wearshift import` and integrators' producers run in processes without /metrics, so the worker that
 * takes their jobs counts them, once per job, by the way in the job carries. Against a private redis-server, with the
 * real `wearshift import` command and real producers.
 */
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import type { Queue } from 'bullmq';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { parseConfig } from '../../src/domain/configFile.ts';
import { validateBatch } from '../../src/intake/validate.ts';
import { createResultProducer } from '../../src/queue/producer.ts';
import { openQueue, QUEUE_NAMES, resolveQueueSettings } from '../../src/queue/queues.ts';
import { startWorkers, type RunningWorkers } from '../../src/queue/workers.ts';
import { silentLogger } from '../../src/telemetry/logger.ts';
import { createMetrics, type Metrics } from '../../src/telemetry/metrics.ts';
import { runCli } from '../helpers/cli.ts';
import { drained } from '../helpers/queueDrain.ts';
import { startRedisServer, type RedisServer } from '../helpers/redisServer.ts';

const PREFIX = '{intake-paths}';
const config = parseConfig(`redis: { prefix: "${PREFIX}" }`);

let redis: RedisServer;
let dir: string;
let metrics: Metrics;
let workers: RunningWorkers;
let queues: Queue[];

/** Results of one unit, a week apart, in the past. */
function results(unit: string, n: number): Record<string, unknown>[] {
  const start = Date.now() - 400 * 86_400_000;
  return Array.from({ length: n }, (_, i) => ({
    sampleId: `${unit}-${i + 1}`,
    unit,
    component: 'gearbox',
    sampledAt: new Date(start + i * 7 * 86_400_000).toISOString(),
    oilHours: 100 * (i + 1),
    readings: { Fe: 10 + i, Cu: 2 },
  }));
}

/** The counter's samples by label set, as /metrics writes them. */
async function accepted(): Promise<Record<string, number>> {
  const text = await metrics.registry.metrics();
  const out: Record<string, number> = {};
  for (const m of text.matchAll(/^wearshift_results_accepted_total\{path="([^"]+)"\} (\S+)$/gm)) out[m[1]!] = Number(m[2]);
  return out;
}

beforeAll(async () => {
  redis = await startRedisServer();
  dir = mkdtempSync(join(tmpdir(), 'wearshift-intake-paths-'));
  metrics = createMetrics({ defaultMetrics: false });
  const connection = redis.client();
  workers = startWorkers({ connection, config, logger: silentLogger(), metrics, target: { kind: 'single', url: redis.url } }, { prefix: PREFIX, backoffMs: 50 });
  const settings = resolveQueueSettings({ prefix: PREFIX });
  queues = [QUEUE_NAMES.results, QUEUE_NAMES.evaluate, QUEUE_NAMES.history].map((name) => openQueue(name, connection, settings));
}, 120_000);

afterAll(async () => {
  await workers?.close();
  await Promise.all((queues ?? []).map((q) => q.close()));
  await redis?.dispose();
  rmSync(dir, { recursive: true, force: true });
});

describe('results accepted, by the way they came in', () => {
  it('counts the records of wearshift import, of a producer and of a history, each once, and leaves HTTP to the API', async () => {
    expect(await accepted()).toEqual({});

    // The real command line, live and as a history: its process has no /metrics, the worker counts its jobs.
    const file = join(dir, 'results.jsonl');
    writeFileSync(file, `${results('IMP', 3).map((r) => JSON.stringify(r)).join('\n')}\n`);
    const configFile = join(dir, 'config.yaml');
    writeFileSync(configFile, `redis: { prefix: "${PREFIX}" }\n`);
    const live = await runCli(['import', file, '--config', configFile], { REDIS_URL: redis.url });
    expect(live.code, live.stderr).toBe(0);
    writeFileSync(file, `${results('HIS', 4).map((r) => JSON.stringify(r)).join('\n')}\n`);
    const history = await runCli(['import', file, '--history', '--config', configFile], { REDIS_URL: redis.url });
    expect(history.code, history.stderr).toBe(0);
    await drained(queues);
    expect(await accepted()).toEqual({ import: 7 });

    // An integrator's producer: live results and a history.
    const producer = createResultProducer({ connection: redis.url, prefix: PREFIX });
    try {
      expect((await producer.add(results('PRO', 2))).map((o) => o.status)).toEqual(['accepted', 'accepted']);
      const validated = validateBatch(results('PRH', 5), { now: Date.now() });
      await producer.enqueueHistory(validated.accepted, 2);
    } finally {
      await producer.close();
    }
    await drained(queues);
    expect(await accepted()).toEqual({ import: 7, producer: 7 });

    // The HTTP API's producer: the API counted these already, the worker does not count them again.
    const api = createResultProducer({ connection: redis.url, prefix: PREFIX, origin: 'http' });
    try {
      await api.add(results('API', 2));
    } finally {
      await api.close();
    }
    // A job added to the queue directly names no way in.
    await queues[0]!.add('result', results('RAW', 1)[0]);
    await drained(queues);
    expect(await accepted()).toEqual({ import: 7, producer: 7, queue: 1 });
    // Every one of them was stored: the counts above are of results the workers took.
    const stored = (await metrics.registry.metrics()).match(/^wearshift_results_stored_total\{status="new"\} (\S+)$/m);
    expect(Number(stored?.[1])).toBe(7 + 7 + 2 + 1);
  }, 600_000);

  it('a job taken again (a retry, or a stalled job taken over) counts nothing more', async () => {
    // Stored and counted once; then the same job is put back on the queue and taken again: no new count.
    const producer = createResultProducer({ connection: redis.url, prefix: PREFIX });
    const before = (await accepted()).producer ?? 0;
    try {
      await producer.add(results('RTY', 1));
    } finally {
      await producer.close();
    }
    await drained(queues);
    expect((await accepted()).producer).toBe(before + 1);
    const done = (await queues[0]!.getJobs(['completed'])).find((j) => (j.data as { sampleId?: string }).sampleId === 'RTY-1');
    expect(done?.name).toBe('result:producer');
    await done!.retry('completed');
    await drained(queues);
    expect(await done!.getState()).toBe('completed');
    expect((await accepted()).producer).toBe(before + 1);
  }, 120_000);
});
