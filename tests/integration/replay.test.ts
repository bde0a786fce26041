/**
 * The same verdict everywhere: an invented fleet imported with `wearshift import` into a running `wearshift worker`
 * (a child process on a private redis-server, several evaluations at once), `wearshift replay` and `wearshift
 * backtest` on the same file give identical incidents, and identical findings. Group statistics (population limits,
 * pooled baselines, the comparison with peers) are within reach, so the verdict depends on other units' results:
 * it does so as of each sample's month, never on when a worker got to it.
 */
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { parseConfig } from '../../src/domain/configFile.ts';
import type { Finding } from '../../src/domain/finding.ts';

import { incidentRules } from '../../src/incidents/policy.ts';
import { openQueue, QUEUE_NAMES, resolveQueueSettings } from '../../src/queue/queues.ts';
import { RedisIncidents } from '../../src/redis/redisIncidents.ts';
import { RedisStore } from '../../src/redis/redisStore.ts';
import { runCli, startCli } from '../helpers/cli.ts';
import { fleetCsv, inventedFleet } from '../helpers/fleetCsv.ts';
import { replayVerdictRows, storedVerdictRows } from '../helpers/incidentVerdict.ts';
import { drained } from '../helpers/queueDrain.ts';
import { liftGearboxJudging } from '../helpers/populationFleet.ts';
import { startRedisServer, type RedisServer } from '../helpers/redisServer.ts';

const CONFIG = `
redis: { prefix: "{replay}" }${liftGearboxJudging(false)}`;

let server: RedisServer;
let dir: string;

beforeAll(async () => {
  server = await startRedisServer();
  dir = mkdtempSync(join(tmpdir(), 'wearshift-replay-'));
});
afterAll(async () => {
  await server?.dispose();
  rmSync(dir, { recursive: true, force: true });
});

const findingKey = (f: Finding) => JSON.stringify([f.unit, f.component, f.sampleId, f.measurand, f.rule, f.check ?? '', f.direction ?? '', f.severity, f.disposition, f.value, f.threshold ?? null]);

describe('the live worker, replay and backtest', () => {
  it('give identical incidents and findings on the same file (2 400 results)', async () => {
    const file = join(dir, 'fleet.csv');
    const configFile = join(dir, 'config.yaml');
    writeFileSync(file, fleetCsv(inventedFleet({ units: 40, samplesPerUnit: 60, seed: 11 })));
    writeFileSync(configFile, CONFIG);
    const env = { REDIS_URL: server.url, LOG_LEVEL: 'warn' };

    const worker = startCli(['worker', '--config', configFile], env);
    try {
      const imported = await runCli(['import', file, '--config', configFile], env, 120_000);
      expect(imported.code).toBe(0);
      const redis = server.client();
      const prefix = '{replay}';
      const settings = resolveQueueSettings({ prefix });
      const queues = [openQueue(QUEUE_NAMES.results, redis, settings), openQueue(QUEUE_NAMES.evaluate, redis, settings)];
      const t0 = Date.now();
      await drained(queues, 600_000);
      console.info(`live worker settled ${Date.now() - t0} ms after the import`);
      await Promise.all(queues.map((q) => q.close()));

      const config = parseConfig(CONFIG);
      const storage = new RedisStore(redis, { prefix, config });
      const components = await storage.components();
      expect(components).toHaveLength(40);
      expect(components.reduce((n, c) => n + c.samples, 0)).toBe(2400);
      const liveFindings = (await Promise.all(components.map((c) => storage.findings(c)))).flat().flatMap((s) => s.findings);
      const store = new RedisIncidents(redis, { rules: incidentRules(config), prefix });
      const live = await storedVerdictRows(store, { withoutWithdrawn: true });

      const replayed = await runCli(['replay', file, '--config', configFile, '--json'], env, 300_000);
      expect(replayed.code).toBe(0);
      const lines = replayed.stdout.trim().split('\n').map((l) => JSON.parse(l) as { type: string } & Record<string, unknown>);
      // A message the annunciation sent is an incident line like the others, its event type beside it.
      const notified = lines.filter((l) => l.change === 'notified');
      expect(notified.length).toBeGreaterThan(0);
      for (const l of notified) expect(l).toMatchObject({ type: 'incident', event: expect.stringMatching(/^wearshift\.incident\.[a-z]+$/) });
      const verdicts = replayVerdictRows(replayed.stdout);
      expect(live.length).toBeGreaterThan(3);
      expect(verdicts).toEqual(live);

      // The findings as the verdict stands: the findings log live, and replay's finding lines (each sample's last
      // judgement, each finding once).
      const replayFindings = new Map<string, Finding[]>();
      for (const l of lines.filter((x) => x.type === 'finding') as unknown as Finding[]) replayFindings.set(`${l.unit}/${l.component}/${l.sampleId}`, []);
      for (const l of lines.filter((x) => x.type === 'finding') as unknown as Finding[]) replayFindings.get(`${l.unit}/${l.component}/${l.sampleId}`)!.push(l);
      expect(new Set(liveFindings.map((f) => f.rule))).toEqual(new Set(['limit', 'ewma', 'cusum', 'population', 'sampling'].filter((r) => liveFindings.some((f) => f.rule === r))));
      expect(liveFindings.map(findingKey).sort()).toEqual([...replayFindings.values()].flat().map(findingKey).sort());

      const backtest = await runCli(['backtest', file, '--config', configFile, '--json'], env, 300_000);
      expect(backtest.code).toBe(0);
      const summary = JSON.parse(backtest.stdout) as { runs: { episodes: { incidentId: string; state: string; peakSeverity: string; openedAt: string; lastSampledAt: string }[] }[] };
      const episodes = summary.runs[0]!.episodes.map(({ incidentId, state, peakSeverity, openedAt, lastSampledAt }) => ({ incidentId, state, peakSeverity, openedAt, lastSampledAt })).sort((a, b) => (a.incidentId < b.incidentId ? -1 : 1));
      expect(episodes).toEqual(live.map(({ closed: _c, ...rest }) => rest));
    } finally {
      expect(await worker.stop()).toBe(0);
    }
  }, 900_000);
});
