/**
 * Guessing tokens is slowed per address: after `maxFailedAuthPerAddress` unknown tokens within `failedAuthWindowMs`
 * (through GET /v1/session, a bearer route or the live-event cookie alike), every request with a token from that
 * address gets 429 with Retry-After until the window ends (the server's clock is injected), while the right token from
 * another address keeps working and requests without a token (probes, the board's pages) are served. The addresses
 * remembered are bounded. A token shorter than 16 characters is refused when the tokens are loaded, naming its
 * variable and place. Real sockets from several loopback addresses (127.0.0.x) to a real server over a private
 * redis-server.
 */
import http from 'node:http';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { InputError } from '../../src/domain/errors.ts';
import { createEventHub } from '../../src/http/eventHub.ts';
import { buildServer, type WearshiftServer } from '../../src/http/server.ts';
import { createResultProducer, type ResultProducer } from '../../src/queue/producer.ts';
import { accessTokensFromEnv } from '../../src/runtime/accessTokensFromEnv.ts';
import { silentLogger } from '../../src/telemetry/logger.ts';
import { createMetrics } from '../../src/telemetry/metrics.ts';
import { startRedisServer, type RedisServer } from '../helpers/redisServer.ts';

const VIEWER = 'viewer-guess-token-8e41c7a2';
const MAX_FAILURES = 5;
const WINDOW_MS = 60_000;
/** Generous bounds for a busy shared machine: they end a wait only when something is broken. */
const WAIT_MS = 60_000;

let redis: RedisServer;
let producer: ResultProducer;
let app: WearshiftServer;
let port: number;
/** The server's clock, moved by the test. */
let now = Date.parse('2026-03-02T06:00:00Z');

interface Answer {
  status: number;
  retryAfter: string | undefined;
  body: string;
}

/** One request on a socket of its own from `from`, with a bearer token or the live-event cookie when given. */
function get(path: string, from: string, credential: { token?: string; cookie?: string } = {}): Promise<Answer> {
  const headers: Record<string, string> = {};
  if (credential.token !== undefined) headers.authorization = `Bearer ${credential.token}`;
  if (credential.cookie !== undefined) headers.cookie = `wearshift_token=${credential.cookie}`;
  return new Promise((resolve, reject) => {
    const req = http.get({ host: '127.0.0.1', port, path, localAddress: from, agent: false, headers }, (res) => {
      let body = '';
      res.setEncoding('utf8');
      // A live stream let through is not read to its end.
      if (res.statusCode === 200 && path === '/v1/events') {
        req.destroy();
        resolve({ status: 200, retryAfter: undefined, body });
        return;
      }
      res.on('data', (chunk: string) => (body += chunk));
      res.on('end', () => resolve({ status: res.statusCode!, retryAfter: res.headers['retry-after'] as string | undefined, body }));
    });
    req.on('error', reject);
  });
}

beforeAll(async () => {
  redis = await startRedisServer();
  producer = createResultProducer({ connection: redis.url, prefix: '{guess}' });
  app = await buildServer({
    tokens: accessTokensFromEnv({ WEARSHIFT_TOKEN_VIEWER: VIEWER }),
    logger: silentLogger(),
    metrics: createMetrics({ defaultMetrics: false }),
    ping: async () => 'PONG',
    producer,
    hub: createEventHub(),
    clock: () => now,
    limits: { maxFailedAuthPerAddress: MAX_FAILURES, failedAuthWindowMs: WINDOW_MS, failedAuthAddresses: 2 },
  });
  await app.listen({ port: 0, host: '127.0.0.1' });
  port = (app.server.address() as { port: number }).port;
}, WAIT_MS);

afterAll(async () => {
  await app?.close();
  await producer?.close();
  await redis?.dispose();
});

