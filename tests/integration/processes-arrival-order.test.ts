/**
 * Two `wearshift worker` processes that find a burst already waiting: an invented fleet's file, in sampling order and
 * spanning many sampling months, is imported with `wearshift import` (one job per result) before any worker runs, the
 * results queue held (paused) until both processes are taking jobs, and then both take the burst at once, 50 results
 * each at a time. The group's population limits open incidents, so a month judged on group statistics that still lack
 * another process's earlier results would open an incident that replay never opens, withdrawn
 * (`closed.how === 'withdrawn'`) once those results are judged. The processes judge the results in the order they
 * arrived, across processes: in each of three rounds (a fresh pair of processes on a fresh prefix) no incident is
 * opened and later withdrawn, the incidents are exactly those of `wearshift replay --json` on the same file, and both
 * processes stored part of the burst. The same holds with the keys and queues in four partitions, where the results of
 * one sampling month lie on four queues: the processes judge them in the order they arrived across the partitions'
 * queues (the producer numbers them across partitions).
 */
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { parseConfig } from '../../src/domain/configFile.ts';
import { incidentRules } from '../../src/incidents/policy.ts';
import { openPartitionedQueues, QUEUE_NAMES, resolveQueueSettings } from '../../src/queue/queues.ts';
import { Partitions } from '../../src/redis/keys.ts';
import { RedisIncidents } from '../../src/redis/redisIncidents.ts';
import { runCli } from '../helpers/cli.ts';
import { startWearshift, stopAll, waitFor, type WearshiftProcess } from '../helpers/processes.ts';
import { drained } from '../helpers/queueDrain.ts';
import { storedVerdictRows } from '../helpers/incidentVerdict.ts';
import { populationConfig, populationFleetReplayed, POPULATION_FLEET_RESULTS, twoGroupFleetReplayed, TWO_GROUP_FLEET_RESULTS } from '../helpers/populationFleet.ts';
import { startRedisServer, type RedisServer } from '../helpers/redisServer.ts';

// The fleet's ten units are sampled about every 250 h: some 30 results a month, so 50 results at a time reach into
// the next month.
// Which process takes which results varies from run to run; every round is a fresh pair of processes on a fresh prefix.
const ROUNDS = 3;

let server: RedisServer;
let dir: string;
beforeAll(async () => {
  server = await startRedisServer();
  dir = mkdtempSync(join(tmpdir(), 'wearshift-arrival-'));
});
afterAll(async () => {
  await stopAll();
  await server?.dispose();
  if (dir) rmSync(dir, { recursive: true, force: true });
});

/** A counter of a worker process's /metrics (0 when not shown). */
async function counted(worker: WearshiftProcess, series: string): Promise<number> {
  const text = await (await fetch(`${worker.url}/metrics`)).text();
  const line = text.split('\n').find((l) => l.startsWith(`${series} `));
  return line === undefined ? 0 : Number(line.split(' ').pop());
}

/** Results a worker process stored, new ones only (a redelivered result counts as a duplicate). */
const storedBy = (worker: WearshiftProcess) => counted(worker, 'wearshift_results_stored_total{status="new"}');

