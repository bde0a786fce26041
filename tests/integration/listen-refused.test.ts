/**
 * A port the services cannot listen on — taken by another process (here a plain TCP server) — ends `worker` and
 * `api` with exit 2 and one line naming the option, variable or configuration key that chose the port, the port and
 * what to do, instead of a stack trace; two servers given one port are refused before anything starts.
 */
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { createServer, type Server } from 'node:net';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { runCli } from '../helpers/cli.ts';
import { freePort, startRedisServer, type RedisServer } from '../helpers/redisServer.ts';

let redis: RedisServer;
let dir: string;
const blockers: Server[] = [];

beforeAll(async () => {
  redis = await startRedisServer();
  dir = mkdtempSync(join(tmpdir(), 'wearshift-listen-'));
}, 120_000);
afterAll(async () => {
  for (const b of blockers) b.close();
  await redis?.dispose();
  rmSync(dir, { recursive: true, force: true });
});

/** A free port, then taken by a plain TCP server on every interface. */
async function takenPort(): Promise<number> {
  const port = await freePort();
  const blocker = createServer();
  await new Promise<void>((resolve) => blocker.listen(port, '0.0.0.0', () => resolve()));
  blockers.push(blocker);
  return port;
}

function expectRefused(r: { code: number | null; stderr: string }, what: string): void {
  expect(r.stderr).toContain(`wearshift: ${what}: the port is in use (EADDRINUSE): another process listens on it; stop that process or choose another port\n`);
  expect(r.stderr).not.toMatch(/\n\s+at /);
  expect(r.code).toBe(2);
}

/** An OPC UA section that starts quickly on a test bench (security None, its own certificate store). */
function opcuaConfig(name: string, port?: number): string {
  const file = join(dir, `${name}.yaml`);
  writeFileSync(file, ['redis:', `  prefix: "{${name}}"`, 'opcua:', ...(port === undefined ? [] : [`  port: ${port}`]), '  securityModes: [None]', `  pkiDir: ${join(dir, `${name}-pki`)}`, '  anonymous: viewer', ''].join('\n'));
  return file;
}

// Each case starts the real command line (a Node process, through tsx after an edit); the processes end by
// themselves, so the bound only stops a hung one: no timing is measured.
describe('a port in use', { timeout: 600_000 }, () => {
  it('worker --metrics-port', async () => {
    const port = await takenPort();
    expectRefused(await runCli(['worker', '--metrics-port', String(port), '--history-threads', '0'], { REDIS_URL: redis.url, LOG_LEVEL: 'warn' }), `--metrics-port ${port}`);
  });

  it('api with the port from PORT', async () => {
    const port = await takenPort();
    expectRefused(await runCli(['api'], { REDIS_URL: redis.url, LOG_LEVEL: 'warn', PORT: String(port) }), `PORT ${port}`);
  });

  it('api --opcua-port, and opcua.port in the configuration', async () => {
    const opcua = await takenPort();
    const http = await freePort();
    expectRefused(await runCli(['api', '--port', String(http), '--opcua-port', String(opcua), '--config', opcuaConfig('flag')], { REDIS_URL: redis.url, LOG_LEVEL: 'warn' }), `--opcua-port ${opcua}`);
    expectRefused(await runCli(['api', '--port', String(http), '--config', opcuaConfig('file', opcua)], { REDIS_URL: redis.url, LOG_LEVEL: 'warn' }), `opcua.port ${opcua} in the configuration`);
  });

  it('one port for HTTP and OPC UA is refused before anything listens', async () => {
    const port = await freePort();
    const r = await runCli(['api', '--port', String(port), '--opcua-port', String(port), '--config', opcuaConfig('same')], { REDIS_URL: redis.url, LOG_LEVEL: 'warn' });
    expect(r.stderr).toContain(`wearshift: --port ${port} and --opcua-port ${port}: one port for two servers; give each its own\n`);
    expect(r.code).toBe(2);
  });
});
