/**
 * Behind a reverse proxy listed in `trustedProxies`, the per-address bounds of requests (unknown tokens, live-event
 * streams) count each client by the right-most X-Forwarded-For hop that is not a listed proxy, so one client guessing
 * tokens does not lock out the others; from any other peer the header is ignored, so a direct client cannot dodge the
 * bound by writing one; open sockets are still counted per socket peer, the proxy as a whole. Real sockets from
 * loopback addresses to a real server: 127.0.0.2 is the proxy, 127.0.0.8/29 a second tier of proxies, 127.0.0.3 a
 * client connecting directly. The server's clock is injected; small limits instead of the defaults.
 */
import http from 'node:http';
import net from 'node:net';
import { afterAll, afterEach, beforeAll, describe, expect, it } from 'vitest';
import { ConfigSchema } from '../../src/domain/config.ts';
import { createEventHub } from '../../src/http/eventHub.ts';
import { resolveHttpLimits } from '../../src/http/limits.ts';
import { buildServer, type WearshiftServer } from '../../src/http/server.ts';
import { accessTokensFromEnv } from '../../src/runtime/accessTokensFromEnv.ts';
import { silentLogger } from '../../src/telemetry/logger.ts';
import { createMetrics } from '../../src/telemetry/metrics.ts';

const VIEWER = 'viewer-proxy-token-3c9e51a7';
const PROXY = '127.0.0.2';
const DIRECT = '127.0.0.3';
const MAX_FAILURES = 3;
const STREAMS_PER_ADDRESS = 2;
const WINDOW_MS = 60_000;
/** Generous bounds for a busy shared machine: they end a wait only when something is broken. */
const WAIT_MS = 30_000;

let app: WearshiftServer;
let port: number;
let now = Date.parse('2026-03-02T06:00:00Z');
const opened: http.ClientRequest[] = [];
const sockets: net.Socket[] = [];

interface Answer {
  status: number;
  body: string;
}

/**
 * One request on a socket of its own from `from`, with the token and X-Forwarded-For when given; a live stream let
 * through stays open until the test ends (answered once its first comment arrived), anything else is read whole.
 */
function get(path: string, from: string, options: { token?: string; forwardedFor?: string } = {}): Promise<Answer> {
  const headers: Record<string, string> = { connection: 'close' };
  if (options.token !== undefined) headers.authorization = `Bearer ${options.token}`;
  if (options.forwardedFor !== undefined) headers['x-forwarded-for'] = options.forwardedFor;
  return new Promise((resolve, reject) => {
    const req = http.get({ host: '127.0.0.1', port, path, localAddress: from, agent: false, headers }, (res) => {
      let body = '';
      res.setEncoding('utf8');
      if (res.statusCode === 200 && path === '/v1/events') {
        res.once('data', (chunk: string) => resolve({ status: 200, body: chunk }));
        return;
      }
      res.on('data', (chunk: string) => (body += chunk));
      res.on('end', () => resolve({ status: res.statusCode!, body }));
    });
    req.on('error', reject);
    opened.push(req);
  });
}

/** Locks `forwardedFor` (or the direct peer) out by presenting unknown tokens until the bound; each answer is 401. */
async function guessUntilLocked(from: string, forwardedFor?: (i: number) => string): Promise<number[]> {
  const statuses: number[] = [];
  for (let i = 0; i < MAX_FAILURES; i++) {
    statuses.push((await get('/metrics', from, { token: `guess-${from}-${i}-00000000`, ...(forwardedFor && { forwardedFor: forwardedFor(i) }) })).status);
  }
  return statuses;
}

beforeAll(async () => {
  app = await buildServer({
    tokens: accessTokensFromEnv({ WEARSHIFT_TOKEN_VIEWER: VIEWER }),
    logger: silentLogger(),
    metrics: createMetrics({ defaultMetrics: false }),
    ping: async () => 'PONG',
    hub: createEventHub(),
    clock: () => now,
    limits: {
      trustedProxies: [PROXY, '127.0.0.8/29'],
      maxFailedAuthPerAddress: MAX_FAILURES,
      failedAuthWindowMs: WINDOW_MS,
      maxEventClientsPerAddress: STREAMS_PER_ADDRESS,
      maxConnectionsPerAddress: 4,
    },
  });
  await app.listen({ port: 0, host: '127.0.0.1' });
  port = (app.server.address() as { port: number }).port;
}, WAIT_MS);

