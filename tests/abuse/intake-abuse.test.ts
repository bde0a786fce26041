/**
 * Hostile and careless input on POST /v1/results: the API built with buildServer over a private
 * redis-server, with the queue workers running in-process so that what is accepted is seen stored. Every
 * bad record gets an outcome naming its index, field and reason; the valid records of the same request are
 * stored all the same. Whole-request refusals (413, a body that is not JSON) are documented and accept
 * nothing. (Covered elsewhere, not repeated: a mixed batch, NDJSON line numbers, the 64 kB limit and the
 * ingest token in tests/integration/http.test.ts; hostile names in e-mail headers in
 * tests/integration/notify-email.test.ts.)
 */
import type { Queue } from 'bullmq';
import type { Redis } from 'ioredis';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { parseConfig } from '../../src/domain/configFile.ts';
import { buildServer, type WearshiftServer } from '../../src/http/server.ts';
import { createResultProducer, type ResultProducer } from '../../src/queue/producer.ts';
import { openQueue, QUEUE_NAMES, resolveQueueSettings } from '../../src/queue/queues.ts';
import { startWorkers, type RunningWorkers } from '../../src/queue/workers.ts';
import { silentLogger } from '../../src/telemetry/logger.ts';
import { createMetrics } from '../../src/telemetry/metrics.ts';
import { RedisStore } from '../../src/redis/redisStore.ts';
import { drained } from '../helpers/queueDrain.ts';
import { startRedisServer, type RedisServer } from '../helpers/redisServer.ts';
import { accessTokensFromEnv } from '../../src/runtime/accessTokensFromEnv.ts';

/** The API's tokens, handed to the routes (never written into the process environment). */
const tokenEnv: NodeJS.ProcessEnv = {};

const prefix = '{abuse}';
const INGEST = 'ingest-abuse-6c0d2a';
const LIMIT = 256 * 1024;

let redis: RedisServer;
let client: Redis;
let app: WearshiftServer;
let producer: ResultProducer;
let workers: RunningWorkers;
let queues: Queue[];
let storage: RedisStore;
const saved = { ...process.env };

beforeAll(async () => {
  redis = await startRedisServer();
  client = redis.client();
  tokenEnv.WEARSHIFT_TOKEN_INGEST = INGEST;
  const config = parseConfig(`redis: { prefix: "${prefix}" }`);
  producer = createResultProducer({ connection: client, prefix });
  storage = new RedisStore(client, { prefix });
  workers = startWorkers({ connection: client, config, logger: silentLogger() }, { prefix });
  const settings = resolveQueueSettings({ prefix });
  queues = [openQueue(QUEUE_NAMES.results, client, settings), openQueue(QUEUE_NAMES.evaluate, client, settings)];
  app = await buildServer({ tokens: accessTokensFromEnv(tokenEnv), logger: silentLogger(), metrics: createMetrics({ defaultMetrics: false }), ping: () => client.ping(), producer, bodyLimitBytes: LIMIT });
  await app.ready();
});

afterAll(async () => {
  process.env = saved;
  await app?.close();
  await workers?.close();
  await producer?.close();
  await Promise.all(queues.map((q) => q.close()));
  await redis?.dispose();
});

let serial = 0;
const valid = (overrides: Record<string, unknown> = {}) => ({
  sampleId: `AB-${++serial}`,
  unit: 'LS9-Weir Street',
  component: 'gearbox',
  sampledAt: new Date(Date.UTC(2025, 0, 1) + serial * 3_600_000).toISOString(),
  oilHours: 100 + serial,
  readings: { Fe: 10 },
  ...overrides,
});

interface Outcome {
  index: number;
  line?: number;
  sampleId?: string;
  status: 'accepted' | 'rejected';
  errors?: { path: string; reason: string }[];
}

const post = (payload: string, contentType = 'application/json') =>
  app.inject({ method: 'POST', url: '/v1/results', headers: { authorization: `Bearer ${INGEST}`, 'content-type': contentType }, payload });

async function storedIds(): Promise<Set<string>> {
  await drained(queues);
  const all = await Promise.all((await storage.components()).map((c) => storage.revisions(c)));
  return new Set(all.flat().map((s) => s.sample.sampleId));
}

/** Sends `bad` between two valid records; expects 202, the bad one rejected at `path` for `reason`, both valid ones stored. */
async function rejectedBeside(bad: unknown, path: string, reason: RegExp): Promise<Outcome> {
  const before = valid();
  const after = valid();
  const res = await post(JSON.stringify([before, bad, after]));
  expect(res.statusCode).toBe(202);
  const outcomes = res.json<Outcome[]>();
  expect(outcomes.map((o) => [o.index, o.status])).toEqual([
    [0, 'accepted'],
    [1, 'rejected'],
    [2, 'accepted'],
  ]);
  expect(outcomes[1]!.errors!.map((e) => e.path)).toContain(path);
  expect(outcomes[1]!.errors!.find((e) => e.path === path)!.reason).toMatch(reason);
  const stored = await storedIds();
  expect(stored.has(before.sampleId) && stored.has(after.sampleId)).toBe(true);
  return outcomes[1]!;
}

