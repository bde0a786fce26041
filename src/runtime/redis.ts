/**
 * Redis connections. BullMQ workers block on Redis and must retry for ever (`maxRetriesPerRequest: null`);
 * request paths (HTTP intake, readiness probe) must fail fast instead of queueing commands while Redis is
 * away, so they get a connection without the offline queue.
 */
import { Redis, type RedisOptions } from 'ioredis';
import type { Config } from '../domain/config.ts';
import { InputError } from '../domain/errors.ts';
import { maskUrl, type Logger } from './logger.ts';

export const DEFAULT_REDIS_URL = 'redis://127.0.0.1:6379';

/** `REDIS_URL` wins over the configuration file, which wins over the local default. */
export function redisUrl(config: Pick<Config, 'redis'>, env: NodeJS.ProcessEnv = process.env): string {
  return env.REDIS_URL || config.redis.url || DEFAULT_REDIS_URL;
}

export type ConnectionRole = 'worker' | 'request';

export function connectRedis(url: string, role: ConnectionRole, logger?: Logger): Redis {
  const options: RedisOptions =
    role === 'worker'
      ? { maxRetriesPerRequest: null, enableReadyCheck: true }
      : { maxRetriesPerRequest: 1, enableOfflineQueue: false, connectTimeout: 2000 };
  const redis = new Redis(url, { ...options, retryStrategy: (attempt) => Math.min(200 * attempt, 2000), lazyConnect: false });
  let reported = false;
  // ioredis emits an error for every failed reconnect; one line per outage is enough.
  redis.on('error', (e: Error) => {
    if (reported) return;
    reported = true;
    logger?.warn({ err: e.message, redis: maskUrl(url), role }, 'redis connection error');
  });
  redis.on('ready', () => {
    if (reported) logger?.info({ redis: maskUrl(url), role }, 'redis connection restored');
    reported = false;
  });
  return redis;
}

/**
 * BullMQ loses jobs when Redis evicts keys under memory pressure, and so would the histories: only
 * `noeviction` is safe. Managed services sometimes forbid CONFIG; then say that the policy is unknown.
 */
export async function checkEvictionPolicy(redis: Redis, logger: Logger): Promise<string | undefined> {
  try {
    const reply = (await redis.config('GET', 'maxmemory-policy')) as string[];
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

/** A connection for a command line: it fails at once when Redis is away instead of retrying for ever. */
export async function connectForCommand(url: string): Promise<Redis> {
  const redis = new Redis(url, { lazyConnect: true, maxRetriesPerRequest: 1, connectTimeout: 3000, retryStrategy: () => null });
  redis.on('error', () => {});
  try {
    await redis.connect();
  } catch (e) {
    redis.disconnect();
    throw new InputError(`cannot reach Redis at ${maskUrl(url)} (REDIS_URL or redis.url): ${(e as Error).message}`);
  }
  return redis;
}

export async function closeQuietly(redis: Redis): Promise<void> {
  await redis.quit().catch(() => redis.disconnect());
}
