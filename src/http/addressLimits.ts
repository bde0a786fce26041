/**
 * Bounds per remote address: open sockets (so one address sending headers slowly and reconnecting cannot hold every
 * socket of the process) and failed authentications (so tokens cannot be guessed at full speed). Sockets are counted
 * per socket peer, before any request is read. Requests are counted per client address: the socket's peer, or, when
 * that peer is one of the configured trusted proxies (`limits.trustedProxies`, the framework's trustProxy), the
 * right-most hop of X-Forwarded-For that is not a trusted proxy. Without trusted proxies every client behind a reverse
 * proxy shares its address, and the limits apply to the proxy as a whole (README, "Limits under load").
 */
import type { Server } from 'node:http';
import { isIP, type Socket } from 'node:net';
import type { FastifyRequest } from 'fastify';

/**
 * The client address of a request: its socket's peer, or the one a trusted proxy forwarded for ("" when the socket has
 * already gone). A forwarded hop that is not an IP address (a proxy's "unknown", or text passed on unchecked) counts as
 * the socket's peer, so the per-address maps never key on arbitrary text.
 */
export function addressOf(request: FastifyRequest): string {
  const peer = request.socket.remoteAddress ?? '';
  const client = request.ip;
  return client !== undefined && client !== peer && isIP(client) !== 0 ? client : peer;
}

/** Whether a request presents a token: a bearer header, or the live-event stream's cookie. */
export function presentsToken(request: FastifyRequest): boolean {
  return request.headers.authorization !== undefined || /(?:^|;)\s*wearshift_token=/.test(request.headers.cookie ?? '');
}

/**
 * Closes a new connection at once while its address already holds `max` open sockets. The count per address leaves
 * the map when it falls to 0, so the map holds at most as many entries as there are open sockets.
 */
export function limitConnectionsPerAddress(server: Server, max: number): void {
  const open = new Map<string, number>();
  // Before the HTTP server's own listener: a refused socket is never parsed.
  server.prependListener('connection', (socket: Socket) => {
    const address = socket.remoteAddress ?? '';
    const held = open.get(address) ?? 0;
    if (held >= max) {
      socket.destroy();
      return;
    }
    open.set(address, held + 1);
    socket.once('close', () => {
      const left = (open.get(address) ?? 1) - 1;
      if (left > 0) open.set(address, left);
      else open.delete(address);
    });
  });
}

export interface FailedAuthGuardOptions {
  /** Failures an address may have within a window; the next request with a token waits for the window's end. */
  readonly max: number;
  readonly windowMs: number;
  /** Most addresses remembered; the one whose failures are the oldest news is forgotten first. */
  readonly addresses: number;
  /** Milliseconds since the epoch. Default `Date.now`. */
  readonly now?: () => number;
}

/** Failed authentications per address in a fixed window, in a map bounded to `addresses` entries (least recently failed evicted). */
export class FailedAuthGuard {
  private readonly windows = new Map<string, { start: number; failures: number }>();
  private readonly now: () => number;

  constructor(private readonly options: FailedAuthGuardOptions) {
    this.now = options.now ?? Date.now;
  }

  /** Counts one unknown token presented from `address`. */
  failed(address: string): void {
    const now = this.now();
    const known = this.windows.get(address);
    const current = known !== undefined && now - known.start < this.options.windowMs ? known : { start: now, failures: 0 };
    current.failures += 1;
    // Re-inserted, so the map's first entry is always the least recently failed address.
    this.windows.delete(address);
    this.windows.set(address, current);
    while (this.windows.size > this.options.addresses) this.windows.delete(this.windows.keys().next().value!);
  }

  /** Seconds until `address` may present a token again; undefined while it may. */
  lockedFor(address: string): number | undefined {
    const known = this.windows.get(address);
    if (known === undefined) return undefined;
    const left = known.start + this.options.windowMs - this.now();
    if (left <= 0) {
      this.windows.delete(address);
      return undefined;
    }
    return known.failures >= this.options.max ? Math.max(1, Math.ceil(left / 1000)) : undefined;
  }
}
