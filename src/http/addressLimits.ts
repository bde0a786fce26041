/**
 * Bounds per remote address: open sockets (so one address sending headers slowly and reconnecting cannot hold every
 * socket of the process) and failed authentications (so tokens cannot be guessed at full speed). Sockets are counted
 * per socket peer, before any request is read. Requests are counted per client address: the socket's peer, or, when
 * that peer is one of the configured trusted proxies (`limits.trustedProxies`, the framework's trustProxy), the
 * right-most hop of X-Forwarded-For that is not a trusted proxy. Without trusted proxies every client behind a reverse
 * proxy shares its address, and the limits apply to the proxy as a whole (README, "Limits under load").
 *
 * Every bound counts an address under its `addressKey`: an IPv4 address as itself, an IPv6 address by its /64 prefix.
 * A single IPv6 host is usually given a whole /64 and may take any address in it, so counting IPv6 addresses one by
 * one would let one client escape every bound by moving to the next address; treating one /64 as one client is
 * common practice for IPv6 rate limiting. The cost: hosts that share one /64 (a network that does not hand out a
 * prefix per host) share these bounds too.
 */
import type { Server } from 'node:http';
import { BlockList, isIP, isIPv6, type Socket } from 'node:net';
import type { FastifyRequest } from 'fastify';

/**
 * The client address of a request: its socket's peer, or the one a trusted proxy forwarded for ("" when the socket has
 * already gone). A forwarded hop that is not an IP address (a proxy's "unknown", or text passed on unchecked) counts as
 * the socket's peer, so the per-address maps never key on arbitrary text. This is the address itself, for messages
 * and logs; the bounds count it under its `addressKey`.
 */
export function addressOf(request: FastifyRequest): string {
  const peer = request.socket.remoteAddress ?? '';
  const client = request.ip;
  return client !== undefined && client !== peer && isIP(client) !== 0 ? client : peer;
}

/**
 * What the per-address bounds count `address` under: an IPv4 address as it is; an IPv4-mapped IPv6 address
 * (`::ffff:192.0.2.1`, as a dual-stack socket reports an IPv4 peer) as that IPv4 address; any other IPv6 address as its
 * /64 prefix, the first four groups in lower-case hexadecimal without leading zeros followed by `::/64`
 * (`2001:db8:0:7::/64`), whatever its spelling (`::` compression, upper case, leading zeros, a trailing dotted part)
 * and without its zone id (`fe80::1%eth0` counts under `fe80:0:0:0::/64`). Anything else (`""` for a socket already
 * gone) is returned unchanged; so is a key (`addressKey(addressKey(a)) === addressKey(a)`), which is the IPv4 address
 * or not an IP address at all.
 */
export function addressKey(address: string): string {
  if (!isIPv6(address)) return address;
  const groups = ipv6Groups(address);
  if (groups.slice(0, 5).every((g) => g === 0) && groups[5] === 0xffff) {
    return [groups[6]! >> 8, groups[6]! & 0xff, groups[7]! >> 8, groups[7]! & 0xff].join('.');
  }
  return `${groups.slice(0, 4).map((g) => g.toString(16)).join(':')}::/64`;
}

/** The eight 16-bit groups of an address `isIPv6` accepts, its zone id dropped. */
function ipv6Groups(address: string): number[] {
  const zone = address.indexOf('%');
  let text = zone === -1 ? address : address.slice(0, zone);
  // A trailing dotted part (`::ffff:192.0.2.1`, `64:ff9b::192.0.2.1`) stands for the last two groups.
  const lastColon = text.lastIndexOf(':');
  if (text.includes('.', lastColon)) {
    const [a, b, c, d] = text.slice(lastColon + 1).split('.').map(Number) as [number, number, number, number];
    text = `${text.slice(0, lastColon + 1)}${((a << 8) | b).toString(16)}:${((c << 8) | d).toString(16)}`;
  }
  const parse = (part: string) => (part === '' ? [] : part.split(':').map((g) => parseInt(g, 16)));
  const gap = text.indexOf('::');
  if (gap === -1) return parse(text);
  const head = parse(text.slice(0, gap));
  const tail = parse(text.slice(gap + 2));
  return [...head, ...Array.from({ length: 8 - head.length - tail.length }, () => 0), ...tail];
}

/** Whether a request presents a token: a bearer header, or the live-event stream's cookie. */
export function presentsToken(request: FastifyRequest): boolean {
  return request.headers.authorization !== undefined || /(?:^|;)\s*wearshift_token=/.test(request.headers.cookie ?? '');
}

