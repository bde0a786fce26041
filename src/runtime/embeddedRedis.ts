/**
 * A private redis-server for the demo and the integration tests: a free port, a temporary directory, no
 * persistence unless asked for. Nothing here ever connects to a Redis it did not start. `stop()` + `start()`
 * restarts on the same port (with `appendOnly` the data survives).
 */
import { spawn, spawnSync, type ChildProcess } from 'node:child_process';
import { mkdtempSync, rmSync } from 'node:fs';
import { createServer } from 'node:net';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { Redis } from 'ioredis';

export interface EmbeddedRedisOptions {
  /** Keep an append-only file in the temporary directory, so that a restart keeps the data. Default false. */
  appendOnly?: boolean;
  /** Extra `--name value` arguments, e.g. `['--maxmemory-policy', 'allkeys-lru']`. */
  args?: string[];
  /** The executable. Default `redis-server` from PATH. */
  command?: string;
  /** Longest wait for "Ready to accept connections". Default 10 000 ms. */
  startTimeoutMs?: number;
}

export interface EmbeddedRedis {
  readonly port: number;
  readonly url: string;
  readonly dir: string;
  /** Starts the server again on the same port (after stop()). */
  start(): Promise<void>;
  /** Stops the server (SIGTERM, waits for exit); the directory stays until dispose(). */
  stop(): Promise<void>;
  /**
   * Freezes the process (SIGSTOP): its sockets stay open but nothing is answered, as with a wedged or swapped-out
   * Redis. resume() (SIGCONT) lets it go on; stop() and dispose() resume it first.
   */
  pause(): void;
  resume(): void;
  /** A client of this server (no retry limit, errors swallowed: the caller watches the commands), closed by dispose(). */
  client(): Redis;
  /** Closes the clients, stops the server and removes its directory. */
  dispose(): Promise<void>;
}

/** Where none is installed, what to do about it, in one line. */
export const NO_REDIS_SERVER_HINT =
  'no redis-server found on PATH: install one (Debian/Ubuntu: apt-get install redis-server), or run `docker compose up redis` and set REDIS_URL=redis://localhost:6379, or point REDIS_URL at a Redis of your own';

export class RedisServerMissingError extends Error {
  override readonly name = 'RedisServerMissingError';
  constructor() {
    super(NO_REDIS_SERVER_HINT);
  }
}

/** True when `command` can be run (it answers `--version`). */
export function redisServerAvailable(command = 'redis-server'): boolean {
  const probe = spawnSync(command, ['--version'], { stdio: 'ignore' });
  return probe.error === undefined && probe.status === 0;
}

export async function freePort(): Promise<number> {
  return new Promise((resolve, reject) => {
    const srv = createServer();
    srv.unref();
    srv.on('error', reject);
    srv.listen(0, '127.0.0.1', () => {
      const address = srv.address();
      const port = typeof address === 'object' && address !== null ? address.port : 0;
      srv.close(() => resolve(port));
    });
  });
}

/** Throws RedisServerMissingError when the executable cannot be found. */
export async function startEmbeddedRedis(options: EmbeddedRedisOptions = {}): Promise<EmbeddedRedis> {
  const command = options.command ?? 'redis-server';
  if (!redisServerAvailable(command)) throw new RedisServerMissingError();
  const dir = mkdtempSync(join(tmpdir(), 'wearshift-redis-'));
  const port = await freePort();
  const startTimeoutMs = options.startTimeoutMs ?? 10_000;
  let child: ChildProcess | undefined;
  let paused = false;

  const start = async () => {
    const args = [
      '--port', String(port),
      '--bind', '127.0.0.1',
      '--dir', dir,
      '--save', '',
      '--appendonly', options.appendOnly ? 'yes' : 'no',
      // Queues must never lose jobs to eviction.
      '--maxmemory-policy', 'noeviction',
      ...(options.args ?? []),
    ];
    const proc = spawn(command, args, { stdio: ['ignore', 'pipe', 'pipe'] });
    child = proc;
    await untilReady(proc, startTimeoutMs, `redis-server on port ${port}`);
  };

  const running = () => (child !== undefined && child.exitCode === null && child.signalCode === null ? child : undefined);
  const resume = () => {
    if (!paused) return;
    paused = false;
    running()?.kill('SIGCONT');
  };

  const stop = async () => {
    // A stopped process would hold SIGTERM until continued.
    resume();
    const proc = running();
    child = undefined;
    if (proc === undefined) return;
    await new Promise<void>((resolve) => {
      proc.once('exit', () => resolve());
      proc.kill('SIGTERM');
    });
  };

  try {
    await start();
  } catch (e) {
    await stop();
    rmSync(dir, { recursive: true, force: true });
    throw e;
  }
  const clients: Redis[] = [];
  return {
    port,
    url: `redis://127.0.0.1:${port}`,
    dir,
    start,
    stop,
    pause() {
      const proc = running();
      if (proc === undefined) throw new Error(`redis-server on port ${port} is not running`);
      proc.kill('SIGSTOP');
      paused = true;
    },
    resume,
    client() {
      const c = new Redis(port, '127.0.0.1', { maxRetriesPerRequest: null, lazyConnect: false });
      c.on('error', () => {});
      clients.push(c);
      return c;
    },
    async dispose() {
      for (const c of clients) c.disconnect();
      await stop();
      rmSync(dir, { recursive: true, force: true });
    },
  };
}

/**
 * Resolves once a spawned redis-server says it accepts connections; rejects with its output when it exits first or
 * does not get there within `timeoutMs` (then it is killed).
 */
export function untilReady(proc: ChildProcess, timeoutMs: number, what: string): Promise<void> {
  let output = '';
  return new Promise<void>((resolve, reject) => {
    const timer = setTimeout(() => {
      proc.kill('SIGKILL');
      reject(new Error(`${what} did not start:\n${output}`));
    }, timeoutMs);
    const onData = (d: Buffer) => {
      output += d.toString();
      if (output.includes('Ready to accept connections')) {
        clearTimeout(timer);
        resolve();
      }
    };
    proc.stdout!.on('data', onData);
    proc.stderr!.on('data', onData);
    proc.once('error', (e) => {
      clearTimeout(timer);
      reject(e);
    });
    proc.once('exit', (code) => {
      clearTimeout(timer);
      reject(new Error(`${what} exited with ${code}:\n${output}`));
    });
  });
}
