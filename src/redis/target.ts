/**
 * Which Redis a command or a process uses: one Redis by URL, or a Redis Cluster by its seed nodes. Apart from the
 * connection itself (connection.ts) so that a command that only names the target does not load the Redis client.
 */
import type { Config } from '../domain/config.ts';
import { InputError } from '../domain/errors.ts';
import { maskUrl } from '../telemetry/redactText.ts';

export const DEFAULT_REDIS_URL = 'redis://127.0.0.1:6379';

/** One Redis by URL, or a Redis Cluster by its seed nodes. */
export type RedisTarget = { readonly kind: 'single'; readonly url: string } | { readonly kind: 'cluster'; readonly nodes: readonly { host: string; port: number }[] };

/** `REDIS_URL` wins over the configuration file, which wins over the local default. */
export function redisUrl(config: Pick<Config, 'redis'>, env: NodeJS.ProcessEnv = process.env): string {
  return env.REDIS_URL || config.redis.url || DEFAULT_REDIS_URL;
}

/** `REDIS_CLUSTER_NODES=host:port,host:port` (or `redis.cluster.nodes`) names a cluster; otherwise one Redis by URL. */
export function redisTarget(config: Pick<Config, 'redis'>, env: NodeJS.ProcessEnv = process.env): RedisTarget {
  const listed = env.REDIS_CLUSTER_NODES?.split(',').map((s) => s.trim()).filter((s) => s !== '') ?? config.redis.cluster?.nodes;
  if (listed === undefined || listed.length === 0) return { kind: 'single', url: redisUrl(config, env) };
  const nodes = listed.map((n) => {
    const m = /^([^\s:]+):(\d{1,5})$/.exec(n);
    if (!m) throw new InputError(`REDIS_CLUSTER_NODES / redis.cluster.nodes: "${n}" is not host:port`);
    return { host: m[1]!, port: Number(m[2]) };
  });
  return { kind: 'cluster', nodes };
}

/** For logs and messages: the URL without its password, or the seed nodes. */
export function describeTarget(t: RedisTarget): string {
  return t.kind === 'single' ? maskUrl(t.url) : `cluster ${t.nodes.map((n) => `${n.host}:${n.port}`).join(',')}`;
}

