/**
 * A responder's word on a sample in doubt, end to end on a private redis-server: a bottle of new oil sent in the
 * middle of a charge is held as a sampling finding; `POST …/samples/:sampleId/verdict` with a responder token
 * confirms it, rejects it or takes the word back, and the worker evaluates the component again from that sample.
 */
import type { AddressInfo } from 'node:net';
import type { Queue } from 'bullmq';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { parseConfig } from '../../src/domain/configFile.ts';
import { buildServer } from '../../src/http/server.ts';
import { createResultProducer, type ResultProducer } from '../../src/queue/producer.ts';
import { openPartitionedQueues, openQueue, QUEUE_NAMES, resolveQueueSettings } from '../../src/queue/queues.ts';
import { SampleVerdicts } from '../../src/queue/sampleVerdicts.ts';
import { startWorkers, type RunningWorkers } from '../../src/queue/workers.ts';
import { Partitions } from '../../src/redis/keys.ts';
import { RedisStore } from '../../src/redis/redisStore.ts';
import { RedisIncidents } from '../../src/redis/redisIncidents.ts';
import { incidentRules } from '../../src/incidents/policy.ts';
import { IncidentFilterSchema } from '../../src/incidents/listFilter.ts';
import { silentLogger } from '../../src/telemetry/logger.ts';
import { createMetrics } from '../../src/telemetry/metrics.ts';
import { drained } from '../helpers/queueDrain.ts';
import { startRedisServer, type RedisServer } from '../helpers/redisServer.ts';
import { accessTokensFromEnv } from '../../src/runtime/accessTokensFromEnv.ts';

/** The API's tokens, handed to the routes (never written into the process environment). */
const tokenEnv: NodeJS.ProcessEnv = {};

const RESPONDER = 'resp-verdict-51c2';
const VIEWER = 'view-verdict-77aa';
const config = parseConfig(`
detection: { measurands: [Fe, Cu], runningInHours: 0, baselineIntervals: 4 }
groups:
  - name: pump-gearboxes
    match: { component: gearbox }
`);
const prefix = '{verdict}';
const ref = { unit: 'PS7-P1', component: 'gearbox' };

let redis: RedisServer;
let workers: RunningWorkers;
let producer: ResultProducer;
let queues: Queue[];
let app: Awaited<ReturnType<typeof buildServer>>;
let store: RedisStore;
let base: string;
const saved = { ...process.env };

function event(i: number, readings: Record<string, number | string>) {
  return {
    sampleId: `V-${i}`,
    ...ref,
    sampledAt: new Date(Date.UTC(2026, 0, 1 + i * 10, 8)).toISOString(),
    unitHours: 1000 + i * 250,
    oilHours: i * 250,
    readings,
  };
}

beforeAll(async () => {
  tokenEnv.WEARSHIFT_TOKEN_RESPONDER = RESPONDER;
  tokenEnv.WEARSHIFT_TOKEN_VIEWER = VIEWER;
  redis = await startRedisServer();
  const client = redis.client();
  workers = startWorkers({ connection: client, config, logger: silentLogger() }, { prefix, backoffMs: 50 });
  const settings = resolveQueueSettings({ prefix });
  const partitions = new Partitions(prefix, 1);
  const evaluateQueues = openPartitionedQueues(QUEUE_NAMES.evaluate, client, settings, partitions);
  queues = [openQueue(QUEUE_NAMES.results, client, settings), ...evaluateQueues];
  producer = createResultProducer({ connection: client, prefix });
  store = new RedisStore(client, { prefix, config });
  app = await buildServer({ tokens: accessTokensFromEnv(tokenEnv),
    logger: silentLogger(),
    metrics: createMetrics({ defaultMetrics: false }),
    ping: () => client.ping(),
    sampleVerdicts: new SampleVerdicts(store, evaluateQueues, partitions),
  });
  await app.listen({ port: 0, host: '127.0.0.1' });
  base = `http://127.0.0.1:${(app.server.address() as AddressInfo).port}`;
});

afterAll(async () => {
  process.env = saved;
  await app?.close();
  await producer?.close();
  await workers?.close();
  await Promise.all((queues ?? []).map((q) => q.close()));
  await redis?.dispose();
});

