/**
 * A REDIS_URL naming a database (`redis://host:port/N`): the command line uses that database, and one the server does
 * not have is refused with a clear error instead of every command silently going to database 0 (ioredis reports a
 * refused SELECT only as an error event). Against a private redis-server (16 databases, the default).
 */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { InputError } from '../../src/domain/errors.ts';
import { closeQuietly, connectForCommand } from '../../src/redis/connection.ts';
import { startRedisServer, type RedisServer } from '../helpers/redisServer.ts';

let server: RedisServer;

beforeAll(async () => {
  server = await startRedisServer();
});
afterAll(async () => {
  await server?.dispose();
});

describe('the database a Redis URL names', () => {
  it('is the one the commands go to', async () => {
    const redis = await connectForCommand(`${server.url}/3`);
    try {
      await redis.set('wearshift-database-check', 'three');
    } finally {
      await closeQuietly(redis);
    }
    const zero = server.client();
    expect(await zero.get('wearshift-database-check')).toBeNull();
    await zero.select(3);
    expect(await zero.get('wearshift-database-check')).toBe('three');
    await zero.del('wearshift-database-check');
    await zero.select(0);
  });

  it('is refused, naming it and the reason, when the server does not have it; nothing is written to database 0', async () => {
    const error = await connectForCommand(`${server.url}/99`).then(
      () => undefined,
      (e: unknown) => e,
    );
    expect(error).toBeInstanceOf(InputError);
    expect((error as Error).message).toMatch(/has no database 99: .*out of range/i);
    expect(await server.client().dbsize()).toBe(0);
  });
});
