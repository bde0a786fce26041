/**
 * A private Redis Cluster of N masters (default 3, no replicas) for integration tests and the benchmark, started
 * from the `redis-server` binary: every node on a free port whose bus port (port + 10 000) is free too, each in its
 * own directory under one temporary directory, no persistence. The helper forms the cluster itself (CLUSTER
 * ADDSLOTSRANGE on each node, CLUSTER MEET from the first) and waits until every node reports `cluster_state:ok`
 * and knows all the others, so no `redis-cli` is needed. `dispose()` kills the nodes and removes the directory.
 * Nothing here connects to a Redis it did not start.
 */
import { spawn, type ChildProcess } from 'node:child_process';
import { mkdirSync, mkdtempSync, rmSync } from 'node:fs';
import { createServer } from 'node:net';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { Cluster, Redis } from 'ioredis';
import { redisServerAvailable, RedisServerMissingError, untilReady } from './embeddedRedis.ts';

export interface RedisClusterOptions {
  /** Masters. Default 3. */
  masters?: number;
  /** The executable. Default `redis-server` from PATH. */
  command?: string;
  /** Longest wait for each node to start and for the cluster to agree. Default 60 000 ms. */
  startTimeoutMs?: number;
}

export interface ClusterNode {
  readonly port: number;
  /** First and last hash slot this master serves. */
  readonly slots: readonly [number, number];
  /** A plain (non-cluster) client of this node alone, closed by dispose(): for per-shard counts. */
  client(): Redis;
}

export interface RedisCluster {
  readonly nodes: readonly ClusterNode[];
  /** `host:port,host:port,…`: the value of REDIS_CLUSTER_NODES. */
  readonly seeds: string;
  readonly dir: string;
  /** A cluster client, closed by dispose(). */
  client(): Cluster;
  /** Keys stored on each master, in the order of `nodes` (DBSIZE of each). */
  keysPerShard(): Promise<number[]>;
  /** Kills every node and removes the directory. */
  dispose(): Promise<void>;
}

const SLOTS = 16384;

/** A port p on 127.0.0.1 that is free and whose bus port p + 10 000 is free too. */
async function free(port: number): Promise<boolean> {
  return new Promise((resolve) => {
    const srv = createServer();
    srv.unref();
    srv.once('error', () => resolve(false));
    srv.listen(port, '127.0.0.1', () => srv.close(() => resolve(true)));
  });
}

export async function freeClusterPort(taken: ReadonlySet<number> = new Set()): Promise<number> {
  for (let attempt = 0; attempt < 200; attempt++) {
    // Bus ports must stay below 65 536.
    const port = 20_000 + Math.floor(Math.random() * 35_000);
    if (taken.has(port) || taken.has(port + 10_000) || taken.has(port - 10_000)) continue;
    if ((await free(port)) && (await free(port + 10_000))) return port;
  }
  throw new Error('no free port pair (port and port + 10000) found for a cluster node');
}

async function startNode(command: string, port: number, dir: string, timeoutMs: number): Promise<ChildProcess> {
  mkdirSync(dir, { recursive: true });
  const args = [
    '--port', String(port),
    '--bind', '127.0.0.1',
    '--dir', dir,
    '--save', '',
    '--appendonly', 'no',
    '--maxmemory-policy', 'noeviction',
    '--cluster-enabled', 'yes',
    '--cluster-config-file', join(dir, 'nodes.conf'),
    '--cluster-node-timeout', '5000',
  ];
  const proc = spawn(command, args, { stdio: ['ignore', 'pipe', 'pipe'] });
  await untilReady(proc, timeoutMs, `cluster node on port ${port}`);
  return proc;
}

async function kill(proc: ChildProcess): Promise<void> {
  if (proc.exitCode !== null || proc.signalCode !== null) return;
  await new Promise<void>((resolve) => {
    proc.once('exit', () => resolve());
    proc.kill('SIGKILL');
  });
}

export async function startRedisCluster(options: RedisClusterOptions = {}): Promise<RedisCluster> {
  const command = options.command ?? 'redis-server';
  if (!redisServerAvailable(command)) throw new RedisServerMissingError();
  const masters = options.masters ?? 3;
  const timeoutMs = options.startTimeoutMs ?? 60_000;
  const dir = mkdtempSync(join(tmpdir(), 'wearshift-cluster-'));
  const procs: ChildProcess[] = [];
  const clients: Array<Redis | Cluster> = [];
  const plain = (port: number) => {
    const c = new Redis(port, '127.0.0.1', { maxRetriesPerRequest: 3, lazyConnect: false });
    c.on('error', () => {});
    clients.push(c);
    return c;
  };
  const dispose = async () => {
    for (const c of clients) c.disconnect();
    await Promise.all(procs.map(kill));
    rmSync(dir, { recursive: true, force: true });
  };

  try {
    const ports: number[] = [];
    const taken = new Set<number>();
    for (let i = 0; i < masters; i++) {
      const port = await freeClusterPort(taken);
      taken.add(port);
      ports.push(port);
      procs.push(await startNode(command, port, join(dir, String(port)), timeoutMs));
    }
    const admin = ports.map((p) => plain(p));
    // Contiguous slot ranges of (almost) equal size, as `redis-cli --cluster create` assigns them.
    const ranges = ports.map((_, i) => [Math.floor((i * SLOTS) / masters), Math.floor(((i + 1) * SLOTS) / masters) - 1] as const);
    await Promise.all(admin.map((c, i) => c.call('CLUSTER', 'ADDSLOTSRANGE', String(ranges[i]![0]), String(ranges[i]![1]))));
    // Distinct config epochs, so that the nodes need not settle collisions before they agree.
    await Promise.all(admin.map((c, i) => c.call('CLUSTER', 'SET-CONFIG-EPOCH', String(i + 1))));
    for (const p of ports.slice(1)) await admin[0]!.call('CLUSTER', 'MEET', '127.0.0.1', String(p));

    const deadline = Date.now() + timeoutMs;
    for (;;) {
      const states = await Promise.all(
        admin.map(async (c) => {
          const info = String(await c.call('CLUSTER', 'INFO'));
          return /cluster_state:ok/.test(info) && new RegExp(`cluster_known_nodes:${masters}\\b`).test(info) && /cluster_slots_ok:16384/.test(info);
        }),
      );
      if (states.every(Boolean)) break;
      if (Date.now() > deadline) throw new Error(`the cluster did not reach cluster_state:ok within ${timeoutMs} ms`);
      await new Promise((r) => setTimeout(r, 100));
    }

    const nodes: ClusterNode[] = ports.map((port, i) => ({ port, slots: ranges[i]!, client: () => plain(port) }));
    return {
      nodes,
      seeds: ports.map((p) => `127.0.0.1:${p}`).join(','),
      dir,
      client() {
        const c = new Cluster(
          ports.map((port) => ({ host: '127.0.0.1', port })),
          { redisOptions: { maxRetriesPerRequest: null } },
        );
        c.on('error', () => {});
        clients.push(c);
        return c;
      },
      async keysPerShard() {
        return Promise.all(admin.map(async (c) => Number(await c.dbsize())));
      },
      dispose,
    };
  } catch (e) {
    await dispose();
    throw e;
  }
}
