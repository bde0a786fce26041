/**
 * Slowloris from one address: sockets that send their request headers a byte at a time, reconnected as they are
 * closed, hold at most `maxConnectionsPerAddress` sockets of the process; a further connection from that address is
 * closed at once, and another address is still served in full. Real sockets from two loopback addresses (127.0.0.1
 * and 127.0.0.2) to a real server, a small per-address limit instead of the default.
 */
import net from 'node:net';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { buildServer, type WearshiftServer } from '../../src/http/server.ts';
import { accessTokensFromEnv } from '../../src/runtime/accessTokensFromEnv.ts';
import { silentLogger } from '../../src/telemetry/logger.ts';
import { createMetrics } from '../../src/telemetry/metrics.ts';

const PER_ADDRESS = 6;
/** Generous bounds for a busy shared machine: they end a wait only when something is broken. */
const WAIT_MS = 30_000;

let app: WearshiftServer;
let port: number;
const sockets: net.Socket[] = [];

/** A connection from `localAddress` that has sent the start of a request and keeps it open. */
function slowRequest(localAddress: string): Promise<net.Socket> {
  return new Promise((resolve, reject) => {
    const socket = net.connect({ host: '127.0.0.1', port, localAddress }, () => {
      socket.write('GET /healthz HTTP/1.1\r\nHost: x\r\nX-Slow: ');
      resolve(socket);
    });
    socket.on('error', () => undefined);
    socket.once('error', reject);
    sockets.push(socket);
  });
}

/** Whether the server closes a new connection from `localAddress` before answering a whole request on it. */
function answered(localAddress: string): Promise<'answered' | 'closed'> {
  return new Promise((resolve) => {
    let data = '';
    const socket = net.connect({ host: '127.0.0.1', port, localAddress }, () => socket.write('GET /healthz HTTP/1.1\r\nHost: x\r\nConnection: close\r\n\r\n'));
    sockets.push(socket);
    socket.setEncoding('utf8');
    socket.on('data', (chunk: string) => (data += chunk));
    socket.on('error', () => undefined);
    socket.on('close', () => resolve(/^HTTP\/1\.1 200/.test(data) ? 'answered' : 'closed'));
  });
}

beforeAll(async () => {
  app = await buildServer({
    tokens: accessTokensFromEnv({}),
    logger: silentLogger(),
    metrics: createMetrics({ defaultMetrics: false }),
    ping: async () => 'PONG',
    // The process-wide bound far above the per-address one, and timeouts long enough that nothing is cut off by time.
    limits: { maxConnections: 100, maxConnectionsPerAddress: PER_ADDRESS, headersTimeoutMs: 120_000, requestTimeoutMs: 120_000 },
  });
  await app.listen({ port: 0, host: '127.0.0.1' });
  port = (app.server.address() as { port: number }).port;
});

afterAll(async () => {
  for (const s of sockets) s.destroy();
  await app?.close();
});

describe('connections per remote address', () => {
  it('closes connections from an address beyond its limit, and serves another address meanwhile', { timeout: WAIT_MS }, async () => {
    const held = await Promise.all(Array.from({ length: PER_ADDRESS }, () => slowRequest('127.0.0.1')));
    // The attacker keeps trickling header bytes into the sockets it holds.
    for (const s of held) s.write('a');
    expect(held.every((s) => !s.destroyed)).toBe(true);
    // Further connections from the same address are closed unanswered, however many are tried.
    const more = await Promise.all(Array.from({ length: 10 }, () => answered('127.0.0.1')));
    expect(more).toEqual(Array.from({ length: 10 }, () => 'closed'));
    // Another address is served, more connections than the per-address limit one after another and at once.
    const other = await Promise.all(Array.from({ length: PER_ADDRESS }, () => answered('127.0.0.2')));
    expect(other).toEqual(Array.from({ length: PER_ADDRESS }, () => 'answered'));
    // The held sockets are still open: the bound closed only the ones beyond it.
    expect(held.every((s) => !s.destroyed)).toBe(true);
  });

  it('serves the address again once its sockets closed', { timeout: WAIT_MS }, async () => {
    for (const s of sockets.splice(0)) s.destroy();
    // The server counts a socket closed when it sees it close: asked again until then, within the generous bound.
    let outcome = await answered('127.0.0.1');
    while (outcome === 'closed') {
      await new Promise((r) => setTimeout(r, 50));
      outcome = await answered('127.0.0.1');
    }
    expect(outcome).toBe('answered');
  });
});
