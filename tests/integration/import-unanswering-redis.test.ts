/**
 * `wearshift import` against a Redis that accepts the connection but never answers (stopped with SIGSTOP: the
 * kernel still completes the TCP handshake): the command ends with a usage error naming Redis and the way to validate
 * without it, instead of waiting for ever. The bound is the command line's own (10 s to the first answer); the test
 * waits far longer before calling it hung.
 */
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { runCli } from '../helpers/cli.ts';
import { startRedisServer, type RedisServer } from '../helpers/redisServer.ts';

let redis: RedisServer;
const dir = mkdtempSync(join(tmpdir(), 'wearshift-import-hung-'));

beforeAll(async () => {
  redis = await startRedisServer();
});
afterAll(async () => {
  await redis.dispose();
  rmSync(dir, { recursive: true, force: true });
});

describe('import when Redis does not answer', () => {
  it('ends with exit 2 and says Redis gave no answer, not waiting for ever', async () => {
    const file = join(dir, 'one.jsonl');
    writeFileSync(file, `${JSON.stringify({ sampleId: 'H1', unit: 'U1', component: 'gearbox', sampledAt: '2026-01-05T08:00:00Z', oilHours: 100, readings: { Fe: 12 } })}\n`);
    redis.pause();
    try {
      const r = await runCli(['import', file], { REDIS_URL: redis.url, WEARSHIFT_CONFIG: undefined, LOG_LEVEL: 'warn' }, 120_000);
      expect(r.code, r.stderr).toBe(2);
      expect(r.stderr).toContain(`cannot reach Redis at redis://127.0.0.1:${redis.port}`);
      expect(r.stderr).toContain('no answer within 10 s of connecting');
      expect(r.stderr).toContain('use --dry-run to validate without Redis');
    } finally {
      redis.resume();
    }
    // Nothing half-done once it answers again: the refused import enqueued nothing.
    expect(await redis.client().keys('*')).toEqual([]);
  }, 180_000);
});
