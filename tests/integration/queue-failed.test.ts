/** `wearshift failed list|retry` against jobs that really failed in a worker. */
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { parseConfig } from '../../src/domain/configFile.ts';
import { formatTime } from '../../src/notify/format.ts';
import { openQueue, QUEUE_NAMES, resolveQueueSettings } from '../../src/queue/queues.ts';
import { startWorkers } from '../../src/queue/workers.ts';
import { silentLogger } from '../../src/telemetry/logger.ts';
import { runCli } from '../helpers/cli.ts';
import { drained } from '../helpers/queueDrain.ts';
import { startRedisServer, type RedisServer } from '../helpers/redisServer.ts';

const prefix = '{failed}';
let server: RedisServer;
let dir: string;
let configFile: string;

beforeAll(async () => {
  server = await startRedisServer();
  dir = mkdtempSync(join(tmpdir(), 'wearshift-failed-'));
  configFile = join(dir, 'config.yaml');
  writeFileSync(configFile, `redis: { prefix: "${prefix}" }\ndisplay: { timeZone: Europe/Berlin }\n`);
});
afterAll(async () => {
  await server?.dispose();
  rmSync(dir, { recursive: true, force: true });
});

describe('wearshift failed', () => {
  it('lists a job a direct producer got wrong, with field and reason, and puts it back on the queue', async () => {
    const connection = server.client();
    const settings = resolveQueueSettings({ prefix });
    const results = openQueue(QUEUE_NAMES.results, connection, settings);
    const evaluate = openQueue(QUEUE_NAMES.evaluate, connection, settings);
    const good = { sampleId: 'DP-1', unit: 'CMP2-Ferry Quay', component: 'compressor', sampledAt: '2025-11-03T07:30:00Z', readings: { Fe: 4 } };
    await results.add('result', { ...good, sampleId: 'DP-2', readings: { Fe: 4, Qq: 1 } });
    await results.add('result', good);
    const workers = startWorkers({ connection, config: parseConfig(`redis: { prefix: "${prefix}" }`), logger: silentLogger() }, { prefix });
    await drained([results, evaluate]);
    await workers.close();

    const env = { REDIS_URL: server.url };
    const listed = await runCli(['failed', 'list', '--config', configFile, '--json'], env);
    expect(listed.code).toBe(0);
    const jobs = listed.stdout.trim().split('\n').map((l) => JSON.parse(l) as { ref: string; subject: string; reason: string; attempts: number; failedAt: string });
    expect(jobs).toHaveLength(1);
    expect(jobs[0]).toMatchObject({ subject: 'DP-2', attempts: 1 });
    expect(jobs[0]!.reason).toBe('invalid result (sampleId DP-2): readings.Qq: unknown measurand (see the measurand catalogue in the README)');

    const table = await runCli(['failed', 'list', '--config', configFile], env);
    expect(table.stdout).toMatch(new RegExp(`${jobs[0]!.ref.replace(/[{}]/g, '\\$&')}\\s+DP-2 .*readings\\.Qq: unknown measurand`));
    // When it failed, in the configured site zone with its offset, and the zone said once.
    const failedAt = formatTime(jobs[0]!.failedAt, 'Europe/Berlin');
    expect(failedAt).toMatch(/T\d\d:\d\d\+0[12]:00$/);
    expect(table.stdout).toContain(`DP-2  ${failedAt}`);
    expect(table.stdout).toContain('Times are ISO 8601 in the site zone Europe/Berlin, offset written with each time.');

    // Contradictions are refused (exit 2) and retry nothing: a named job with --all, --queue without --all.
    const both = await runCli(['failed', 'retry', jobs[0]!.ref, '--all', '--config', configFile], env);
    expect(both.code).toBe(2);
    expect(both.stderr).toContain(`wearshift: name a job or give --all, not both: --all retries every failed job, not only ${jobs[0]!.ref}`);
    for (const args of [[jobs[0]!.ref, '--queue', 'results'], ['--queue', 'results']]) {
      const queueAlone = await runCli(['failed', 'retry', ...args, '--config', configFile], env);
      expect(queueAlone.code).toBe(2);
      expect(queueAlone.stderr).toMatch(/wearshift: --queue goes with --all/);
    }
    expect(await (await results.getJob(jobs[0]!.ref.split('/')[1]!))!.getState()).toBe('failed');

    const retried = await runCli(['failed', 'retry', jobs[0]!.ref, '--config', configFile], env);
    expect(retried.code).toBe(0);
    expect(retried.stdout).toBe(`${jobs[0]!.ref} back on the queue\n`);
    expect(await (await results.getJob(jobs[0]!.ref.split('/')[1]!))!.getState()).toBe('waiting');

    const missing = await runCli(['failed', 'retry', 'results/9999', '--config', configFile], env);
    expect(missing.code).toBe(2);
    expect(missing.stderr).toMatch(/results\/9999: no such failed job/);
    await results.close();
    await evaluate.close();
  });
});