afterEach(async () => {
  for (const req of opened.splice(0)) req.destroy();
  for (const s of sockets.splice(0)) s.destroy();
  // Each test starts in a fresh failed-authentication window, and once the server has seen every socket of the last one close.
  now += 10 * WINDOW_MS;
  const openSockets = () => new Promise<number>((resolve, reject) => app.server.getConnections((e, n) => (e ? reject(e) : resolve(n))));
  while ((await openSockets()) > 0) await new Promise((r) => setTimeout(r, 20));
}, WAIT_MS);

afterAll(async () => {
  await app?.close();
});

describe('unknown tokens behind a trusted proxy', () => {
  it('lock out the client that guessed, not the other clients of the proxy', { timeout: WAIT_MS }, async () => {
    expect(await guessUntilLocked(PROXY, () => '203.0.113.5')).toEqual([401, 401, 401]);
    const locked = await get('/metrics', PROXY, { token: VIEWER, forwardedFor: '203.0.113.5' });
    expect(locked.status).toBe(429);
    expect(JSON.parse(locked.body)).toMatchObject({ error: 'too-many-requests' });
    // Another client of the same proxy is served, and a wrong token of its own is told so, not locked out.
    expect((await get('/metrics', PROXY, { token: VIEWER, forwardedFor: '203.0.113.6' })).status).toBe(200);
    expect((await get('/metrics', PROXY, { token: 'guess-other-client-0000', forwardedFor: '203.0.113.6' })).status).toBe(401);
    // The proxy's own address (a request with no X-Forwarded-For) is not the guessing client either.
    expect((await get('/metrics', PROXY, { token: VIEWER })).status).toBe(200);
  });

  it('are counted under the right-most hop that is not a trusted proxy: what the client wrote further left does not help it', { timeout: WAIT_MS }, async () => {
    expect(await guessUntilLocked(PROXY, (i) => `198.51.100.${i}, 203.0.113.5`)).toEqual([401, 401, 401]);
    // The client names yet another address on its left: the proxy's hop on the right still says who it is.
    expect((await get('/metrics', PROXY, { token: VIEWER, forwardedFor: '192.0.2.77, 203.0.113.5' })).status).toBe(429);
    // Through a second tier of trusted proxies (127.0.0.8/29), the same client is still the one counted.
    expect((await get('/metrics', PROXY, { token: VIEWER, forwardedFor: '203.0.113.5, 127.0.0.9' })).status).toBe(429);
    // An address the client wrote is not counted as a client of its own.
    expect((await get('/metrics', PROXY, { token: VIEWER, forwardedFor: '198.51.100.0' })).status).toBe(200);
  });

  it('from a hop that is not an IP address are counted under the proxy itself, not under the text', { timeout: WAIT_MS }, async () => {
    expect(await guessUntilLocked(PROXY, (i) => `unknown-${i}`)).toEqual([401, 401, 401]);
    expect((await get('/metrics', PROXY, { token: VIEWER, forwardedFor: 'unknown-new' })).status).toBe(429);
    expect((await get('/metrics', PROXY, { token: VIEWER })).status).toBe(429);
    expect((await get('/metrics', PROXY, { token: VIEWER, forwardedFor: '203.0.113.6' })).status).toBe(200);
  });
});

describe('a client that is not a trusted proxy', () => {
  it('cannot dodge the bound on unknown tokens by writing X-Forwarded-For', { timeout: WAIT_MS }, async () => {
    // Every guess claims another client address, as a proxy would write it.
    expect(await guessUntilLocked(DIRECT, (i) => `203.0.113.${100 + i}`)).toEqual([401, 401, 401]);
    for (const forwardedFor of ['203.0.113.200', `${PROXY}`, '203.0.113.201, 127.0.0.9', undefined]) {
      const answer = await get('/metrics', DIRECT, { token: VIEWER, ...(forwardedFor !== undefined && { forwardedFor }) });
      expect(`${forwardedFor} ${answer.status}`).toBe(`${forwardedFor} 429`);
    }
    // Nor can it pass itself off as a client of the proxy, or lock that client out.
    expect((await get('/metrics', PROXY, { token: VIEWER, forwardedFor: '203.0.113.200' })).status).toBe(200);
  });
});

