/**
 * Two `wearshift worker` processes (arrival order is their default) judge an import of an invented fleet while it arrives; one is
 * killed with SIGKILL a third of the way in and another started in its place. The dead worker's jobs come back only
 * when their locks run out (30 s), after the surviving worker has judged later results of the same months; arrival
 * order makes it wait for them. The incidents at the end are exactly those of `wearshift replay --json` on the same
 * file, none was opened and then withdrawn, and every result is stored once.
 */
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { parseConfig } from '../../src/domain/configFile.ts';
import { incidentRules } from '../../src/incidents/policy.ts';
import { openQueue, QUEUE_NAMES, resolveQueueSettings } from '../../src/queue/queues.ts';
import { RedisIncidents } from '../../src/redis/redisIncidents.ts';
import { RedisStore } from '../../src/redis/redisStore.ts';
import { runCli } from '../helpers/cli.ts';
import { storedVerdictRows } from '../helpers/incidentVerdict.ts';
import { populationConfig, populationFleetReplayed, POPULATION_FLEET_RESULTS } from '../helpers/populationFleet.ts';
import { startWearshift, stopAll, waitFor } from '../helpers/processes.ts';
import { drained } from '../helpers/queueDrain.ts';
import { startRedisServer, type RedisServer } from '../helpers/redisServer.ts';

const RESULTS = POPULATION_FLEET_RESULTS;

let server: RedisServer;
let dir: string;
beforeAll(async () => {
  server = await startRedisServer();
  dir = mkdtempSync(join(tmpdir(), 'wearshift-arrival-kill-'));
});
afterAll(async () => {
  await stopAll();
  await server?.dispose();
  if (dir) rmSync(dir, { recursive: true, force: true });
});

describe('arrival order across worker processes, one killed mid-import', () => {
  it('ends with the incidents of replay, none withdrawn, every result stored once', async () => {
    const { file, verdicts } = await populationFleetReplayed(dir, server.url);

    const prefix = '{arrivalkill}';
    const configFile = join(dir, 'config.yaml');
    writeFileSync(configFile, populationConfig(prefix));
    const env = { REDIS_URL: server.url, LOG_LEVEL: 'info' };
    // Arrival order is the default.
    const args = ['--config', configFile, '--results-at-once', '50'];
    const redis = server.client();
    const settings = resolveQueueSettings({ prefix });
    const results = openQueue(QUEUE_NAMES.results, redis, settings);
    const evaluate = openQueue(QUEUE_NAMES.evaluate, redis, settings);
    const storage = new RedisStore(redis, { prefix, config: parseConfig(populationConfig(prefix)) });
    const stored = async () => (await storage.components()).reduce((n, c) => n + c.samples, 0);
    try {
      const [first, second] = await Promise.all([0, 1].map(() => startWearshift('worker', { env, args, readyTimeoutMs: 180_000 })));
      const importing = runCli(['import', file, '--config', configFile], env, 300_000);
      await waitFor('a third of the results stored', async () => (await stored()) >= RESULTS / 3, 180_000, 10);
      await first!.crash();
      const replacement = await startWearshift('worker', { env, args, readyTimeoutMs: 180_000 });
      expect((await importing).code).toBe(0);
      // The dead worker's jobs come back when their locks run out (30 s) and a stall check finds them.
      await drained([results, evaluate], 600_000);
      expect(await results.getFailedCount()).toBe(0);
      expect(await evaluate.getFailedCount()).toBe(0);
      expect(await stored()).toBe(RESULTS);

      const store = new RedisIncidents(redis, { rules: incidentRules(parseConfig(populationConfig(prefix))), prefix });
      const incidents = await storedVerdictRows(store);
      // What the batches said of earlier results they waited for: taken outside the slots, or not waited for any longer.
      const warnings = [second!, replacement].flatMap((w) => w.output().split('\n').filter((l) => l.includes('"level":40') || l.includes('outside the worker slots')));
      console.info(`killed worker: ${incidents.length} incidents, withdrawn ${incidents.filter((i) => i.closed === 'withdrawn').length}; replay ${verdicts.length}\n${warnings.join('\n')}`);
      expect(incidents.filter((i) => i.closed === 'withdrawn')).toEqual([]);
      expect(incidents).toEqual(verdicts);
      for (const w of [second!, replacement]) expect(await w.stop()).toBe(0);
    } finally {
      await Promise.all([results.close(), evaluate.close()]);
    }
  }, 900_000);
});
