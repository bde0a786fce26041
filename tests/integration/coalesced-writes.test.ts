/**
 * Commands issued in one turn leave in one socket write (src/redis/coalescedWrites.ts), on a private redis-server and
 * a private Redis Cluster of 3 masters: every reply is the right one, in order; a lone command is sent in its own turn
 * (nothing waits for a timer or for another reply); the socket ioredis opens after a Redis restart is coalesced too.
 * The sends counted are the socket's own (`_write`, `_writev`: one system call each), not timings.
 */
import type { Socket } from 'node:net';
import type { Cluster, Redis } from 'ioredis';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { closeQuietly, connectRedis } from '../../src/redis/connection.ts';
import { startRedisCluster, type RedisCluster } from '../../src/runtime/embeddedRedisCluster.ts';
import { startRedisServer, type RedisServer } from '../helpers/redisServer.ts';

let server: RedisServer;
let cluster: RedisCluster;

beforeAll(async () => {
  [server, cluster] = await Promise.all([startRedisServer(), startRedisCluster({ masters: 3 })]);
}, 120_000);
afterAll(async () => {
  await Promise.all([server?.dispose(), cluster?.dispose()]);
});

/** Counts the sends of a connection's current socket from now on. */
function countSends(redis: Redis): { readonly sends: number } {
  const socket = (redis as unknown as { stream: Socket & { _write: (...a: unknown[]) => void; _writev?: (...a: unknown[]) => void } }).stream;
  const counter = { sends: 0 };
  for (const name of ['_write', '_writev'] as const) {
    const original = socket[name];
    if (original === undefined) continue;
    socket[name] = function counted(this: Socket, ...args: unknown[]) {
      counter.sends += 1;
      return original.apply(this, args);
    };
  }
  return counter;
}

function ready(redis: Redis | Cluster): Promise<void> {
  return redis.status === 'ready' ? Promise.resolve() : new Promise((resolve) => redis.once('ready', () => resolve()));
}

/** Forty commands of one turn: writes, reads, a script and a pipeline, with the replies they must give. */
async function oneTurn(redis: Redis | Cluster, tag: string): Promise<void> {
  const pending: Array<Promise<unknown>> = [];
  for (let i = 0; i < 10; i++) pending.push(redis.set(`${tag}k${i}`, `v${i}`));
  for (let i = 0; i < 10; i++) pending.push(redis.get(`${tag}k${i}`));
  for (let i = 0; i < 10; i++) pending.push(redis.incr(`${tag}n`));
  for (let i = 0; i < 9; i++) pending.push(redis.eval("return redis.call('GET', KEYS[1]) .. ARGV[1]", 1, `${tag}k${i}`, '!'));
  pending.push(
    redis
      .pipeline()
      .set(`${tag}p`, 'x')
      .append(`${tag}p`, 'y')
      .get(`${tag}p`)
      .exec()
      .then((r) => r?.map(([, v]) => v)),
  );
  const replies = await Promise.all(pending);
  expect(replies.slice(0, 10)).toEqual(Array(10).fill('OK'));
  expect(replies.slice(10, 20)).toEqual([...Array(10).keys()].map((i) => `v${i}`));
  expect(replies.slice(20, 30)).toEqual([...Array(10).keys()].map((i) => i + 1));
  expect(replies.slice(30, 39)).toEqual([...Array(9).keys()].map((i) => `v${i}!`));
  expect(replies[39]).toEqual(['OK', 2, 'xy']);
}

describe('commands of one turn', () => {
  it('leave a single Redis in one send, replies in order; a lone command is sent in its turn; after a restart too', { timeout: 120_000 }, async () => {
    const redis = connectRedis(server.url, 'worker') as Redis;
    try {
      await ready(redis);
      let counter = countSends(redis);
      await oneTurn(redis, 'a:');
      expect(counter.sends).toBe(1);

      // One command per turn, each awaited: one send each, and each answered (nothing holds a lone command back).
      counter = countSends(redis);
      for (let i = 0; i < 5; i++) expect(await redis.ping(`p${i}`)).toBe(`p${i}`);
      expect(counter.sends).toBe(5);

      // ioredis opens a new socket after the server comes back; it is coalesced as well.
      const reconnected = new Promise<void>((resolve) => redis.once('ready', () => resolve()));
      await server.stop();
      await server.start();
      await reconnected;
      counter = countSends(redis);
      await oneTurn(redis, 'b:');
      expect(counter.sends).toBe(1);
    } finally {
      await closeQuietly(redis);
    }
  });

  it('leave each Redis Cluster node in one send', { timeout: 120_000 }, async () => {
    const redis = connectRedis({ kind: 'cluster', nodes: cluster.nodes.map((n) => ({ host: '127.0.0.1', port: n.port })) }, 'worker') as Cluster;
    try {
      await ready(redis);
      // Three hash tags, each placed on another master (one send per master, whatever the order of the masters).
      const tags = ['{a}', '{b}', '{c}'];
      await Promise.all(tags.map((t) => redis.set(`${t}warm`, '1')));
      const shards = new Set(await Promise.all(tags.map(async (t) => redis.cluster('KEYSLOT', `${t}x`).then((slot) => cluster.nodes.findIndex((n) => n.slots[0] <= Number(slot) && Number(slot) <= n.slots[1])))));
      const counters = redis.nodes('master').map(countSends);
      await Promise.all(tags.map((t) => oneTurn(redis, `${t}:`)));
      expect(counters.reduce((s, c) => s + c.sends, 0)).toBe(shards.size);
    } finally {
      await closeQuietly(redis);
    }
  });
});
