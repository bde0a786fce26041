/**
 * A private redis-server for integration tests (src/runtime/embeddedRedis.ts), plus clients that dispose()
 * closes. Tests never touch a Redis they did not start.
 */
import { Redis } from 'ioredis';
import { startEmbeddedRedis, type EmbeddedRedis, type EmbeddedRedisOptions } from '../../src/runtime/embeddedRedis.ts';

export { freePort } from '../../src/runtime/embeddedRedis.ts';

export type RedisServerOptions = EmbeddedRedisOptions;

export interface RedisServer extends EmbeddedRedis {
  /** A client of this server, closed by dispose(). */
  client(): Redis;
}

export async function startRedisServer(options: RedisServerOptions = {}): Promise<RedisServer> {
  const server = await startEmbeddedRedis(options);
  const clients: Redis[] = [];
  return {
    ...server,
    client() {
      const c = new Redis(server.port, '127.0.0.1', { maxRetriesPerRequest: null, lazyConnect: false });
      c.on('error', () => {});
      clients.push(c);
      return c;
    },
    async dispose() {
      for (const c of clients) c.disconnect();
      await server.dispose();
    },
  };
}
