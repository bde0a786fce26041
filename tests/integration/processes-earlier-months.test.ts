/**
 * Two worker processes sharing a feed that spans many sampling months (an import in sampling order, one job per result)
 * open exactly the incidents `wearshift replay` gives on the same file: none is opened and then withdrawn. A batch of
 * one process does not judge a month while results of earlier months of other units of the group, stored by the other
 * process, are not yet judged (the group's statistics as of that month would still lack them): it waits for them
 * (src/queue/earlierMonths.ts).
 */
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { parseConfig } from '../../src/domain/configFile.ts';
import { incidentRules } from '../../src/incidents/policy.ts';
import { describeState } from '../../src/incidents/model.ts';
import { openQueue, QUEUE_NAMES, resolveQueueSettings } from '../../src/queue/queues.ts';
import { RedisIncidents } from '../../src/redis/redisIncidents.ts';
import { runCli } from '../helpers/cli.ts';
import { fleetCsv, inventedFleet } from '../helpers/fleetCsv.ts';
import { startWearshift, stopAll, type WearshiftProcess } from '../helpers/processes.ts';
import { drained } from '../helpers/queueDrain.ts';
import { startRedisServer, type RedisServer } from '../helpers/redisServer.ts';

const PREFIX = '{months}';
// One group whose population limits open incidents and are within reach early (12 results per band): the group's
// statistics as of each month decide incidents, so a month judged before the other process's earlier months are would
// judge differently. Without the wait (`--earlier-months-wait 0`) this opened and later withdrew 1 to 22 incidents.
const CONFIG = `
redis: { prefix: "${PREFIX}" }
detection:
  measurands: [Fe, Cu]
  runningInHours: 0
  baselineIntervals: 6
population: { minResults: 12, bandHours: [0, 500], opensIncidents: true, peers: { minComponents: 3 } }
backfill: { quietAfterDays: 100000 }
groups:
  - name: lift-gearboxes
    match: { component: gearbox, unit: "^LS" }
    sumpLitres: 40
    limits: { Fe: { caution: 45, alarm: 70 }, Si: { caution: 15, alarm: 25 } }
`;
const UNITS = 50;
const SAMPLES = 40;

let server: RedisServer;
let dir: string;
beforeAll(async () => {
  server = await startRedisServer();
  dir = mkdtempSync(join(tmpdir(), 'wearshift-months-'));
});
afterAll(async () => {
  await stopAll();
  await server?.dispose();
  if (dir) rmSync(dir, { recursive: true, force: true });
});

interface VerdictLine {
  type: 'verdict';
  incidentId: string;
  state: string;
  peakSeverity: string;
  openedAt: string;
  lastSampledAt: string;
  closed: string | null;
}

describe('two worker processes on a feed spanning many months', () => {
  it('open the incidents of replay and none that is withdrawn later', async () => {
    const file = join(dir, 'fleet.csv');
    const configFile = join(dir, 'config.yaml');
    const fleet = inventedFleet({ units: UNITS, samplesPerUnit: SAMPLES, seed: 31 });
    writeFileSync(file, fleetCsv(fleet));
    writeFileSync(configFile, CONFIG);
    const env = { REDIS_URL: server.url, LOG_LEVEL: 'warn' };
    const redis = server.client();
    const settings = resolveQueueSettings({ prefix: PREFIX });
    const queues = [QUEUE_NAMES.results, QUEUE_NAMES.evaluate].map((n) => openQueue(n, redis, settings));
    const workers: WearshiftProcess[] = [];
    try {
      // A few tens of results at a time each, so that both processes hold results of neighbouring months at once.
      workers.push(...(await Promise.all([0, 1].map(() => startWearshift('worker', { env, args: ['--config', configFile, '--results-at-once', '50'], readyTimeoutMs: 120_000 })))));
      const deadline = Date.now() + 60_000;
      while ((await queues[0]!.getWorkersCount()) < 2) {
        if (Date.now() > deadline) throw new Error('the workers did not both come up');
        await new Promise((r) => setTimeout(r, 200));
      }
      const imported = await runCli(['import', file, '--config', configFile], env, 300_000);
      expect(imported.code).toBe(0);
      await drained(queues, 600_000);
      expect((await Promise.all(queues.map((q) => q.getFailedCount()))).every((n) => n === 0)).toBe(true);
      const completed = await queues[0]!.getCompleted(0, 10_000);
      expect(new Set(completed.map((j) => j.processedBy)).size).toBe(2);

      const config = parseConfig(CONFIG);
      const store = new RedisIncidents(redis, { rules: incidentRules(config), prefix: PREFIX });
      const live = [];
      for (const summary of await store.list({ state: 'all', limit: 1000 })) {
        const i = (await store.get(summary.id))!;
        // Every incident, withdrawn ones too: none may have been opened on statistics that lacked earlier months.
        live.push({ incidentId: i.id, state: describeState(i), peakSeverity: i.peakSeverity, openedAt: i.openedAt, lastSampledAt: i.lastSampledAt, closed: i.closed?.how ?? null });
      }
      live.sort((a, b) => (a.incidentId < b.incidentId ? -1 : 1));
      const replayed = await runCli(['replay', file, '--config', configFile, '--json'], env, 300_000);
      expect(replayed.code).toBe(0);
      const verdicts = replayed.stdout
        .trim()
        .split('\n')
        .map((l) => JSON.parse(l) as { type: string })
        .filter((l): l is VerdictLine => l.type === 'verdict')
        .map(({ incidentId, state, peakSeverity, openedAt, lastSampledAt, closed }) => ({ incidentId, state, peakSeverity, openedAt, lastSampledAt, closed }))
        .sort((a, b) => (a.incidentId < b.incidentId ? -1 : 1));
      expect(live.length).toBeGreaterThan(2);
      expect(live.filter((i) => i.closed === 'withdrawn')).toEqual([]);
      expect(live).toEqual(verdicts);
    } finally {
      await Promise.all(queues.map((q) => q.close()));
      for (const w of workers) expect(await w.stop()).toBe(0);
    }
  }, 900_000);
});
