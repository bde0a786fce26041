/**
 * One token or one address cannot take every live-event stream (GET /v1/events) of the process: beyond
 * `maxEventClientsPerToken` streams of one token, or `maxEventClientsPerAddress` from one address, a further stream is
 * refused with 429 and Retry-After, while another token, and the same token from another address up to its own bound,
 * still get theirs. Real sockets from two loopback addresses (127.0.0.1 and 127.0.0.2) to a real server; small limits
 * instead of the defaults.
 */
import http from 'node:http';
import { afterAll, afterEach, beforeAll, describe, expect, it } from 'vitest';
import { createEventHub, type EventHub } from '../../src/http/eventHub.ts';
import { buildServer, type WearshiftServer } from '../../src/http/server.ts';
import { accessTokensFromEnv } from '../../src/runtime/accessTokensFromEnv.ts';
import { silentLogger } from '../../src/telemetry/logger.ts';
import { createMetrics } from '../../src/telemetry/metrics.ts';

const HOG = 'viewer-hog-token-1f3b9c7d';
const OTHER = 'viewer-other-token-5a2e8d41';
/** Generous bounds for a busy shared machine: they end a wait only when something is broken. */
const WAIT_MS = 30_000;

let app: WearshiftServer;
let hub: EventHub;
let port: number;
const opened: http.ClientRequest[] = [];

interface Answer {
  status: number;
  retryAfter: string | undefined;
  body: string;
}

/** Opens GET /v1/events from `localAddress`: a stream (200) stays open until the test ends, a refusal is read whole. */
function stream(token: string, localAddress: string): Promise<Answer> {
  return new Promise((resolve, reject) => {
    const req = http.get({ host: '127.0.0.1', port, path: '/v1/events', localAddress, headers: { authorization: `Bearer ${token}` } }, (res) => {
      let body = '';
      res.setEncoding('utf8');
      const answer = () => ({ status: res.statusCode!, retryAfter: res.headers['retry-after'] as string | undefined, body });
      if (res.statusCode === 200) {
        // Open once the stream's first comment arrived.
        res.once('data', (chunk: string) => {
          body = chunk;
          resolve(answer());
        });
        return;
      }
      res.on('data', (chunk: string) => (body += chunk));
      res.on('end', () => resolve(answer()));
    });
    req.on('error', reject);
    opened.push(req);
  });
}

beforeAll(async () => {
  app = await buildServer({
    tokens: accessTokensFromEnv({ WEARSHIFT_TOKEN_VIEWER: `${HOG},${OTHER}` }),
    logger: silentLogger(),
    metrics: createMetrics({ defaultMetrics: false }),
    ping: async () => 'PONG',
    hub: (hub = createEventHub()),
    limits: { maxEventClients: 50, maxEventClientsPerToken: 3, maxEventClientsPerAddress: 5 },
  });
  await app.listen({ port: 0, host: '127.0.0.1' });
  port = (app.server.address() as { port: number }).port;
});

afterEach(async () => {
  for (const req of opened.splice(0)) req.destroy();
  // Every stream subscribes to the hub until the server has seen its socket close.
  while (hub.subscribers > 0) await new Promise((r) => setTimeout(r, 20));
});

afterAll(async () => {
  await app?.close();
});

describe('live-event streams per token and per address', () => {
  it('refuses a token its fourth stream with 429, while another token and another address are still served', { timeout: WAIT_MS }, async () => {
    for (let i = 0; i < 3; i++) expect((await stream(HOG, '127.0.0.1')).status).toBe(200);
    const refused = await stream(HOG, '127.0.0.1');
    expect(refused.status).toBe(429);
    expect(refused.retryAfter).toMatch(/^\d+$/);
    expect(JSON.parse(refused.body)).toMatchObject({ error: 'too-many-requests', message: expect.stringContaining('this token already holds 3 live-event streams') });
    // The bound is the token's, wherever it comes from.
    expect((await stream(HOG, '127.0.0.2')).status).toBe(429);
    // Another token is served, from the same address and from another one.
    expect((await stream(OTHER, '127.0.0.1')).status).toBe(200);
    expect((await stream(OTHER, '127.0.0.2')).status).toBe(200);
  });

  it('refuses an address its sixth stream with 429 whatever the token, while another address is served', { timeout: WAIT_MS }, async () => {
    for (let i = 0; i < 3; i++) expect((await stream(HOG, '127.0.0.1')).status).toBe(200);
    for (let i = 0; i < 2; i++) expect((await stream(OTHER, '127.0.0.1')).status).toBe(200);
    const refused = await stream(OTHER, '127.0.0.1');
    expect(refused.status).toBe(429);
    expect(JSON.parse(refused.body)).toMatchObject({ error: 'too-many-requests', message: expect.stringContaining('this address already holds 5 live-event streams') });
    expect((await stream(OTHER, '127.0.0.2')).status).toBe(200);
  });

  it('gives a token its stream back once one of its streams closed', { timeout: WAIT_MS }, async () => {
    for (let i = 0; i < 3; i++) expect((await stream(HOG, '127.0.0.1')).status).toBe(200);
    expect((await stream(HOG, '127.0.0.1')).status).toBe(429);
    opened[0]!.destroy();
    // The server counts the stream closed when its socket closes: asked again until then, within the generous bound.
    let status = 429;
    while (status === 429) {
      status = (await stream(HOG, '127.0.0.1')).status;
      if (status === 429) await new Promise((r) => setTimeout(r, 50));
    }
    expect(status).toBe(200);
  });
});
