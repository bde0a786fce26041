/**
 * A command that cannot reach Redis says why — the socket's own error with its code and address (ECONNREFUSED,
 * ENOTFOUND), not ioredis's "Connection is closed." that follows it — and how to give it one. Against a free port
 * where nothing listens: no Redis is touched.
 */
import { describe, expect, it } from 'vitest';
import { InputError } from '../../src/domain/errors.ts';
import { connectFailure, connectForCommand, REDIS_HINT } from '../../src/redis/connection.ts';
import { runCli } from '../helpers/cli.ts';
import { freePort } from '../helpers/redisServer.ts';

async function refusal(target: Parameters<typeof connectForCommand>[0]): Promise<Error> {
  return connectForCommand(target).then(
    () => {
      throw new Error('connected where nothing listens');
    },
    (e: Error) => e,
  );
}

describe('a command line that cannot reach Redis', { timeout: 600_000 }, () => {
  it('keeps the refused connection\'s code and address, and says how to give a Redis', async () => {
    const port = await freePort();
    const e = await refusal(`redis://127.0.0.1:${port}`);
    expect(e).toBeInstanceOf(InputError);
    expect(e.message).toBe(`cannot reach Redis at redis://127.0.0.1:${port} (REDIS_URL or redis.url): connect ECONNREFUSED 127.0.0.1:${port}; ${REDIS_HINT}`);
    expect(e.message).not.toContain('Connection is closed');
    expect(REDIS_HINT).toMatch(/REDIS_URL.*REDIS_CLUSTER_NODES.*redis-server/);
  });

  it('does the same for a Redis Cluster, whose client reports only "Connection is closed." per node', async () => {
    const port = await freePort();
    const e = await refusal({ kind: 'cluster', nodes: [{ host: '127.0.0.1', port }] });
    expect(e).toBeInstanceOf(InputError);
    expect(e.message).toContain(`(REDIS_CLUSTER_NODES or redis.cluster.nodes): connect ECONNREFUSED 127.0.0.1:${port}; ${REDIS_HINT}`);
  });

  it('adds the code and address when the error\'s own words lack them, and keeps the rejection when nothing else is known', () => {
    const dns = Object.assign(new Error('lookup failed'), { code: 'ENOTFOUND', address: 'redis.plant.example', port: 6379 });
    expect(connectFailure(new Error('Connection is closed.'), dns)).toBe('lookup failed (ENOTFOUND) at redis.plant.example:6379');
    expect(connectFailure(new Error('no answer within 10 s of connecting'), undefined)).toBe('no answer within 10 s of connecting');
  });

  it('`wearshift incidents list` prints the cause and the hint, exit 2', async () => {
    const port = await freePort();
    const r = await runCli(['incidents', 'list'], { REDIS_URL: `redis://127.0.0.1:${port}`, REDIS_CLUSTER_NODES: '' });
    expect(r.code).toBe(2);
    expect(r.stderr).toContain(`wearshift: cannot reach Redis at redis://127.0.0.1:${port} (REDIS_URL or redis.url): connect ECONNREFUSED 127.0.0.1:${port}; give the address of a running Redis in REDIS_URL`);
    expect(r.stderr).not.toMatch(/\n\s+at /);
  });
});