/** One round: the burst imported with no worker running, then taken by two fresh worker processes. */
async function round(n: number, file: string, partitionCount: number, results = POPULATION_FLEET_RESULTS, name = 'one') {
  const prefix = `{arrival${name}${partitionCount}-${n}}`;
  const configFile = join(dir, `config-${name}-${partitionCount}-${n}.yaml`);
  writeFileSync(configFile, populationConfig(prefix, partitionCount));
  // /metrics without a token: each process's count of results stored says it took part.
  const env = { REDIS_URL: server.url, LOG_LEVEL: 'warn', WEARSHIFT_METRICS_PUBLIC: '1' };
  const redis = server.client();
  const settings = resolveQueueSettings({ prefix });
  const partitions = new Partitions(prefix, partitionCount);
  const queues = openPartitionedQueues(QUEUE_NAMES.results, redis, settings, partitions);
  const evaluate = openPartitionedQueues(QUEUE_NAMES.evaluate, redis, settings, partitions);
  const workers: WearshiftProcess[] = [];
  try {
    // The burst waits on the queue, held (paused) until both processes take jobs: neither starts on it alone,
    // whichever comes up first.
    await Promise.all(queues.map((q) => q.pause()));
    const imported = await runCli(['import', file, '--config', configFile], env, 300_000);
    expect(imported.code).toBe(0);
    expect(imported.stdout).toContain(`${results} enqueued`);
    for (const q of queues) expect(await q.isPaused()).toBe(true);
    const counts = await Promise.all(queues.map((q) => q.getJobCounts('waiting', 'active', 'completed')));
    expect(counts.reduce((n, c) => n + c.waiting!, 0)).toBe(results);
    expect(counts.map((c) => c.active! + c.completed!)).toEqual(queues.map(() => 0));

    workers.push(...(await Promise.all([0, 1].map(() => startWearshift('worker', { env, args: ['--config', configFile, '--results-at-once', '50', '--arrival-order'], readyTimeoutMs: 180_000 })))));
    await waitFor('both workers taking results jobs', async () => (await Promise.all(queues.map((q) => q.getWorkersCount()))).every((w) => w === 2), 180_000, 200);
    await Promise.all(queues.map((q) => q.resume()));
    await drained([...queues, ...evaluate], 600_000);
    for (const q of [...queues, ...evaluate]) expect(await q.getFailedCount()).toBe(0);
    const stored = await Promise.all(workers.map(storedBy));
    // For the log: the evaluate jobs that came back later, holding off results not judged yet (arrivalLimit.ts).
    const held = (await Promise.all(workers.map((w) => counted(w, 'wearshift_evaluations_held_total')))).reduce((a, b) => a + b, 0);

    // Every incident, withdrawn ones too.
    const store = new RedisIncidents(redis, { rules: incidentRules(parseConfig(populationConfig(prefix, partitionCount))), prefix, partitions: partitionCount });
    // For the log: the workers' warnings that a wait for earlier results ran out (the other way to open an incident
    // that is withdrawn later; resultBatches.ts).
    const waitsRunOut = workers.flatMap((w) => w.output().split('\n')).filter((l) => /results judged without earlier ones|not waited for any longer/.test(l)).length;
    return { stored, held, waitsRunOut, incidents: await storedVerdictRows(store) };
  } finally {
    await Promise.all([...queues, ...evaluate].map((q) => q.close()));
    for (const w of workers) expect(await w.stop()).toBe(0);
  }
}

/** The fleet's file and replay's incidents, once for both partition counts. */
let replayed: ReturnType<typeof populationFleetReplayed> | undefined;

describe('two worker processes taking a burst that spans many sampling months', () => {
  it.each([1, 4])('open only the incidents of replay, none withdrawn later, and both take part (%i partitions)', async (partitionCount) => {
    const { file, verdicts } = await (replayed ??= populationFleetReplayed(dir, server.url));

    const rounds = [];
    for (let n = 1; n <= ROUNDS; n++) rounds.push(await round(n, file, partitionCount));
    console.info(`${partitionCount} partitions, withdrawn incidents per round: ${rounds.map((r) => r.incidents.filter((i) => i.closed === 'withdrawn').length).join(', ')}; evaluate jobs held: ${rounds.map((r) => r.held).join(', ')}; waits run out: ${rounds.map((r) => r.waitsRunOut).join(', ')}`);

    // Both processes stored part of the burst in every round, every result once.
    for (const r of rounds) {
      expect(r.stored.every((n) => n > 0)).toBe(true);
      expect(r.stored[0]! + r.stored[1]!).toBe(POPULATION_FLEET_RESULTS);
    }
    // No incident opened and later withdrawn, in any round; the incidents are replay's.
    expect(rounds.map((r) => r.incidents.filter((i) => i.closed === 'withdrawn'))).toEqual(rounds.map(() => []));
    for (const r of rounds) expect(r.incidents).toEqual(verdicts);
  }, 900_000);

  it('open only the incidents of replay with two groups, one three months behind the other, each waiting only for its own', async () => {
    // A result waits only for earlier results of its own group (or component): one group's later months are judged
    // while the other process still holds the other group's earlier ones, and the verdicts are still replay's.
    const { file, verdicts } = await twoGroupFleetReplayed(dir, server.url);
    // Incidents in both groups (an incident id names its unit).
    expect(verdicts.some((v) => v.incidentId.includes('MX')) && verdicts.some((v) => v.incidentId.includes('LS'))).toBe(true);
    const rounds = [];
    for (let n = 1; n <= 2; n++) rounds.push(await round(n, file, 1, TWO_GROUP_FLEET_RESULTS, 'two'));
    console.info(`two groups, withdrawn incidents per round: ${rounds.map((r) => r.incidents.filter((i) => i.closed === 'withdrawn').length).join(', ')}`);
    for (const r of rounds) expect(r.stored[0]! + r.stored[1]!).toBe(TWO_GROUP_FLEET_RESULTS);
    expect(rounds.map((r) => r.incidents.filter((i) => i.closed === 'withdrawn'))).toEqual(rounds.map(() => []));
    for (const r of rounds) expect(r.incidents).toEqual(verdicts);
  }, 900_000);
});
