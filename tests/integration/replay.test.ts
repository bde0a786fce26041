/**
 * `wearshift replay` against the live worker: an invented fleet imported with `wearshift import` into a
 * running `wearshift worker` (child processes on a private redis-server) must give the findings and
 * incidents that `wearshift replay` prints for the same file.
 *
 * The groups hold two components each and the population limits need more results than the fleet has:
 * group baselines and population limits are read when a component is evaluated, and a live worker that
 * collapses a burst evaluates later than replay, with more group data (see the README on replay).
 */
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { parseConfig } from '../../src/domain/configFile.ts';
import type { Finding } from '../../src/domain/finding.ts';
import { incidentRules } from '../../src/incidents/policy.ts';
import { RedisIncidentStore } from '../../src/incidents/redisIncidentStore.ts';
import { openQueue, QUEUE_NAMES, resolveQueueSettings } from '../../src/queue/queues.ts';
import type { IncidentLine, TimelineLine } from '../../src/queue/replayHistory.ts';
import { RedisStorage } from '../../src/storage/redisStorage.ts';
import { runCli, startCli } from '../helpers/cli.ts';
import { fleetCsv, inventedFleet } from '../helpers/fleetCsv.ts';
import { drained } from '../helpers/queueDrain.ts';
import { startRedisServer, type RedisServer } from '../helpers/redisServer.ts';

const CONFIG = `
redis: { prefix: "{replay}" }
detection:
  measurands: [Fe, Cu]
  runningInHours: 0
  baselineIntervals: 6
population: { minResults: 500 }
groups:
  - name: lift-gearboxes-north
    match: { component: gearbox, unit: "^LS[12]-" }
    sumpLitres: 40
    limits: { Fe: { caution: 45, alarm: 70 }, Si: { caution: 15, alarm: 25 } }
  - name: lift-gearboxes-south
    match: { component: gearbox, unit: "^LS[34]-" }
    sumpLitres: 40
    limits: { Fe: { caution: 45, alarm: 70 }, Si: { caution: 15, alarm: 25 } }
`;

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

const findingKey = (f: Finding) => JSON.stringify([f.unit, f.component, f.sampleId, f.measurand, f.rule, f.direction ?? '', f.severity, f.value, f.threshold ?? null]);

/** The timeline entry a replay line carries. */
function entryOf(line: IncidentLine): Record<string, unknown> {
  const { type: _type, incidentId: _id, unit: _unit, component: _component, incidentState: _state, incidentSeverity: _severity, ...entry } = line;
  return entry;
}

describe('replay and the live worker', () => {
  it('give the same findings and incidents on the same file', async () => {
    const file = join(dir, 'fleet.csv');
    const configFile = join(dir, 'config.yaml');
    writeFileSync(file, fleetCsv(inventedFleet({ units: 4, samplesPerUnit: 24 })));
    writeFileSync(configFile, CONFIG);
    const env = { REDIS_URL: server.url, LOG_LEVEL: 'warn' };

    const worker = startCli(['worker', '--config', configFile], env);
    try {
      const imported = await runCli(['import', file, '--config', configFile], env);
      expect(imported.code).toBe(0);
      const redis = server.client();
      const prefix = '{replay}';
      const settings = resolveQueueSettings({ prefix });
      const queues = [openQueue(QUEUE_NAMES.results, redis, settings), openQueue(QUEUE_NAMES.evaluate, redis, settings)];
      await drained(queues, 90_000);
      await Promise.all(queues.map((q) => q.close()));

      const storage = new RedisStorage(redis, { prefix });
      const components = await storage.components();
      expect(components).toHaveLength(4);
      const liveFindings = (await Promise.all(components.map((c) => storage.findings(c)))).flat().flatMap((s) => s.findings);

      const replayed = await runCli(['replay', file, '--config', configFile, '--json'], env);
      expect(replayed.code).toBe(0);
      const lines = replayed.stdout.trim().split('\n').map((l) => JSON.parse(l) as TimelineLine);
      const replayFindings = lines.filter((l) => l.type === 'finding') as Finding[];

      expect(liveFindings.length).toBeGreaterThan(10);
      expect(new Set(liveFindings.map((f) => f.rule))).toEqual(new Set(['limit', 'ewma', 'cusum']));
      expect(replayFindings.map(findingKey).sort()).toEqual(liveFindings.map(findingKey).sort());

      const store = new RedisIncidentStore(redis, { rules: incidentRules(parseConfig(CONFIG)), prefix });
      const incidentLines = lines.filter((l): l is IncidentLine => l.type === 'incident');
      const replayIds = [...new Set(incidentLines.map((l) => l.incidentId))].sort();
      const liveIds = (await store.list({ state: 'all', limit: 1000 })).map((i) => i.id).sort();
      expect(replayIds.length).toBeGreaterThan(1);
      expect(replayIds).toEqual(liveIds);
      // Every timeline entry of every incident, in order.
      for (const id of replayIds) {
        const live = (await store.get(id))!;
        const fromReplay = incidentLines.filter((l) => l.incidentId === id).map((l) => entryOf(l));
        expect(fromReplay).toEqual(live.timeline.map(({ kind, ...rest }) => ({ ...rest, ...('change' in rest && { findingChange: rest.change }), change: kind })));
      }
    } finally {
      expect(await worker.stop()).toBe(0);
    }
  });
});
