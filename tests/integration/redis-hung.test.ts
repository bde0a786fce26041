/**
 * A Redis that keeps its sockets open but answers nothing (a private redis-server frozen with SIGSTOP, as a wedged
 * or swapped-out process would be): every API route that needs it answers 503 with Retry-After instead of holding
 * the caller, /healthz keeps answering, and once Redis goes on (SIGCONT) the API serves again.
 */
import type { Queue } from 'bullmq';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { openApiDocument } from '../../src/contracts/openapi.ts';
import { buildServer, type WearshiftServer } from '../../src/http/server.ts';
import { UNAVAILABLE_RETRY_AFTER_S } from '../../src/http/unavailable.ts';
import { createResultProducer, type ResultProducer } from '../../src/queue/producer.ts';
import { REQUEST_COMMAND_TIMEOUT_MS, type RedisConnection } from '../../src/redis/connection.ts';
import { openAlarmIncident, requestWithIncidents, serverOptions } from '../helpers/apiParts.ts';
import { startRedisServer, type RedisServer } from '../helpers/redisServer.ts';

const prefix = '{hung}';
const TOKENS = { ingest: 'ingest-hung-4c1e', responder: 'resp-hung-8d20a1b7', viewer: 'view-hung-3f7b92c4' };
const NOW = new Date();
const ID = 'PS9-P1/gearbox@LAB-9001';
/** Far above the command timeout, far below "no answer at all": a busy machine, never the speed of this one. */
const ANSWER_WITHIN_MS = 60_000;

let redis: RedisServer;
let request: RedisConnection;
let producer: ResultProducer;
let evaluateQueues: Queue[] = [];
let app: WearshiftServer;
let base: string;

const auth = (role: keyof typeof TOKENS) => ({ authorization: `Bearer ${TOKENS[role]}` });
const json = (role: keyof typeof TOKENS, body: unknown): RequestInit => ({ method: 'POST', headers: { ...auth(role), 'content-type': 'application/json' }, body: JSON.stringify(body) });

beforeAll(async () => {
  redis = await startRedisServer();
  const opened = await requestWithIncidents(redis.url, prefix);
  request = opened.request;
  const incidents = opened.incidents;
  await openAlarmIncident(incidents, 'PS9-P1', 'gearbox', 'LAB-9001', NOW);
  // The producer opens its own request connection, as an integrator's code would.
  producer = createResultProducer({ connection: redis.url, prefix });
  const parts = serverOptions({ request, prefix, tokens: TOKENS, producer, incidents });
  evaluateQueues = parts.evaluateQueues;
  app = await buildServer({
    ...parts.options,
  });
  base = await app.listen({ host: '127.0.0.1', port: 0 });
  // Everything is in place while Redis answers: the producer's queue is ready and a first result goes in.
  const first = await fetch(`${base}/v1/results`, json('ingest', { sampleId: 'LAB-9002', unit: 'PS9-P1', component: 'gearbox', sampledAt: NOW.toISOString(), readings: { Fe: 12 } }));
  expect(first.status).toBe(202);
}, 60_000);

afterAll(async () => {
  // Never leave a frozen process behind: dispose() lets it go on before stopping it.
  redis?.resume();
  await app?.close();
  await producer?.close();
  await Promise.all(evaluateQueues.map((q) => q.close()));
  request?.disconnect();
  await redis?.dispose();
});

describe('a Redis that does not answer', () => {
  it('gets 503 with Retry-After on every route that needs it, within a bounded time, and the API serves again once it answers', async () => {
    expect(REQUEST_COMMAND_TIMEOUT_MS).toBeLessThan(ANSWER_WITHIN_MS / 10);
    const incident = `/v1/incidents/${encodeURIComponent(ID)}`;
    const component = '/v1/units/PS9-P1/components/gearbox';
    // Each request with the path of its route in the OpenAPI document, which must list the 503 and its Retry-After.
    const routes: [string, string, RequestInit, string][] = [
      ['GET', '/v1/incidents', { headers: auth('viewer') }, '/v1/incidents'],
      ['GET', incident, { headers: auth('viewer') }, '/v1/incidents/{id}'],
      ['POST', `${incident}/note`, json('responder', { by: 'R. Tanaka', note: 'checking' }), '/v1/incidents/{id}/note'],
      ['POST', '/v1/results', json('ingest', { sampleId: 'LAB-9003', unit: 'PS9-P1', component: 'gearbox', sampledAt: NOW.toISOString(), readings: { Fe: 13 } }), '/v1/results'],
      ['GET', `${component}/series`, { headers: auth('viewer') }, '/v1/units/{unit}/components/{component}/series'],
      ['GET', `${component}/chart.svg?measurand=Fe`, { headers: auth('viewer') }, '/v1/units/{unit}/components/{component}/chart.svg'],
      ['POST', `${component}/samples/LAB-9002/verdict`, json('responder', { verdict: 'confirmed', by: 'R. Tanaka' }), '/v1/units/{unit}/components/{component}/samples/{sampleId}/verdict'],
    ];
    const paths = (openApiDocument() as { paths: Record<string, Record<string, { responses: Record<string, { headers?: Record<string, unknown> }> }>> }).paths;
    for (const [method, , , template] of routes) expect(paths[template]?.[method.toLowerCase()]?.responses['503']?.headers?.['Retry-After'], `${method} ${template}`).toBeDefined();
    redis.pause();
    try {
      const answers = await Promise.all(
        routes.map(async ([method, path, init]) => {
          const res = await fetch(`${base}${path}`, { method, ...init, signal: AbortSignal.timeout(ANSWER_WITHIN_MS) });
          const body = (await res.json()) as { error?: string; message?: string };
          return { what: `${method} ${path}`, status: res.status, retryAfter: res.headers.get('retry-after'), body };
        }),
      );
      for (const a of answers) {
        expect(`${a.what} ${a.status}`).toBe(`${a.what} 503`);
        expect(a.retryAfter, a.what).toBe(String(UNAVAILABLE_RETRY_AFTER_S));
        expect(a.body.error, a.what).toBe('unavailable');
        expect(a.body.message, a.what).not.toMatch(/Command timed out/);
      }
      const ready = await fetch(`${base}/readyz`, { signal: AbortSignal.timeout(ANSWER_WITHIN_MS) });
      expect(ready.status).toBe(503);
      // The process itself is not held: the liveness probe answers.
      expect((await fetch(`${base}/healthz`, { signal: AbortSignal.timeout(ANSWER_WITHIN_MS) })).status).toBe(200);
    } finally {
      redis.resume();
    }
    // Redis goes on: the same connections serve again (commands sent meanwhile were answered and dropped).
    const deadline = Date.now() + ANSWER_WITHIN_MS;
    let status = 0;
    while (Date.now() < deadline) {
      status = (await fetch(`${base}/v1/incidents`, { headers: auth('viewer') })).status;
      if (status === 200) break;
      await new Promise((r) => setTimeout(r, 100));
    }
    expect(status).toBe(200);
    const list = (await (await fetch(`${base}/v1/incidents`, { headers: auth('viewer') })).json()) as { incidents: { id: string }[] };
    expect(list.incidents.map((i) => i.id)).toEqual([ID]);
    const again = await fetch(`${base}/v1/results`, json('ingest', { sampleId: 'LAB-9004', unit: 'PS9-P1', component: 'gearbox', sampledAt: NOW.toISOString(), readings: { Fe: 14 } }));
    expect(again.status).toBe(202);
  }, 180_000);
});