describe('records that are wrong in themselves', () => {
  it('wrong types name the field', async () => {
    await rejectedBeside(valid({ sampleId: 123 }), 'sampleId', /sampleId must be text/);
    await rejectedBeside(valid({ oilChanged: 'yes' }), 'oilChanged', /oilChanged must be true or false/);
    await rejectedBeside(valid({ unitHours: '250' }), 'unitHours', /expected number, received string/);
    await rejectedBeside(valid({ readings: [10, 12] }), 'readings', /expected record, received array/);
    await rejectedBeside(valid({ readings: { Fe: { value: 10 } } }), 'readings.Fe', /expected a finite number, a censored value/);
    await rejectedBeside(valid({ revision: 1.5 }), 'revision', /expected int/);
  });

  it('negative hours and top-up are refused, not clipped to zero', async () => {
    await rejectedBeside(valid({ oilHours: -1 }), 'oilHours', /oilHours must not be negative/);
    await rejectedBeside(valid({ unitHours: -0.5 }), 'unitHours', /unitHours must not be negative/);
    await rejectedBeside(valid({ topUpLitres: -2 }), 'topUpLitres', /topUpLitres must not be negative/);
    await rejectedBeside(valid({ oilHours: 1e8 }), 'oilHours', /implausibly large/);
  });

  it('numbers JSON cannot carry: 1e999 parses to Infinity and is refused as a reading', async () => {
    const text = JSON.stringify([valid(), valid({ readings: { Fe: 0 } }), valid()]).replace('"Fe":0', '"Fe":1e999');
    expect(text).toContain('1e999');
    const res = await post(text);
    expect(res.statusCode).toBe(202);
    const outcomes = res.json<Outcome[]>();
    expect(outcomes[1]).toMatchObject({ status: 'rejected', errors: [{ path: 'readings.Fe', reason: expect.stringMatching(/finite number/) }] });
  });

  it('unknown measurands are named, never dropped silently', async () => {
    const o = await rejectedBeside(valid({ readings: { Fe: 10, Qq: 3, fe: 2 } }), 'readings.Qq', /unknown measurand/);
    expect(o.errors!.map((e) => e.path).sort()).toEqual(['readings.Qq', 'readings.fe']);
  });

  it('control characters, line breaks and invisible characters in names are refused by the schema', async () => {
    await rejectedBeside(valid({ unit: 'LS9\r\nBcc: everyone@plant.example' }), 'unit', /may hold letters, digits/);
    await rejectedBeside(valid({ component: 'gear\u0000box' }), 'component', /may hold letters, digits/);
    await rejectedBeside(valid({ unit: 'LS9\u202eesuoh' }), 'unit', /may hold letters, digits/);
    await rejectedBeside(valid({ unit: 'LS\u200b9' }), 'unit', /may hold letters, digits/);
    await rejectedBeside(valid({ sampleId: '../../etc/passwd' }), 'sampleId', /starting with a letter or digit/);
    await rejectedBeside(valid({ unit: 'x'.repeat(81) }), 'unit', /at most 80 characters/);
  });

  it('dates: ahead of the clock, without a zone, or impossible', async () => {
    await rejectedBeside(valid({ sampledAt: '9999-12-31T23:59:59Z' }), 'sampledAt', /lies in the future/);
    await rejectedBeside(valid({ sampledAt: '2025-03-01T08:00:00' }), 'sampledAt', /with a time zone/);
    await rejectedBeside(valid({ sampledAt: '2025-02-30T08:00:00Z' }), 'sampledAt', /ISO 8601/);
    await rejectedBeside(valid({ sampledAt: 1740816000000 }), 'sampledAt', /./);
  });

  it('deep nesting in a field is refused at that field without exhausting the stack', async () => {
    let deep = '1';
    for (let i = 0; i < 20_000; i++) deep = `[${deep}]`;
    const text = `[${JSON.stringify(valid())},${JSON.stringify(valid({ readings: { Fe: 0 } })).replace('"Fe":0', `"Fe":${deep}`)},${JSON.stringify(valid())}]`;
    expect(text.length).toBeLessThan(LIMIT);
    const res = await post(text);
    expect(res.statusCode).toBe(202);
    expect(res.json<Outcome[]>()[1]).toMatchObject({ status: 'rejected', errors: [{ path: 'readings.Fe' }] });
  });

  it('a body nested deeply as a whole is one record per element, each refused', async () => {
    let deep = '{}';
    for (let i = 0; i < 20_000; i++) deep = `[${deep}]`;
    const res = await post(deep);
    expect(res.statusCode).toBe(422);
    expect(res.json<Outcome[]>()).toEqual([{ index: 0, status: 'rejected', errors: [{ path: '', reason: expect.stringMatching(/expected object, received array/) }] }]);
  });
});