describe('failed authentications per address', () => {
  it('answers 429 with Retry-After to an address after too many unknown tokens, and serves the right token from another address', { timeout: WAIT_MS }, async () => {
    // Guesses through the session route, a bearer route and the live-event cookie all count.
    const guesses = [
      await get('/v1/session', '127.0.0.1', { token: 'guess-0000000000000001' }),
      await get('/v1/session', '127.0.0.1', { token: 'guess-0000000000000002' }),
      await get('/metrics', '127.0.0.1', { token: 'guess-0000000000000003' }),
      await get('/v1/events', '127.0.0.1', { cookie: 'guess-0000000000000004' }),
      await get('/v1/session', '127.0.0.1', { token: 'guess-0000000000000005' }),
    ];
    expect(guesses.map((g) => g.status)).toEqual(Array.from({ length: MAX_FAILURES }, () => 401));

    const locked = await get('/v1/session', '127.0.0.1', { token: 'guess-0000000000000006' });
    expect(locked.status).toBe(429);
    expect(Number(locked.retryAfter)).toBe(WINDOW_MS / 1000);
    expect(JSON.parse(locked.body)).toMatchObject({ error: 'too-many-requests', message: expect.stringContaining('too many unknown tokens from this address') });
    // The right token from that address waits too (no guess can be told from the answer), through the cookie as well.
    expect((await get('/v1/session', '127.0.0.1', { token: VIEWER })).status).toBe(429);
    expect((await get('/v1/events', '127.0.0.1', { cookie: VIEWER })).status).toBe(429);
    // A request without a token (a probe, the board's page) is served.
    expect((await get('/healthz', '127.0.0.1')).status).toBe(200);

    // The right token from another address keeps working; a wrong one there is told so (401), not locked out.
    const other = await get('/v1/session', '127.0.0.2', { token: VIEWER });
    expect(other.status).toBe(200);
    expect(JSON.parse(other.body)).toMatchObject({ roles: ['viewer'] });
    expect((await get('/v1/session', '127.0.0.2', { token: 'guess-0000000000000007' })).status).toBe(401);

    // Half the window later the address still waits, for the rest of it.
    now += WINDOW_MS / 2;
    const later = await get('/v1/session', '127.0.0.1', { token: VIEWER });
    expect(later.status).toBe(429);
    expect(Number(later.retryAfter)).toBe(WINDOW_MS / 2000);
    // Once the window has passed, the address is served again.
    now += WINDOW_MS / 2;
    expect((await get('/v1/session', '127.0.0.1', { token: VIEWER })).status).toBe(200);
  });

  it('remembers a bounded number of addresses, forgetting the least recently failed first', { timeout: WAIT_MS }, async () => {
    now += 10 * WINDOW_MS;
    for (let i = 0; i < MAX_FAILURES; i++) expect((await get('/v1/session', '127.0.0.3', { token: `guess-of-three-000000${i}` })).status).toBe(401);
    expect((await get('/v1/session', '127.0.0.3', { token: VIEWER })).status).toBe(429);
    // Two more addresses fail once each: with room for two, the first one is forgotten.
    expect((await get('/v1/session', '127.0.0.4', { token: 'guess-of-four-0000000' })).status).toBe(401);
    expect((await get('/v1/session', '127.0.0.5', { token: 'guess-of-five-0000000' })).status).toBe(401);
    expect((await get('/v1/session', '127.0.0.3', { token: VIEWER })).status).toBe(200);
  });
});

describe('token length', () => {
  it('refuses a token shorter than 16 characters when the tokens are loaded, naming its variable and place but not the token', () => {
    const load = () => accessTokensFromEnv({ WEARSHIFT_TOKEN_VIEWER: VIEWER, WEARSHIFT_TOKEN_RESPONDER: `${VIEWER}-responder, short-token-15c` });
    expect(load).toThrow(InputError);
    expect(load).toThrow('WEARSHIFT_TOKEN_RESPONDER: the 2nd token is 15 characters long; a token needs at least 16');
    expect(load).not.toThrow(/short-token/);
    expect(() => accessTokensFromEnv({ WEARSHIFT_TOKEN_INGEST: 'sixteen-chars-ok' })).not.toThrow();
  });
});
