/**
 * `GET /v1/events`: live updates as server-sent events (fastify 5 plugin), for the viewer role. Each event of the hub
 * becomes `id: <n>`, `event: incident|result` and `data: <JSON>` (the `LiveIncidentEvent` and `LiveResultEvent`
 * schemas of the AsyncAPI document); a comment line every `heartbeatMs` keeps proxies from closing an idle stream.
 * Every incident event carries `advisory`, the caution, beside its severity: whatever publishes the change (a worker,
 * an operator action, another process through the Redis bridge), the stream adds it as the event leaves.
 *
 * Authentication: a browser's EventSource cannot send an Authorization header, so besides the bearer header the
 * token is accepted from the `wearshift_token` cookie, which the board sets for this path only (SameSite=Strict).
 * A cookie rather than `?token=`: a query string ends up in access logs, proxy logs and browser history. The cookie
 * is honoured on this read-only stream alone; every changing request still needs the bearer header, so a forged
 * cross-site request can do nothing with it.
 */
import type { FastifyPluginAsync, onRequestAsyncHookHandler } from 'fastify';
import type { ServerResponse } from 'node:http';
import { ADVISORY_CAUTION } from '../domain/caution.ts';
import { addressKey, addressOf } from './addressLimits.ts';
import { requireRole, tokenDigestOf, type AccessTokens } from './auth.ts';
import type { EventHub, LiveEvent } from './eventHub.ts';
import { DEFAULT_HTTP_LIMITS } from './limits.ts';

export const EVENT_TOKEN_COOKIE = 'wearshift_token';

export interface EventRoutesOptions {
  /** The API's bearer tokens. */
  readonly tokens: AccessTokens;
  hub: EventHub;
  /** Checked on request. Default: a viewer or responder token, from the bearer header or the `wearshift_token` cookie. */
  authorize?: onRequestAsyncHookHandler;
  /** Interval of the keep-alive comment. Default 20 000 ms. */
  heartbeatMs?: number;
  /**
   * A client that falls this many bytes behind is disconnected (it reconnects and reloads). Measured on the socket
   * (bytes written but not yet taken by the kernel) before every write, heartbeats included. Default 256 KiB.
   */
  maxBufferedBytes?: number;
  /** Most open streams; a further client gets 503 with Retry-After. Default 500. */
  maxClients?: number;
  /**
   * Most open streams of one token (by its digest) and of one client address (addressLimits.ts: the socket's peer, or
   * the client a trusted proxy forwarded for; every address of one IPv6 /64 counts as one): a further one gets 429
   * with Retry-After and a message naming the bound; the streams already open are kept (a board that reconnects gets
   * its stream back once its old one has closed). Defaults 8 and 16.
   */
  maxClientsPerToken?: number;
  maxClientsPerAddress?: number;
  /** Told of every client cut off for falling behind (metrics, tests). */
  onSlowClient?: (bufferedBytes: number) => void;
  /** The reconnection delay the stream asks browsers for. Default 3000 ms. */
  retryMs?: number;
}

