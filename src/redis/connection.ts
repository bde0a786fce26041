/**
 * Redis connections, to one Redis or to a Redis Cluster. BullMQ workers block on Redis and must retry for ever
 * (`maxRetriesPerRequest: null`); request paths (HTTP intake, readiness probe) must fail fast instead of queueing
 * commands while Redis is away, so they get a connection without the offline queue, and a command timeout: a Redis
 * that keeps the socket open but does not answer (a stopped or wedged process) fails each command after
 * `REQUEST_COMMAND_TIMEOUT_MS` instead of holding the request for ever.
 */
import { createConnection } from 'node:net';
import { Cluster, Redis, type ClusterOptions, type RedisOptions } from 'ioredis';
import { InputError } from '../domain/errors.ts';
import { coalesceWrites } from './coalescedWrites.ts';
import { maskUrl, type Logger } from '../telemetry/logger.ts';

export { DEFAULT_REDIS_URL, describeTarget, redisTarget, redisUrl, type RedisTarget } from './target.ts';
import { describeTarget, type RedisTarget } from './target.ts';

export type RedisConnection = Redis | Cluster;

export type ConnectionRole = 'worker' | 'request';

/** How long a cluster client waits for the slot map (CLUSTER SLOTS); ioredis's 1 s fails on a busy node. */
export const SLOTS_REFRESH_TIMEOUT_MS = 5000;

/**
 * How long one command of a request connection may wait for its answer; then it fails ("Command timed out") and
 * the HTTP API answers 503 with Retry-After. Workers have none: their blocking commands wait by design.
 */
export const REQUEST_COMMAND_TIMEOUT_MS = 2000;

export interface ConnectOptions {
  /** The connection's name in Redis (CLIENT LIST), for connections an operator may want to tell apart. */
  readonly name?: string;
  /** Request connections only: the longest wait for one command's answer. Default `REQUEST_COMMAND_TIMEOUT_MS`. */
  readonly commandTimeoutMs?: number;
}

function roleOptions(role: ConnectionRole, commandTimeoutMs: number): RedisOptions {
  return role === 'worker'
    ? { maxRetriesPerRequest: null, enableReadyCheck: true }
    : { maxRetriesPerRequest: 1, enableOfflineQueue: false, connectTimeout: 2000, commandTimeout: commandTimeoutMs };
}

export function connectRedis(target: string | RedisTarget, role: ConnectionRole, logger?: Logger, options: ConnectOptions = {}): RedisConnection {
  const t: RedisTarget = typeof target === 'string' ? { kind: 'single', url: target } : target;
  const { name, commandTimeoutMs = REQUEST_COMMAND_TIMEOUT_MS } = options;
  if (!(Number.isFinite(commandTimeoutMs) && commandTimeoutMs > 0)) throw new TypeError(`commandTimeoutMs: expected a number of milliseconds above 0, got ${String(commandTimeoutMs)}`);
  const redisOptions: RedisOptions = { ...roleOptions(role, commandTimeoutMs), ...(name !== undefined && { connectionName: name }) };
  const retryStrategy = (attempt: number) => Math.min(200 * attempt, 2000);
  const redis: RedisConnection =
    t.kind === 'single'
      ? new Redis(t.url, { ...redisOptions, retryStrategy, lazyConnect: false })
      : new Cluster([...t.nodes], {
          redisOptions,
          clusterRetryStrategy: retryStrategy,
          enableReadyCheck: true,
          slotsRefreshTimeout: SLOTS_REFRESH_TIMEOUT_MS,
          // BullMQ needs this for workers; requests fail fast through redisOptions.
          ...(role === 'worker' && { enableOfflineQueue: true }),
          ...(role === 'request' && { enableOfflineQueue: false }),
        } satisfies ClusterOptions);
  coalesceWrites(redis);
  let reported = false;
  const where = describeTarget(t);
  // ioredis emits an error for every failed reconnect; one line per outage is enough.
  redis.on('error', (e: Error) => {
    if (reported) return;
    reported = true;
    logger?.warn({ err: e.message, redis: where, role }, 'redis connection error');
  });
  redis.on('ready', () => {
    if (reported) logger?.info({ redis: where, role }, 'redis connection restored');
    reported = false;
  });
  return redis;
}

