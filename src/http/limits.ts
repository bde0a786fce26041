/**
 * The bounds of the HTTP API, in one place: how much one request may carry, how long a client may take to send
 * it, how long idle sockets live, how many live-event clients and how far behind each may fall, and how much
 * chart work one process does at once. Every field has a documented default (README, "Limits under load");
 * `resolveHttpLimits` fills in the ones not given.
 */
import { addressRangeProblem } from '../domain/addressRange.ts';

export interface HttpLimits {
  /** Largest request body in bytes (413 above it). Default 5 MiB. */
  readonly bodyLimitBytes: number;
  /** Most result records in one POST /v1/results (413 above it, naming the cap). Default 5 000. */
  readonly maxRecordsPerRequest: number;
  /** Whole request, headers and body, must arrive within this; the socket is closed after it. Default 30 000 ms. */
  readonly requestTimeoutMs: number;
  /** The request headers must arrive within this. Default 15 000 ms (at most `requestTimeoutMs`). */
  readonly headersTimeoutMs: number;
  /** An idle keep-alive socket is closed after this. Default 5 000 ms. */
  readonly keepAliveTimeoutMs: number;
  /** A socket with no traffic either way is closed after this (live streams send a heartbeat well within it). Default 60 000 ms. */
  readonly idleSocketTimeoutMs: number;
  /** How often the timeouts above are checked. Default 1 000 ms. */
  readonly timeoutCheckIntervalMs: number;
  /** Most open sockets; further connections are refused at once. Default 4 096. */
  readonly maxConnections: number;
  // Every bound "per address" below counts an IPv6 address by its /64 (addressKey in addressLimits.ts: one client
  // commonly holds a whole /64), and an IPv4 address, or an IPv4-mapped IPv6 one, by itself.
  /**
   * Most open sockets from one socket peer; a further connection from it is closed at once, so one address cannot
   * take every socket. Counted before any request is read, so `trustedProxies` does not change it: behind a reverse
   * proxy every socket comes from the proxy, so raise it to the connections the proxy keeps open. A peer listed in
   * `trustedProxies` is counted by its own address, not with the rest of its /64. Default 64.
   */
  readonly maxConnectionsPerAddress: number;
  /**
   * Requests that presented an unknown token (401) from one client address (the socket's peer, or the client a trusted
   * proxy forwarded for) within `failedAuthWindowMs`; beyond it every request with a token from that address gets 429
   * with Retry-After until the window ends. Default 20.
   */
  readonly maxFailedAuthPerAddress: number;
  /**
   * Reverse proxies (IP addresses or CIDR ranges) whose X-Forwarded-For is believed. A request whose socket comes from
   * one of them is counted, for the unknown tokens and the live-event streams per address, under its client's address:
   * the right-most hop of X-Forwarded-For that is not itself one of them. From any other peer the header is ignored.
   * Open sockets are counted per socket peer all the same: `maxConnectionsPerAddress` holds for the proxy as a whole.
   * Default none: X-Forwarded-For is ignored, and every bound counts the socket's peer.
   */
  readonly trustedProxies: readonly string[];
  /** The window failed authentications are counted in, per address. Default 60 000 ms. */
  readonly failedAuthWindowMs: number;
  /** Most addresses whose failed authentications are remembered (least recently failed forgotten first). Default 10 000. */
  readonly failedAuthAddresses: number;
  /**
   * Incident records one GET /v1/incidents reads at most looking for its page's matches (a filter by unit, group,
   * severity or a state within the open ones); the page then ends early and `next` continues after the last record read.
   * Default 2 000.
   */
  readonly incidentScanRecords: number;
  /** GET /v1/incidents with such a filter answered at once per process; a further one gets 503 with Retry-After. Default 4. */
  readonly incidentScanConcurrency: number;
  /** Longest path parameter in characters (an incident id percent-encoded). Default 2 304: 256 characters of 3-byte UTF-8. */
  readonly maxParamLength: number;
  /** Most open live-event streams (GET /v1/events); further ones get 503. Default 500. */
  readonly maxEventClients: number;
  /** Most open live-event streams per token (by its digest); a further one from that token gets 429 with Retry-After. Default 8. */
  readonly maxEventClientsPerToken: number;
  /** Most open live-event streams per client address (as for `maxFailedAuthPerAddress`); a further one from it gets 429 with Retry-After. Default 16. */
  readonly maxEventClientsPerAddress: number;
  /** A live-event client whose unsent data exceeds this is disconnected (it reconnects and reloads). Default 256 KiB. */
  readonly maxEventBufferBytes: number;
  /** Charts and series computed at once per process; others wait. Default 1. */
  readonly chartConcurrency: number;
  /** Chart and series requests waiting for a slot; beyond that 503 with Retry-After. Default 16. */
  readonly chartQueue: number;
  /** A chart or series taking longer is abandoned (its thread is stopped) and answered 503. Default 20 000 ms. */
  readonly chartTimeoutMs: number;
  /** Most samples a chart draws: a longer history is drawn over its latest samples, and the chart says so. Default 1 000. */
  readonly chartSampleBudget: number;
}

