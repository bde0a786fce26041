/**
 * `GET /v1/events`: live updates as server-sent events (fastify 5 plugin), for the viewer role. Each event of the hub
 * becomes `id: <n>`, `event: incident|result` and `data: <JSON>`; a comment line every `heartbeatMs` keeps proxies
 * from closing an idle stream.
 *
 * Authentication: a browser's EventSource cannot send an Authorization header, so besides the bearer header the
 * token is accepted from the `wearshift_token` cookie, which the board sets for this path only (SameSite=Strict).
 * A cookie rather than `?token=`: a query string ends up in access logs, proxy logs and browser history. The cookie
 * is honoured on this read-only stream alone; every changing request still needs the bearer header, so a forged
 * cross-site request can do nothing with it.
 */
import type { FastifyPluginAsync, preHandlerAsyncHookHandler } from 'fastify';
import type { ServerResponse } from 'node:http';
import { requireRole } from './auth.ts';
import type { EventHub } from './eventHub.ts';

export const EVENT_TOKEN_COOKIE = 'wearshift_token';

export interface EventRoutesOptions {
  hub: EventHub;
  /** Default: a viewer or responder token, from the bearer header or the `wearshift_token` cookie. */
  authorize?: preHandlerAsyncHookHandler;
  /** Interval of the keep-alive comment. Default 20 000 ms. */
  heartbeatMs?: number;
  /** A client that falls this many bytes behind is disconnected (it reconnects and reloads). Default 1 MiB. */
  maxBufferedBytes?: number;
  /** The reconnection delay the stream asks browsers for. Default 3000 ms. */
  retryMs?: number;
}

export const eventRoutes: FastifyPluginAsync<EventRoutesOptions> = async (app, options) => {
  const authorize = options.authorize ?? requireRole('viewer', 'responder');
  const heartbeatMs = options.heartbeatMs ?? 20_000;
  const maxBuffered = options.maxBufferedBytes ?? 1024 * 1024;
  const open = new Set<ServerResponse>();

  // Streams never end by themselves: without this, closing the server would wait for every browser to leave.
  app.addHook('preClose', async () => {
    for (const res of open) res.end();
  });

  app.get('/v1/events', {
    onRequest: async (request) => {
      if (request.headers.authorization !== undefined) return;
      const token = cookieValue(request.headers.cookie, EVENT_TOKEN_COOKIE);
      if (token !== undefined) request.headers.authorization = `Bearer ${token}`;
    },
    preHandler: authorize,
    handler: async (request, reply) => {
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
      const unsubscribe = options.hub.subscribe((event, id) => {
        if (res.writableLength > maxBuffered) {
          res.destroy();
          return;
        }
        res.write(`id: ${id}\nevent: ${event.type}\ndata: ${JSON.stringify(event)}\n\n`);
      });
      const heartbeat = setInterval(() => res.write(': keep-alive\n\n'), heartbeatMs);
      heartbeat.unref();
      res.on('close', () => {
        clearInterval(heartbeat);
        unsubscribe();
        open.delete(res);
      });
    },
  });
};

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