/**
 * BullMQ loses jobs when Redis evicts keys under memory pressure, and so would the histories: only
 * `noeviction` is safe. Managed services sometimes forbid CONFIG; then say that the policy is unknown.
 */
export async function checkEvictionPolicy(redis: RedisConnection, logger: Logger): Promise<string | undefined> {
  try {
    const reply = (await redis.config('GET', 'maxmemory-policy')) as unknown as string[];
    const policy = reply[1];
    if (policy !== 'noeviction') {
      logger.warn(
        { maxmemoryPolicy: policy },
        `Redis maxmemory-policy is "${policy}": under memory pressure Redis will evict queued jobs and stored histories. Set maxmemory-policy to noeviction.`,
      );
    }
    return policy;
  } catch (e) {
    logger.warn({ err: (e as Error).message }, 'could not read the Redis maxmemory-policy (CONFIG GET refused); make sure it is noeviction');
    return undefined;
  }
}

/**
 * How long a command line waits for Redis to answer: its first reply after connecting (a server that accepts the
 * connection but never answers, e.g. stopped or swapping, would otherwise hold `import` for ever), and any one command
 * after that (generous: a batch of a thousand results is one pipeline).
 */
export const COMMAND_LINE_READY_TIMEOUT_MS = 10_000;
export const COMMAND_LINE_COMMAND_TIMEOUT_MS = 30_000;

/** `connecting`, or a rejection when it has not settled within `ms`. */
async function within<T>(connecting: Promise<T>, ms: number): Promise<T> {
  let timer: NodeJS.Timeout | undefined;
  const late = new Promise<never>((_, reject) => {
    timer = setTimeout(() => reject(new Error(`no answer within ${ms / 1000} s of connecting (the server accepts connections but does not reply)`)), ms);
  });
  try {
    return await Promise.race([connecting, late]);
  } finally {
    clearTimeout(timer);
  }
}

/** What a person can do when a command finds no Redis: where the address comes from, and how to start one. */
export const REDIS_HINT =
  'give the address of a running Redis in REDIS_URL (redis://host:6379) or redis.url, or the nodes of a Redis Cluster in REDIS_CLUSTER_NODES (host:port,…), or start one here with `redis-server`';

/** A socket or DNS error as Node gives it: its code and the address it was trying. */
interface SystemError extends Error {
  readonly code?: string;
  readonly address?: string;
  readonly port?: number;
  /** A cluster's "all nodes failed" error: the last node's own error. */
  readonly lastNodeError?: Error;
}

/**
 * Why the connection failed, with the code and address: ioredis rejects `connect()` with "Connection is closed." once
 * its retry strategy gives up, and the cause (ECONNREFUSED, ENOTFOUND, ETIMEDOUT, a refused password) only comes as an
 * error event before it.
 */
export function connectFailure(rejection: Error, cause: SystemError | undefined): string {
  const e = cause?.lastNodeError ?? cause;
  if (e === undefined) return rejection.message;
  const s = e as SystemError;
  const code = s.code !== undefined && !e.message.includes(s.code) ? ` (${s.code})` : '';
  const where = s.address !== undefined && !e.message.includes(s.address) ? ` at ${s.address}${s.port !== undefined ? `:${s.port}` : ''}` : '';
  return `${e.message}${code}${where}`;
}

/** The error of one plain TCP connection to `host:port`, or undefined when it opens (then the cause lies beyond the socket). */
function socketRefusal(host: string, port: number): Promise<SystemError | undefined> {
  return new Promise((resolve) => {
    const socket = createConnection({ host, port });
    socket.setTimeout(3000, () => socket.destroy(Object.assign(new Error(`connect ETIMEDOUT ${host}:${port}`), { code: 'ETIMEDOUT' })));
    socket.once('connect', () => {
      socket.destroy();
      resolve(undefined);
    });
    socket.once('error', (e: SystemError) => resolve(e));
  });
}

