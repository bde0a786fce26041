/**
 * The HTTP API over a real socket, with a private redis-server behind the result intake.
 */
import type { Queue } from 'bullmq';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { buildServer, type WearshiftServer } from '../../src/http/server.ts';
import { createResultProducer, type ResultProducer } from '../../src/queue/producer.ts';
import { openQueue, QUEUE_NAMES, resolveQueueSettings } from '../../src/queue/queues.ts';
import { silentLogger } from '../../src/telemetry/logger.ts';
import { createMetrics } from '../../src/telemetry/metrics.ts';
import { connectRedis } from '../../src/redis/connection.ts';
import { startRedisServer, type RedisServer } from '../helpers/redisServer.ts';
import { accessTokensFromEnv } from '../../src/runtime/accessTokensFromEnv.ts';

/** The API's tokens, handed to the routes (never written into the process environment). */
const tokenEnv: NodeJS.ProcessEnv = {};

const INGEST = 'ingest-token-5f2c9a';
const VIEWER = 'viewer-token-81be07';
const prefix = '{http}';

let server: RedisServer;
let app: WearshiftServer;
let base: string;
let producer: ResultProducer;
let results: Queue;
let pingRedis: ReturnType<typeof connectRedis>;

const good = (n: number) => ({ sampleId: `H-${n}`, unit: 'LS7-Quarry Road', component: 'gearbox', sampledAt: '2025-06-01T08:00:00Z', oilHours: 250, readings: { Fe: 12, Si: '<1' } });

beforeAll(async () => {
  server = await startRedisServer();
  tokenEnv.WEARSHIFT_TOKEN_INGEST = `unused-one-token-4d2a, ${INGEST}`;
  tokenEnv.WEARSHIFT_TOKEN_VIEWER = VIEWER;
  pingRedis = connectRedis(server.url, 'request');
  producer = createResultProducer({ connection: server.url, prefix });
  results = openQueue(QUEUE_NAMES.results, server.client(), resolveQueueSettings({ prefix }));
  app = await buildServer({ tokens: accessTokensFromEnv(tokenEnv), logger: silentLogger(), metrics: createMetrics({ defaultMetrics: false }), ping: () => pingRedis.ping(), producer, bodyLimitBytes: 64 * 1024 });
  base = await app.listen({ port: 0, host: '127.0.0.1' });
});

afterAll(async () => {
  await app?.close();
  await producer?.close();
  await results?.close();
  pingRedis?.disconnect();
  await server?.dispose();
});

const post = (body: string, headers: Record<string, string>) => fetch(`${base}/v1/results`, { method: 'POST', body, headers });
const auth = (token: string) => ({ authorization: `Bearer ${token}` });