export const eventRoutes: FastifyPluginAsync<EventRoutesOptions> = async (app, options) => {
  const authorize = options.authorize ?? requireRole(options.tokens, 'viewer', 'responder');
  const heartbeatMs = options.heartbeatMs ?? 20_000;
  const maxBuffered = options.maxBufferedBytes ?? DEFAULT_HTTP_LIMITS.maxEventBufferBytes;
  const maxClients = options.maxClients ?? DEFAULT_HTTP_LIMITS.maxEventClients;
  const maxPerToken = options.maxClientsPerToken ?? DEFAULT_HTTP_LIMITS.maxEventClientsPerToken;
  const maxPerAddress = options.maxClientsPerAddress ?? DEFAULT_HTTP_LIMITS.maxEventClientsPerAddress;
  // The hub hands one event to every stream in turn: it is written out once, not once per stream (500 boards and a
  // batch of a thousand results were half a million encodings).
  let lastId = -1;
  let lastChunk = '';
  const chunkOf = (event: LiveEvent, id: number): string => {
    if (id !== lastId) {
      lastId = id;
      lastChunk = `id: ${id}\nevent: ${event.type}\ndata: ${JSON.stringify(streamed(event))}\n\n`;
    }
    return lastChunk;
  };
  const open = new Set<ServerResponse>();
  // Open streams by token digest and by client address; an entry leaves when its count falls to 0, so both maps stay
  // within the number of open streams.
  const byToken = new Map<string, number>();
  const byAddress = new Map<string, number>();
  const add = (map: Map<string, number>, key: string, n: number) => {
    const next = (map.get(key) ?? 0) + n;
    if (next > 0) map.set(key, next);
    else map.delete(key);
  };

  // Streams never end by themselves: without this, closing the server would wait for every browser to leave.
  app.addHook('preClose', async () => {
    for (const res of open) res.end();
  });

  app.get('/v1/events', {
    onRequest: [
      async (request) => {
        if (request.headers.authorization !== undefined) return;
        const token = cookieValue(request.headers.cookie, EVENT_TOKEN_COOKIE);
        if (token !== undefined) request.headers.authorization = `Bearer ${token}`;
      },
      authorize,
    ],
    handler: async (request, reply) => {
      if (open.size >= maxClients) {
        return reply.code(503).header('retry-after', '30').send({ error: 'unavailable', message: `${open.size} live-event clients are connected, the most this process serves; try again later` });
      }
      // One token or one address must not take the slots every board shares.
      const token = tokenDigestOf(request) ?? '';
      // Counted under the address's key: every address of one IPv6 /64 is one client.
      const client = addressKey(addressOf(request));
      if ((byToken.get(token) ?? 0) >= maxPerToken) {
        return reply.code(429).header('retry-after', '30').send({ error: 'too-many-requests', message: `this token already holds ${maxPerToken} live-event streams, the most one token may; close one (another tab or board) and try again` });
      }
      if ((byAddress.get(client) ?? 0) >= maxPerAddress) {
        return reply.code(429).header('retry-after', '30').send({ error: 'too-many-requests', message: `this address already holds ${maxPerAddress} live-event streams, the most one address may; close one and try again` });
      }
      const res = reply.raw;
      reply.hijack();
      res.writeHead(200, {
        'content-type': 'text/event-stream; charset=utf-8',
        'cache-control': 'no-store',
        connection: 'keep-alive',
        // Reverse proxies that buffer responses would hold events back.
        'x-accel-buffering': 'no',
      });
      res.write(`retry: ${options.retryMs ?? 3000}\n: connected\n\n`);
      open.add(res);
      add(byToken, token, 1);
      add(byAddress, client, 1);
      // What the client has not taken yet: the response's buffer, which counts the socket's (data the kernel would not take).
      const behind = () => Math.max(res.writableLength, res.socket?.writableLength ?? 0);
      const send = (chunk: string) => {
        if (res.destroyed) return;
        const buffered = behind();
        if (buffered + Buffer.byteLength(chunk) > maxBuffered) {
          options.onSlowClient?.(buffered);
          request.log.info({ bufferedBytes: buffered, maxBufferedBytes: maxBuffered }, 'live-event client disconnected: it fell too far behind');
          res.destroy();
          return;
        }
        res.write(chunk);
      };
      const unsubscribe = options.hub.subscribe((event, id) => send(chunkOf(event, id)));
      const heartbeat = setInterval(() => send(': keep-alive\n\n'), heartbeatMs);
      heartbeat.unref();
      res.on('close', () => {
        clearInterval(heartbeat);
        unsubscribe();
        if (open.delete(res)) {
          add(byToken, token, -1);
          add(byAddress, client, -1);
        }
      });
    },
  });
};

/** An event as the stream sends it: an incident change with the caution beside its severity. */
function streamed(event: LiveEvent): LiveEvent | (LiveEvent & { advisory: string }) {
  return event.type === 'incident' ? { ...event, advisory: ADVISORY_CAUTION } : event;
}

function cookieValue(header: string | undefined, name: string): string | undefined {
  if (header === undefined) return undefined;
  for (const part of header.split(';')) {
    const eq = part.indexOf('=');
    if (eq > 0 && part.slice(0, eq).trim() === name) {
      try {
        return decodeURIComponent(part.slice(eq + 1).trim());
      } catch {
        return undefined;
      }
    }
  }
  return undefined;
}