/**
 * Whether an address is one of `ranges` (IP addresses and CIDR ranges, as `limits.trustedProxies` lists them, checked
 * before); an IPv4-mapped IPv6 address is matched as its IPv4 address.
 */
export function addressMatcher(ranges: readonly string[]): (address: string) => boolean {
  if (ranges.length === 0) return () => false;
  const list = new BlockList();
  for (const range of ranges) {
    const [address, prefix] = range.split('/') as [string, string | undefined];
    const type = isIPv6(address) ? 'ipv6' : 'ipv4';
    if (prefix === undefined) list.addAddress(address, type);
    else list.addSubnet(address, Number(prefix), type);
  }
  return (address) => {
    const bare = address.replace(/%.*$/, '');
    const mapped = /^::ffff:(\d+\.\d+\.\d+\.\d+)$/i.exec(bare);
    if (mapped !== null) return list.check(mapped[1]!, 'ipv4');
    const family = isIP(bare);
    return family !== 0 && list.check(bare, family === 6 ? 'ipv6' : 'ipv4');
  };
}

/**
 * Closes a new connection at once while its peer's `addressKey` (the address, an IPv6 peer's /64) already holds `max`
 * open sockets. A peer that `exact` takes (a trusted reverse proxy) is counted by its own address, not with the rest
 * of its /64: two proxies of one network do not share one allowance. The count per key leaves the map when it falls to
 * 0, so the map holds at most as many entries as there are open sockets.
 */
export function limitConnectionsPerAddress(server: Server, max: number, exact: (address: string) => boolean = () => false): void {
  const open = new Map<string, number>();
  // Before the HTTP server's own listener: a refused socket is never parsed.
  server.prependListener('connection', (socket: Socket) => {
    const peer = socket.remoteAddress ?? '';
    const grouped = addressKey(peer);
    // IPv4 peers (and IPv4-mapped ones) are counted by their address anyway.
    const key = grouped.endsWith('/64') && exact(peer) ? peer.replace(/%.*$/, '').toLowerCase() : grouped;
    const held = open.get(key) ?? 0;
    if (held >= max) {
      socket.destroy();
      return;
    }
    open.set(key, held + 1);
    socket.once('close', () => {
      const left = (open.get(key) ?? 1) - 1;
      if (left > 0) open.set(key, left);
      else open.delete(key);
    });
  });
}

export interface FailedAuthGuardOptions {
  /** Failures an address (an IPv6 /64, `addressKey`) may have within a window; the next request with a token waits for the window's end. */
  readonly max: number;
  readonly windowMs: number;
  /** Most addresses (keys: an IPv6 /64 is one) remembered; the one whose failures are the oldest news is forgotten first. */
  readonly addresses: number;
  /** Milliseconds since the epoch. Default `Date.now`. */
  readonly now?: () => number;
}

/**
 * Failed authentications per address in a fixed window, in a map bounded to `addresses` entries (least recently failed
 * evicted). Addresses are counted under their `addressKey`, so every address of one IPv6 /64 shares one window.
 */
export class FailedAuthGuard {
  private readonly windows = new Map<string, { start: number; failures: number }>();
  private readonly now: () => number;

  constructor(private readonly options: FailedAuthGuardOptions) {
    this.now = options.now ?? Date.now;
  }

  /** Counts one unknown token presented from `address`. */
  failed(address: string): void {
    const key = addressKey(address);
    const now = this.now();
    const known = this.windows.get(key);
    const current = known !== undefined && now - known.start < this.options.windowMs ? known : { start: now, failures: 0 };
    current.failures += 1;
    // Re-inserted, so the map's first entry is always the least recently failed address.
    this.windows.delete(key);
    this.windows.set(key, current);
    while (this.windows.size > this.options.addresses) this.windows.delete(this.windows.keys().next().value!);
  }

  /** Seconds until `address` may present a token again; undefined while it may. */
  lockedFor(address: string): number | undefined {
    const key = addressKey(address);
    const known = this.windows.get(key);
    if (known === undefined) return undefined;
    const left = known.start + this.options.windowMs - this.now();
    if (left <= 0) {
      this.windows.delete(key);
      return undefined;
    }
    return known.failures >= this.options.max ? Math.max(1, Math.ceil(left / 1000)) : undefined;
  }
}
