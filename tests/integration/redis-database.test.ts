/**
 * A REDIS_URL naming a database (`redis://host:port/N`): the command line uses that database, and one the server does
 * not have is refused with a clear error instead of every command silently going to database 0 (ioredis reports a
 * refused SELECT only as an error event); the long-running services end with the same error before they take a job or
 * a request. Against a private redis-server (16 databases, the default).
 */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { InputError } from '../../src/domain/errors.ts';
import { closeQuietly, connectForCommand } from '../../src/redis/connection.ts';
import { runCli } from '../helpers/cli.ts';
import { freePort, startRedisServer, type RedisServer } from '../helpers/redisServer.ts';

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

  // Each service is the real command line (a Node process, through tsx after an edit); it ends by itself, so the bound
  // only stops a hung one: no timing is measured.
  it('ends worker and api with exit 2 and the same message, before they take a job or serve a request', { timeout: 600_000 }, async () => {
    const url = `${server.url}/99`;
    const env = { REDIS_URL: url, LOG_LEVEL: 'warn' };
    const [worker, api] = await Promise.all([
      runCli(['worker', '--metrics-port', String(await freePort()), '--history-threads', '0'], env),
      runCli(['api', '--port', String(await freePort())], env),
    ]);
    for (const [kind, r] of [['worker', worker], ['api', api]] as const) {
      expect(r.stderr, kind).toMatch(new RegExp(`^wearshift: Redis at ${url.replace(/[.]/g, '\\.')} \\(REDIS_URL or redis\\.url\\) has no database 99: .*out of range`, 'im'));
      expect(r.stderr, kind).not.toMatch(/\n\s+at /);
      expect(r.code, kind).toBe(2);
    }
    expect(await server.client().dbsize()).toBe(0);
  });
});