describe('live-event streams behind a trusted proxy', () => {
  it('are bounded per client, so one client of the proxy cannot take the others\u2019 streams', { timeout: WAIT_MS }, async () => {
    for (let i = 0; i < STREAMS_PER_ADDRESS; i++) expect((await get('/v1/events', PROXY, { token: VIEWER, forwardedFor: '203.0.113.5' })).status).toBe(200);
    const refused = await get('/v1/events', PROXY, { token: VIEWER, forwardedFor: '203.0.113.5' });
    expect(refused.status).toBe(429);
    expect(refused.body).toContain('this address already holds 2 live-event streams');
    expect((await get('/v1/events', PROXY, { token: VIEWER, forwardedFor: '203.0.113.6' })).status).toBe(200);
  });

  it('from a direct client are bounded per socket peer, whatever it writes in X-Forwarded-For', { timeout: WAIT_MS }, async () => {
    for (let i = 0; i < STREAMS_PER_ADDRESS; i++) expect((await get('/v1/events', DIRECT, { token: VIEWER, forwardedFor: `203.0.113.${i}` })).status).toBe(200);
    expect((await get('/v1/events', DIRECT, { token: VIEWER, forwardedFor: '203.0.113.50' })).status).toBe(429);
  });
});

describe('open sockets', () => {
  /** Whether the server answers a whole request on a new connection from `from` (X-Forwarded-For `forwardedFor`), or closes it. */
  function answered(from: string, forwardedFor: string): Promise<'answered' | 'closed'> {
    return new Promise((resolve) => {
      let data = '';
      const socket = net.connect({ host: '127.0.0.1', port, localAddress: from }, () => socket.write(`GET /healthz HTTP/1.1\r\nHost: x\r\nX-Forwarded-For: ${forwardedFor}\r\nConnection: close\r\n\r\n`));
      sockets.push(socket);
      socket.setEncoding('utf8');
      socket.on('data', (chunk: string) => (data += chunk));
      socket.on('error', () => undefined);
      socket.on('close', () => resolve(/^HTTP\/1\.1 200/.test(data) ? 'answered' : 'closed'));
    });
  }

  it('are counted per socket peer: a trusted proxy holds at most maxConnectionsPerAddress, whichever clients it forwards for', { timeout: WAIT_MS }, async () => {
    // Four sockets of the proxy, each with the start of a request for another client, held open.
    const held = await Promise.all(
      Array.from({ length: 4 }, (_, i) => new Promise<net.Socket>((resolve, reject) => {
        const socket = net.connect({ host: '127.0.0.1', port, localAddress: PROXY }, () => {
          socket.write(`GET /healthz HTTP/1.1\r\nHost: x\r\nX-Forwarded-For: 203.0.113.${i}\r\nX-Slow: `);
          resolve(socket);
        });
        socket.on('error', () => undefined);
        socket.once('error', reject);
        sockets.push(socket);
      })),
    );
    expect(await answered(PROXY, '203.0.113.99')).toBe('closed');
    expect(await answered(DIRECT, '203.0.113.99')).toBe('answered');
    expect(held.every((s) => !s.destroyed)).toBe(true);
  });
});

describe('the configuration of trusted proxies', () => {
  it('takes IP addresses and CIDR ranges, and refuses anything else naming the entry', () => {
    const ok = ConfigSchema.safeParse({ http: { trustedProxies: ['10.0.0.7', '10.0.0.0/8', '::1', 'fd00::/8', '::ffff:192.0.2.1', '0.0.0.0/0'] } });
    expect(ok.success).toBe(true);
    for (const bad of ['proxy.internal', '10.0.0.256', '10.0.0.0/33', 'fd00::/129', '10.0.0.0/', '10.0.0.0/8/8', '010.0.0.1', 'fd00:::1', '']) {
      const parsed = ConfigSchema.safeParse({ http: { trustedProxies: ['10.0.0.7', bad] } });
      expect(parsed.success, bad).toBe(false);
      expect(parsed.error!.issues.map((i) => i.path.join('.')), bad).toEqual(['http.trustedProxies.1']);
    }
    expect(() => resolveHttpLimits({ trustedProxies: ['10.0.0.0/33'] })).toThrow('http trustedProxies: "10.0.0.0/33": the prefix length');
    expect(resolveHttpLimits().trustedProxies).toEqual([]);
  });
});
