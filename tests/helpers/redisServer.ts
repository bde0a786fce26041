/**
 * A private redis-server for integration tests: a free port, a temporary directory, no persistence unless
 * asked for. Tests never touch a Redis they did not start. `stop()` + `start()` restarts on the same port
 * (with `appendonly` the data survives), for fault tests.
 */
import { spawn, type ChildProcess } from 'node:child_process';
import { mkdtempSync, rmSync } from 'node:fs';
import { createServer } from 'node:net';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { Redis } from 'ioredis';

export interface RedisServerOptions {
  /** Keep an append-only file in the temporary directory, so that a restart keeps the data. Default false. */
  appendOnly?: boolean;
  /** Extra `--name value` arguments, e.g. `['--maxmemory-policy', 'allkeys-lru']`. */
  args?: string[];
}

export interface RedisServer {
  readonly port: number;
  readonly url: string;
  readonly dir: string;
  /** Starts the server again on the same port (after stop()). */
  start(): Promise<void>;
  /** Stops the server (SIGTERM, waits for exit); the directory stays until dispose(). */
  stop(): Promise<void>;
  /** Stops the server and removes its directory. */
  dispose(): Promise<void>;
  /** A client of this server, closed by dispose(). */
  client(): Redis;
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

export async function startRedisServer(options: RedisServerOptions = {}): Promise<RedisServer> {
  const dir = mkdtempSync(join(tmpdir(), 'wearshift-redis-'));
  const port = await freePort();
  const clients: Redis[] = [];
  let child: ChildProcess | undefined;

  const start = async () => {
    const args = [
      '--port', String(port),
      '--bind', '127.0.0.1',
      '--dir', dir,
      '--save', '',
      '--appendonly', options.appendOnly ? 'yes' : 'no',
      '--maxmemory-policy', 'noeviction',
      ...(options.args ?? []),
    ];
    const proc = spawn('redis-server', args, { stdio: ['ignore', 'pipe', 'pipe'] });
    child = proc;
    let output = '';
    await new Promise<void>((resolve, reject) => {
      const timer = setTimeout(() => reject(new Error(`redis-server did not start on port ${port}:\n${output}`)), 10_000);
      const onData = (d: Buffer) => {
        output += d.toString();
        if (output.includes('Ready to accept connections')) {
          clearTimeout(timer);
          resolve();
        }
      };
      proc.stdout!.on('data', onData);
      proc.stderr!.on('data', onData);
      proc.once('exit', (code) => {
        clearTimeout(timer);
        reject(new Error(`redis-server exited with ${code}:\n${output}`));
      });
    });
  };

  const stop = async () => {
    const proc = child;
    child = undefined;
    if (proc === undefined || proc.exitCode !== null) return;
    await new Promise<void>((resolve) => {
      proc.once('exit', () => resolve());
      proc.kill('SIGTERM');
    });
  };

  await start();
  return {
    port,
    url: `redis://127.0.0.1:${port}`,
    dir,
    start,
    stop,
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
