/**
 * An IPv6 client holds a whole /64 and can move between its addresses at will: the per-address bounds of requests
 * count every address of one /64 as one client. After `maxFailedAuthPerAddress` unknown tokens spread over addresses of
 * one /64, every request with a token from any address of it gets 429 with Retry-After until the window ends, while
 * another /64 and IPv4 clients are served; an IPv4-mapped peer (`::ffff:…`) counts as its IPv4 address. The same holds
 * for clients a trusted proxy forwards for in X-Forwarded-For, and for live-event streams per address. Requests from
 * IPv6 peers go through the framework's request injection (`remoteAddress` set; loopback has only ::1), those through
 * the proxy over real sockets from loopback addresses (127.0.0.2 is the proxy). The server's clock is injected; small
 * limits instead of the defaults.
 */
import http from 'node:http';
import { afterAll, afterEach, beforeAll, describe, expect, it } from 'vitest';
import { createEventHub } from '../../src/http/eventHub.ts';
import { buildServer, type WearshiftServer } from '../../src/http/server.ts';
import { accessTokensFromEnv } from '../../src/runtime/accessTokensFromEnv.ts';
import { silentLogger } from '../../src/telemetry/logger.ts';
import { createMetrics } from '../../src/telemetry/metrics.ts';

const VIEWER = 'viewer-prefix-token-7d20b6e4';
const PROXY = '127.0.0.2';
const MAX_FAILURES = 4;
const STREAMS_PER_ADDRESS = 2;
const WINDOW_MS = 60_000;
/** Generous bounds for a busy shared machine: they end a wait only when something is broken. */
const WAIT_MS = 30_000;

/** Addresses of one /64, spelled as a client or a proxy might. */
const ONE_64 = ['2001:db8:5:7::1', '2001:db8:5:7:8f3a:1c2:9e0:44d1', '2001:DB8:5:7:ffff:ffff:ffff:fffe', '2001:0db8:0005:0007::a', '2001:db8:5:7::c000:201'];

let app: WearshiftServer;
let port: number;
let now = Date.parse('2026-03-02T06:00:00Z');
const opened: http.ClientRequest[] = [];

interface Answer {
  status: number;
  retryAfter: string | undefined;
  body: string;
}

/** GET `path` injected as from the peer `remoteAddress`, with a bearer token when given. */
async function injected(path: string, remoteAddress: string, token?: string): Promise<Answer> {
  const res = await app.inject({ method: 'GET', url: path, remoteAddress, headers: token === undefined ? {} : { authorization: `Bearer ${token}` } });
  return { status: res.statusCode, retryAfter: res.headers['retry-after'] as string | undefined, body: res.body };
}

/**
 * One request on a socket of its own from the proxy, for the client `forwardedFor`; a live stream let through stays
 * open until the test ends (answered once its first comment arrived), anything else is read whole.
 */