/** A connection for a command line: it fails at once when Redis is away instead of retrying for ever. */
export async function connectForCommand(target: string | RedisTarget): Promise<RedisConnection> {
  const t: RedisTarget = typeof target === 'string' ? { kind: 'single', url: target } : target;
  // The first error event: the cause of the failure, not the "Connection is closed." that follows it.
  let cause: SystemError | undefined;
  const keep = (e: SystemError) => (cause ??= e);
  if (t.kind === 'cluster') {
    const cluster = new Cluster([...t.nodes], {
      lazyConnect: true,
      slotsRefreshTimeout: SLOTS_REFRESH_TIMEOUT_MS,
      redisOptions: { maxRetriesPerRequest: 1, connectTimeout: 3000, commandTimeout: COMMAND_LINE_COMMAND_TIMEOUT_MS },
      clusterRetryStrategy: () => null,
    });
    cluster.on('error', () => {});
    coalesceWrites(cluster);
    try {
      await within(cluster.connect(), COMMAND_LINE_READY_TIMEOUT_MS);
    } catch (e) {
      cluster.disconnect();
      // A cluster's node errors arrive only as "Connection is closed.": the first node is tried once more for the cause.
      const first = t.nodes[0];
      const refused = first === undefined ? undefined : await socketRefusal(first.host, first.port);
      throw new InputError(`cannot reach the Redis Cluster at ${describeTarget(t)} (REDIS_CLUSTER_NODES or redis.cluster.nodes): ${connectFailure(e as Error, refused)}; ${REDIS_HINT}`);
    }
    return cluster;
  }
  const redis = new Redis(t.url, { lazyConnect: true, maxRetriesPerRequest: 1, connectTimeout: 3000, commandTimeout: COMMAND_LINE_COMMAND_TIMEOUT_MS, retryStrategy: () => null });
  redis.on('error', keep);
  coalesceWrites(redis);
  try {
    await within(redis.connect(), COMMAND_LINE_READY_TIMEOUT_MS);
  } catch (e) {
    redis.disconnect();
    throw new InputError(`cannot reach Redis at ${maskUrl(t.url)} (REDIS_URL or redis.url): ${connectFailure(e as Error, cause)}; ${REDIS_HINT}`);
  }
  const refusal = await databaseRefusal(redis, t);
  if (refusal !== undefined) {
    redis.disconnect();
    throw refusal;
  }
  return redis;
}

/**
 * `databaseRefused` as the error a command or a service ends with: which Redis, where its URL came from, the database
 * and the server's reason. Undefined when the database can be used.
 */
export async function databaseRefusal(redis: RedisConnection, target: RedisTarget): Promise<InputError | undefined> {
  const refused = await databaseRefused(redis);
  if (refused === undefined || redis instanceof Cluster) return undefined;
  return new InputError(`Redis at ${describeTarget(target)} (REDIS_URL or redis.url) has no database ${redis.options.db}: ${refused}`);
}

/**
 * Waits until the connection is first ready, then `databaseRefusal`. A service awaits it before anything uses Redis: a
 * database the server does not have would otherwise send every command to database 0. While Redis cannot be reached,
 * this waits for it, as the workers would; a connection whose URL names no database (or a cluster's) resolves at once.
 */
export async function databaseRefusalOnceReady(redis: RedisConnection, target: RedisTarget): Promise<InputError | undefined> {
  if (redis instanceof Cluster || (redis.options.db ?? 0) === 0) return undefined;
  if (redis.status !== 'ready') await new Promise((resolve) => redis.once('ready', resolve));
  return databaseRefusal(redis, target);
}

/**
 * Why the database the URL names (`redis://host:port/N`) cannot be used, or undefined when it can. ioredis selects it
 * when it connects, but a refused SELECT (`DB index is out of range`) only raises an error event and leaves the
 * connection on database 0, where every later command would then go: so it is selected again here and the answer
 * read.
 */
export async function databaseRefused(redis: RedisConnection): Promise<string | undefined> {
  if (redis instanceof Cluster) return undefined;
  const db = redis.options.db ?? 0;
  if (db === 0) return undefined;
  try {
    await redis.select(db);
    return undefined;
  } catch (e) {
    return (e as Error).message;
  }
}

export async function closeQuietly(redis: RedisConnection): Promise<void> {
  await redis.quit().catch(() => redis.disconnect());
}