describe('requests refused as a whole (nothing in them is accepted)', () => {
  it('a body above the limit: 413 with the limit in the message, also as NDJSON', async () => {
    const before = (await storedIds()).size;
    const lines = Array.from({ length: 3000 }, () => JSON.stringify(valid()));
    for (const [payload, type] of [[`[${lines.join(',')}]`, 'application/json'], [lines.join('\n'), 'application/x-ndjson']] as const) {
      expect(payload.length).toBeGreaterThan(LIMIT);
      const res = await post(payload, type);
      expect(res.statusCode).toBe(413);
      expect(res.json()).toEqual({ error: 'payload-too-large', message: 'the request body exceeds the limit of 256 kB; send the results in smaller batches', maxBytes: LIMIT });
    }
    expect((await storedIds()).size).toBe(before);
  });

  it('NaN in a JSON body: 400 naming the parse error; in NDJSON only its line is refused', async () => {
    const json = await post(`[${JSON.stringify(valid())},${JSON.stringify(valid({ readings: { Fe: 0 } })).replace('"Fe":0', '"Fe":NaN')}]`);
    expect(json.statusCode).toBe(400);
    expect(json.json()).toMatchObject({ error: 'bad-request', message: expect.stringMatching(/JSON|Unexpected token/) });

    const keep = valid();
    const ndjson = [JSON.stringify(keep), JSON.stringify(valid({ readings: { Fe: 0 } })).replace('"Fe":0', '"Fe":NaN'), JSON.stringify(valid({ readings: { Fe: 0 } })).replace('"Fe":0', '"Fe":Infinity')].join('\n');
    const res = await post(ndjson, 'application/x-ndjson');
    expect(res.statusCode).toBe(202);
    const outcomes = res.json<Outcome[]>();
    expect(outcomes.map((o) => [o.line, o.status])).toEqual([
      [1, 'accepted'],
      [2, 'rejected'],
      [3, 'rejected'],
    ]);
    expect(outcomes[1]!.errors![0]!.reason).toMatch(/^not valid JSON: /);
    expect((await storedIds()).has(keep.sampleId)).toBe(true);
  });

  it('a __proto__ key: fastify refuses the body (400) rather than let it reach the schema', async () => {
    const before = (await storedIds()).size;
    const res = await post(`[${JSON.stringify(valid())},{"sampleId":"AB-P","__proto__":{"admin":true}}]`);
    expect(res.statusCode).toBe(400);
    // The one answer for every body the JSON parser refuses, in the documented Error shape.
    expect(res.json()).toEqual({ error: 'bad-request', message: 'the body is not valid JSON, but the content type says it is' });
    expect((await storedIds()).size).toBe(before);
  });

  it('an unsupported media type: 415 with a message', async () => {
    const res = await post(JSON.stringify(valid()), 'text/csv');
    expect(res.statusCode).toBe(415);
    expect(res.json()).toMatchObject({ error: 'unsupported-media-type', message: expect.stringMatching(/"text\/csv".*application\/json or application\/x-ndjson/) });
  });

  it('an empty array or empty NDJSON: 400, the body holds no result', async () => {
    expect((await post('[]')).statusCode).toBe(400);
    expect((await post('\n\n', 'application/x-ndjson')).statusCode).toBe(400);
  });
});

describe('component identity', () => {
  it('a slash in a unit or component name is refused, so that two compartments can never share one history', async () => {
    // "Line 2" / "Pump 3/gearbox" and "Line 2/Pump 3" / "gearbox" would both be "Line 2/Pump 3/gearbox".
    const a = valid({ unit: 'Line 2', component: 'Pump 3/gearbox' });
    const b = valid({ unit: 'Line 2/Pump 3', component: 'gearbox' });
    const c = valid({ unit: 'Line 2 Pump 3', component: 'gearbox' });
    const res = await post(JSON.stringify([a, b, c]));
    const outcomes = res.json<Outcome[]>();
    expect(outcomes.map((o) => o.status)).toEqual(['rejected', 'rejected', 'accepted']);
    expect(outcomes[0]!.errors).toEqual([{ path: 'component', reason: expect.stringMatching(/may not contain "\/"/) }]);
    expect(outcomes[1]!.errors).toEqual([{ path: 'unit', reason: expect.stringMatching(/may not contain "\/"/) }]);
    await drained(queues);
    expect((await storage.revisions({ unit: 'Line 2 Pump 3', component: 'gearbox' })).map((s) => s.sample.sampleId)).toEqual([c.sampleId]);
  });
});