function viaProxy(path: string, forwardedFor: string, token: string): Promise<Answer> {
  const headers = { connection: 'close', authorization: `Bearer ${token}`, 'x-forwarded-for': forwardedFor };
  return new Promise((resolve, reject) => {
    const req = http.get({ host: '127.0.0.1', port, path, localAddress: PROXY, agent: false, headers }, (res) => {
      let body = '';
      res.setEncoding('utf8');
      const answer = () => ({ status: res.statusCode!, retryAfter: res.headers['retry-after'] as string | undefined, body });
      if (res.statusCode === 200 && path === '/v1/events') {
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
    tokens: accessTokensFromEnv({ WEARSHIFT_TOKEN_VIEWER: VIEWER }),
    logger: silentLogger(),
    metrics: createMetrics({ defaultMetrics: false }),
    ping: async () => 'PONG',
    hub: createEventHub(),
    clock: () => now,
    limits: { trustedProxies: [PROXY], maxFailedAuthPerAddress: MAX_FAILURES, failedAuthWindowMs: WINDOW_MS, maxEventClientsPerAddress: STREAMS_PER_ADDRESS },
  });
  await app.listen({ port: 0, host: '127.0.0.1' });
  port = (app.server.address() as { port: number }).port;
}, WAIT_MS);

afterEach(async () => {
  for (const req of opened.splice(0)) req.destroy();
  // Each test starts in a fresh failed-authentication window, and once the server has seen every socket of the last one close.
  now += 10 * WINDOW_MS;
  const openSockets = () => new Promise<number>((resolve, reject) => app.server.getConnections((e, n) => (e ? reject(e) : resolve(n))));
  while ((await openSockets()) > 0) await new Promise((r) => setTimeout(r, 20));
}, WAIT_MS);

afterAll(async () => {
  await app?.close();
});

describe('unknown tokens from an IPv6 client', () => {
  it('lock out its whole /64 once the guesses spread over its addresses reach the bound, not another /64', { timeout: WAIT_MS }, async () => {
    // Each guess from a new address of the /64: each one is told 401, none escapes the count.
    const guesses = [];
    for (let i = 0; i < MAX_FAILURES; i++) guesses.push((await injected('/metrics', ONE_64[i]!, `guess-prefix-000000000${i}`)).status);
    expect(guesses).toEqual(Array.from({ length: MAX_FAILURES }, () => 401));

    // The next address of the /64, never seen before, waits for the window's end, as does the first, even with the right token.
    const locked = await injected('/metrics', ONE_64[4]!, 'guess-prefix-0000000009');
    expect(locked.status).toBe(429);
    expect(Number(locked.retryAfter)).toBe(WINDOW_MS / 1000);
    expect(JSON.parse(locked.body)).toMatchObject({ error: 'too-many-requests', message: expect.stringContaining('too many unknown tokens from this address') });
    expect((await injected('/metrics', ONE_64[0]!, VIEWER)).status).toBe(429);
    expect((await injected('/metrics', '2001:db8:5:7::1234%eth0', VIEWER)).status).toBe(429);
    // A request without a token from the /64 is served.
    expect((await injected('/healthz', ONE_64[1]!)).status).toBe(200);

    // The neighbouring /64 is another client: the right token works there, a wrong one is told so.
    expect((await injected('/metrics', '2001:db8:5:8::1', VIEWER)).status).toBe(200);
    expect((await injected('/metrics', '2001:db8:5:6:ffff:ffff:ffff:ffff', 'guess-prefix-neighbour0')).status).toBe(401);

    // Half the window later the /64 still waits, for the rest of it; once the window has passed, it is served again.
    now += WINDOW_MS / 2;
    const later = await injected('/metrics', ONE_64[2]!, VIEWER);
    expect(later.status).toBe(429);
    expect(Number(later.retryAfter)).toBe(WINDOW_MS / 2000);
    now += WINDOW_MS / 2;
    expect((await injected('/metrics', ONE_64[3]!, VIEWER)).status).toBe(200);
  });

  it('count IPv4 peers one by one, an IPv4-mapped peer as its IPv4 address', { timeout: WAIT_MS }, async () => {
    const from = ['192.0.2.10', '::ffff:192.0.2.10'];
    for (let i = 0; i < MAX_FAILURES; i++) expect((await injected('/metrics', from[i % 2]!, `guess-mapped-00000000${i}`)).status).toBe(401);
    expect((await injected('/metrics', '192.0.2.10', VIEWER)).status).toBe(429);
    expect((await injected('/metrics', '::ffff:192.0.2.10', VIEWER)).status).toBe(429);
    // The next IPv4 address, mapped or not, is another client.
    expect((await injected('/metrics', '192.0.2.11', VIEWER)).status).toBe(200);
    expect((await injected('/metrics', '::ffff:192.0.2.11', VIEWER)).status).toBe(200);
  });

  it('behind a trusted proxy lock out the forwarded client\u2019s /64, whichever of its addresses the proxy names', { timeout: WAIT_MS }, async () => {
    for (let i = 0; i < MAX_FAILURES; i++) expect((await viaProxy('/metrics', ONE_64[i]!, `guess-forwarded-00000${i}`)).status).toBe(401);
    expect((await viaProxy('/metrics', ONE_64[4]!, VIEWER)).status).toBe(429);
    expect((await viaProxy('/metrics', `198.51.100.7, ${ONE_64[0]!}`, VIEWER)).status).toBe(429);
    // Another /64 behind the same proxy, and the proxy's own address, are served.
    expect((await viaProxy('/metrics', '2001:db8:5:8::1', VIEWER)).status).toBe(200);
    expect((await viaProxy('/metrics', '198.51.100.7', VIEWER)).status).toBe(200);
  });
});

describe('live-event streams of an IPv6 client behind a trusted proxy', () => {
  it('are bounded per /64, so a client cannot take more streams by naming more of its addresses', { timeout: WAIT_MS }, async () => {
    for (let i = 0; i < STREAMS_PER_ADDRESS; i++) expect((await viaProxy('/v1/events', ONE_64[i]!, VIEWER)).status).toBe(200);
    const refused = await viaProxy('/v1/events', ONE_64[STREAMS_PER_ADDRESS]!, VIEWER);
    expect(refused.status).toBe(429);
    expect(refused.retryAfter).toBe('30');
    expect(refused.body).toContain(`this address already holds ${STREAMS_PER_ADDRESS} live-event streams`);
    expect((await viaProxy('/v1/events', '2001:db8:5:8::1', VIEWER)).status).toBe(200);
  });
});