const post = (sampleId: string, body: unknown, token = RESPONDER) =>
  fetch(`${base}/v1/units/${encodeURIComponent(ref.unit)}/components/${ref.component}/samples/${encodeURIComponent(sampleId)}/verdict`, {
    method: 'POST',
    headers: { authorization: `Bearer ${token}`, 'content-type': 'application/json' },
    body: JSON.stringify(body),
  });

async function statusOf(sampleId: string) {
  const records = await store.findings(ref);
  const at = records.find((r) => r.sampleId === sampleId);
  return { status: at?.status, sampling: (at?.findings ?? []).filter((f) => f.rule === 'sampling').map((f) => f.check) };
}

describe('a responder marks a sample in doubt', () => {
  it('holds a bottle of new oil, then follows confirmed, withdrawn and rejected through the worker', { timeout: 300_000 }, async () => {
    const healthy = [1, 2, 3, 4, 5].map((i) => event(i, { Fe: 8 + 6 * i, Cu: 2 + i, Ca: 2400, Zn: 1100, P: 950, Si: 4 }));
    const bottle = event(6, { Fe: 1, Cu: '<1', Ca: 2400, Zn: 1100, P: 950, Si: 4 });
    const after = event(7, { Fe: 52, Cu: 9, Ca: 2400, Zn: 1100, P: 950, Si: 4 });
    const outcomes = await producer.add([...healthy, bottle, after]);
    expect(outcomes.filter((o) => o.status !== 'accepted')).toEqual([]);
    await drained(queues, 120_000);
    expect(await statusOf('V-6')).toEqual({ status: 'in-doubt', sampling: ['new-oil-mid-charge'] });

    // Bad requests name the field and the reason; a viewer may look but not mark; an unknown sample is a 404.
    const bad = await post('V-6', { verdict: 'maybe', by: 'shift lead' });
    expect(bad.status).toBe(400);
    expect(((await bad.json()) as { message: string }).message).toMatch(/^body\.verdict: /);
    expect((await post('V-6', { verdict: 'confirmed' })).status).toBe(400);
    expect((await post('V-6', { verdict: 'confirmed', by: 'viewer' }, VIEWER)).status).toBe(403);
    expect((await post('V-6', { verdict: 'confirmed', by: 'nobody' }, 'no-such-token')).status).toBe(401);
    expect((await post('V-99', { verdict: 'confirmed', by: 'shift lead' })).status).toBe(404);
    // A sample nothing questioned takes no verdict: a machine's evidence is not taken out of its history by a word.
    const unquestioned = await post('V-7', { verdict: 'rejected', by: 'shift lead' });
    expect(unquestioned.status).toBe(409);
    expect(((await unquestioned.json()) as { error: string; message: string })).toMatchObject({ error: 'not-in-doubt', message: expect.stringMatching(/V-7.*not in doubt/) });
    const v7 = await statusOf('V-7');
    expect(v7.status).toBeUndefined();
    expect((await store.evaluationInput(ref))!.marks.has('V-7')).toBe(false);

    const confirmed = await post('V-6', { verdict: 'confirmed', by: 'shift lead' });
    expect(confirmed.status).toBe(202);
    await drained(queues, 120_000);
    expect((await statusOf('V-6')).status).toBe('confirmed');

    expect((await post('V-6', { verdict: 'withdrawn', by: 'shift lead' })).status).toBe(202);
    await drained(queues, 120_000);
    expect((await statusOf('V-6')).status).toBe('in-doubt');

    expect((await post('V-6', { verdict: 'rejected', by: 'lab desk' })).status).toBe(202);
    await drained(queues, 120_000);
    expect((await statusOf('V-6')).status).toBe('rejected');
    // The sampling incident the bottle opened no longer stands: withdrawn, with the sample.
    const incidents = new RedisIncidents(redis.client(), { rules: incidentRules(config), prefix });
    const all = await incidents.list(IncidentFilterSchema.parse({ state: 'all', unit: ref.unit }));
    const sampling = all.filter((i) => i.id.includes('sampling'));
    expect(sampling.length).toBeGreaterThan(0);
    expect(sampling.filter((i) => i.closed === null)).toEqual([]);
  });
});
