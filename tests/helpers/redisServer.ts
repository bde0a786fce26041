/**
 * A private redis-server for integration tests (src/runtime/embeddedRedis.ts), with clients that dispose()
 * closes. Tests never touch a Redis they did not start.
 */
import { startEmbeddedRedis, type EmbeddedRedis, type EmbeddedRedisOptions } from '../../src/runtime/embeddedRedis.ts';

export { freePort } from '../../src/runtime/embeddedRedis.ts';

export type RedisServerOptions = EmbeddedRedisOptions;
export type RedisServer = EmbeddedRedis;

export function startRedisServer(options: RedisServerOptions = {}): Promise<RedisServer> {
  return startEmbeddedRedis(options);
}