describe('POST /v1/results', () => {
  it('accepts the valid records of a mixed batch and names index, field and reason of the others', async () => {
    const before = await results.getJobCountByTypes('waiting');
    const batch = [good(1), { ...good(2), readings: { Fe: -3 } }, { ...good(3), sampledAt: new Date(Date.now() + 3 * 86_400_000).toISOString() }, good(4), { sampleId: 'H-5' }];
    const res = await post(JSON.stringify(batch), { 'content-type': 'application/json', ...auth(INGEST) });
    expect(res.status).toBe(202);
    const outcomes = (await res.json()) as Array<{ index: number; sampleId?: string; status: string; errors?: Array<{ path: string; reason: string }> }>;
    expect(outcomes.map((o) => [o.index, o.sampleId, o.status])).toEqual([
      [0, 'H-1', 'accepted'],
      [1, 'H-2', 'rejected'],
      [2, 'H-3', 'rejected'],
      [3, 'H-4', 'accepted'],
      [4, 'H-5', 'rejected'],
    ]);
    expect(outcomes[1]!.errors).toEqual([{ path: 'readings.Fe', reason: 'must not be negative (got -3)' }]);
    expect(outcomes[2]!.errors![0]).toMatchObject({ path: 'sampledAt', reason: expect.stringMatching(/future/) });
    expect(outcomes[4]!.errors!.map((e) => e.path)).toEqual(expect.arrayContaining(['unit', 'component', 'sampledAt', 'readings']));
    expect((await results.getJobCountByTypes('waiting')) - before).toBe(2);
  });

  it('takes one event on its own', async () => {
    const res = await post(JSON.stringify(good(10)), { 'content-type': 'application/json', ...auth(INGEST) });
    expect(res.status).toBe(202);
    expect(await res.json()).toEqual([{ index: 0, sampleId: 'H-10', status: 'accepted' }]);
  });

  it('takes NDJSON, reporting a line that is not JSON with its line number', async () => {
    const body = [JSON.stringify(good(20)), '', '{"sampleId": "H-21", oops', JSON.stringify(good(22))].join('\n');
    const res = await post(body, { 'content-type': 'application/x-ndjson', ...auth(INGEST) });
    expect(res.status).toBe(202);
    const outcomes = (await res.json()) as Array<{ index: number; line: number; status: string; errors?: Array<{ reason: string }> }>;
    expect(outcomes.map((o) => [o.index, o.line, o.status])).toEqual([
      [0, 1, 'accepted'],
      [1, 3, 'rejected'],
      [2, 4, 'accepted'],
    ]);
    expect(outcomes[1]!.errors![0]!.reason).toMatch(/not valid JSON/);
  });

  it('answers 422 when no record is valid', async () => {
    const res = await post(JSON.stringify([{ ...good(30), unit: '' }]), { 'content-type': 'application/json', ...auth(INGEST) });
    expect(res.status).toBe(422);
    expect(((await res.json()) as Array<{ errors: Array<{ path: string }> }>)[0]!.errors[0]!.path).toBe('unit');
  });

  it('refuses a body above the limit with 413 and a clear message', async () => {
    const big = JSON.stringify(Array.from({ length: 800 }, (_, i) => good(1000 + i)));
    expect(big.length).toBeGreaterThan(64 * 1024);
    const res = await post(big, { 'content-type': 'application/json', ...auth(INGEST) });
    expect(res.status).toBe(413);
    expect(((await res.json()) as { message: string }).message).toMatch(/exceeds the limit of 64 kB/);
  });

  it('needs an ingest token: 401 with WWW-Authenticate without one or with an unknown one, 403 for a viewer', async () => {
    const none = await post(JSON.stringify(good(40)), { 'content-type': 'application/json' });
    expect(none.status).toBe(401);
    expect(none.headers.get('www-authenticate')).toMatch(/^Bearer/);
    const unknown = await post(JSON.stringify(good(40)), { 'content-type': 'application/json', ...auth('guess') });
    expect(unknown.status).toBe(401);
    const viewer = await post(JSON.stringify(good(40)), { 'content-type': 'application/json', ...auth(VIEWER) });
    expect(viewer.status).toBe(403);
  });
});

describe('probes and metrics', () => {
  it('serves metrics to a viewer only, with intake counters', async () => {
    expect((await fetch(`${base}/metrics`)).status).toBe(401);
    expect((await fetch(`${base}/metrics`, { headers: auth(INGEST) })).status).toBe(403);
    const res = await fetch(`${base}/metrics`, { headers: auth(VIEWER) });
    expect(res.status).toBe(200);
    expect(res.headers.get('content-type')).toMatch(/^text\/plain/);
    const text = await res.text();
    expect(text).toMatch(/^wearshift_results_accepted_total\{path="http"\} [1-9]/m);
    expect(text).toMatch(/^wearshift_results_rejected_total\{path="http",reason="future",field="sampledAt"\} 1$/m);
    expect(text).toMatch(/^wearshift_results_rejected_total\{path="http",reason="reading",field="readings"\} 1$/m);
  });

  it('/healthz answers; /readyz follows Redis: 200 while it answers, 503 when it is gone', async () => {
    expect((await fetch(`${base}/healthz`)).status).toBe(200);
    expect((await fetch(`${base}/readyz`)).status).toBe(200);
    await server.stop();
    const down = await fetch(`${base}/readyz`);
    expect(down.status).toBe(503);
    expect(((await down.json()) as { status: string }).status).toBe('unavailable');
    expect((await fetch(`${base}/healthz`)).status).toBe(200);
    await server.start();
    // The client reconnects with backoff; bounded generously for a busy machine, ends as soon as Redis answers.
    const deadline = Date.now() + 120_000;
    let status = 0;
    while (Date.now() < deadline && status !== 200) {
      await new Promise((r) => setTimeout(r, 200));
      status = (await fetch(`${base}/readyz`)).status;
    }
    expect(status).toBe(200);
  });
});