/** Incident ids are `unit/component[/measurand|/sampling]@sampleId`; unit, component and sampleId at most 80 each. */
export const MAX_INCIDENT_ID_CHARS = 256;

export const DEFAULT_HTTP_LIMITS: HttpLimits = {
  bodyLimitBytes: 5 * 1024 * 1024,
  maxRecordsPerRequest: 5000,
  requestTimeoutMs: 30_000,
  headersTimeoutMs: 15_000,
  keepAliveTimeoutMs: 5000,
  idleSocketTimeoutMs: 60_000,
  timeoutCheckIntervalMs: 1000,
  maxConnections: 4096,
  maxConnectionsPerAddress: 64,
  maxFailedAuthPerAddress: 20,
  trustedProxies: [],
  failedAuthWindowMs: 60_000,
  failedAuthAddresses: 10_000,
  incidentScanRecords: 2000,
  incidentScanConcurrency: 4,
  // A character of 3-byte UTF-8 is 9 characters percent-encoded.
  maxParamLength: MAX_INCIDENT_ID_CHARS * 9,
  maxEventClients: 500,
  maxEventClientsPerToken: 8,
  maxEventClientsPerAddress: 16,
  maxEventBufferBytes: 256 * 1024,
  chartConcurrency: 1,
  chartQueue: 16,
  chartTimeoutMs: 20_000,
  chartSampleBudget: 1000,
};

export function resolveHttpLimits(given: Partial<HttpLimits> = {}): HttpLimits {
  const limits = { ...DEFAULT_HTTP_LIMITS, ...Object.fromEntries(Object.entries(given).filter(([, v]) => v !== undefined)) } as HttpLimits;
  for (const [name, value] of Object.entries(limits)) {
    if (name === 'trustedProxies') continue;
    if (!Number.isFinite(value) || value < 0) throw new TypeError(`http limit ${name}: expected a number not below 0, got ${String(value)}`);
  }
  if (!Array.isArray(limits.trustedProxies)) throw new TypeError('http trustedProxies: expected a list of IP addresses or CIDR ranges');
  for (const range of limits.trustedProxies) {
    const problem = typeof range === 'string' ? addressRangeProblem(range) : 'expected a string';
    if (problem !== undefined) throw new TypeError(`http trustedProxies: ${problem}`);
  }
  // Node refuses a headers timeout above the request timeout.
  return limits.headersTimeoutMs > limits.requestTimeoutMs ? { ...limits, headersTimeoutMs: limits.requestTimeoutMs } : limits;
}

/** "5 MB", "64 kB", "100 bytes". */
export function formatBytes(n: number): string {
  return n % (1024 * 1024) === 0 ? `${n / (1024 * 1024)} MB` : n % 1024 === 0 ? `${n / 1024} kB` : `${n} bytes`;
}
