/**
 * The live pipeline on a private redis-server: producer → results worker → evaluate worker. Delivery is at
 * least once and in any order; the stored state must not care.
 */
import type { Queue } from 'bullmq';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { parseConfig } from '../../src/domain/configFile.ts';
import type { ResultEvent } from '../../src/domain/event.ts';
import type { LiveEvent } from '../../src/pipeline/liveEvent.ts';
import { incidentRules } from '../../src/incidents/policy.ts';
import { createResultProducer } from '../../src/queue/producer.ts';
import { HISTORY_JOB, openQueue, QUEUE_NAMES, resolveQueueSettings } from '../../src/queue/queues.ts';
import { validateBatch } from '../../src/intake/validate.ts';
import { startWorkers, type RunningWorkers } from '../../src/queue/workers.ts';
import type { RedisConnection } from '../../src/redis/connection.ts';
import { RedisIncidents } from '../../src/redis/redisIncidents.ts';
import { RedisStore } from '../../src/redis/redisStore.ts';
import { silentLogger } from '../../src/telemetry/logger.ts';
import { FLEET_CONFIG, inventedFleet } from '../helpers/fleetCsv.ts';
import { drained } from '../helpers/queueDrain.ts';
import { startRedisServer, type RedisServer } from '../helpers/redisServer.ts';
import { verdict } from '../helpers/incidentVerdict.ts';

const config = parseConfig(FLEET_CONFIG);
let server: RedisServer;
let prefixes = 0;

beforeAll(async () => {
  server = await startRedisServer();
});
afterAll(async () => {
  await server?.dispose();
});

interface Line {
  prefix: string;
  connection: RedisConnection;
  workers: RunningWorkers;
  queues: Queue[];
  storage: RedisStore;
  incidents: RedisIncidents;
  send(events: readonly unknown[]): Promise<void>;
  /** Sends the results as history jobs of `perJob` results (`wearshift import --history`). */
  sendHistory(events: readonly unknown[], perJob: number): Promise<void>;
  history: Queue;
  close(): Promise<void>;
}

/**
 * `historyThreads`: threads that evaluate the months of history jobs (each its own connection to the same Redis);
 * `live`: hears the live events the workers publish for the boards.
 */
async function pipeline(historyThreads = 0, live?: (event: LiveEvent) => void): Promise<Line> {
  const prefix = `{q${++prefixes}}`;
  const connection = server.client();
  const workers = startWorkers({ connection, config, logger: silentLogger(), target: { kind: 'single', url: server.url }, ...(live && { live }) }, { prefix, backoffMs: 50, historyThreads });
  const settings = resolveQueueSettings({ prefix });
  const history = openQueue(QUEUE_NAMES.history, connection, settings);
  const queues = [openQueue(QUEUE_NAMES.results, connection, settings), openQueue(QUEUE_NAMES.evaluate, connection, settings), history];
  const producer = createResultProducer({ connection, prefix });
  return {
    prefix,
    connection,
    workers,
    queues,
    storage: new RedisStore(connection, { prefix, config }),
    incidents: new RedisIncidents(connection, { rules: incidentRules(config), prefix }),
    async send(events) {
      const outcomes = await producer.add(events);
      expect(outcomes.filter((o) => o.status !== 'accepted')).toEqual([]);
      await drained(queues);
    },
    async sendHistory(events, perJob) {
      const validated = validateBatch(events, { now: Date.now() });
      expect(validated.accepted).toHaveLength(events.length);
      const outcomes = await producer.enqueueHistory(validated.accepted, perJob);
      expect(outcomes.filter((o) => o.status !== 'accepted')).toEqual([]);
      await drained(queues);
    },
    history,
    async close() {
      await producer.close();
      await workers.close();
      await Promise.all(queues.map((q) => q.close()));
    },
  };
}

/** Everything the store holds that the order of arrival must not change. */
async function storedState(line: Line) {
  const components = await line.storage.components();
  const perComponent = await Promise.all(
    components.map(async (c) => ({
      entry: c,
      revisions: (await line.storage.revisions(c)).map((s) => `${s.sample.sampleId}#${s.sample.revision}`).sort(),
      findings: await line.storage.findings(c),
      // The group's statistics as the next sample would see them (other units only).
      group: await line.storage.asOf(c.group, '9999-12', c),
    })),
  );
  const incidents = (await line.incidents.list({ state: 'all', limit: 1000 })).map((i) => i.id).sort();
  const records = await Promise.all(incidents.map(async (id) => verdict((await line.incidents.get(id))!)));
  return { perComponent, incidents: records.filter((i) => i.closed?.how !== 'withdrawn') };
}

const fleet = inventedFleet({ units: 4, samplesPerUnit: 20 });

describe('live pipeline', () => {
  it('finds what the fleet holds: the iron limit of the stepped unit and the dirt entry of another', async () => {
    const line = await pipeline();
    try {
      await line.send(fleet);
      const all = (await Promise.all((await line.storage.components()).map((c) => line.storage.findings(c)))).flat().flatMap((s) => s.findings);
      expect(all.some((f) => f.unit === 'LS3-Marsh Lane' && f.measurand === 'Si' && f.rule === 'limit' && f.severity === 'alarm')).toBe(true);
      expect(all.some((f) => f.unit === 'LS2-Marsh Lane' && f.measurand === 'Fe')).toBe(true);
      expect((await line.storage.components()).map((c) => c.samples)).toEqual([20, 20, 20, 20]);
    } finally {
      await line.close();
    }
  });

  it('a duplicate delivery changes nothing', async () => {
    const line = await pipeline();
    try {
      await line.send(fleet);
      const before = await storedState(line);
      const marks = await Promise.all(before.perComponent.map(async (c) => (await line.storage.evaluationInput(c.entry))!.mark));
      await line.send(fleet);
      await line.send(fleet.slice(0, 10));
      expect(await storedState(line)).toEqual(before);
      expect(await Promise.all(before.perComponent.map(async (c) => (await line.storage.evaluationInput(c.entry))!.mark))).toEqual(marks);
    } finally {
      await line.close();
    }
  });

  it('results delivered shuffled, in small bursts, reach the findings and incidents of in-order delivery', async () => {
    const inOrder = await pipeline();
    const shuffled = await pipeline();
    try {
      await inOrder.send(fleet);
      const mixed = [...fleet].sort((a, b) => hash(a.sampleId) - hash(b.sampleId));
      for (let i = 0; i < mixed.length; i += 7) await shuffled.send(mixed.slice(i, i + 7));
      // Histories, group statistics, findings and incidents depend only on the results: late results rewound
      // their component, and the group's cascade judged the other units again.
      const a = await storedState(inOrder);
      const b = await storedState(shuffled);
      expect(a.incidents.length).toBeGreaterThan(0);
      expect(b).toEqual(a);
    } finally {
      await inOrder.close();
      await shuffled.close();
    }
  });

  it('a late result takes its place in the history; a revision replaces the readings of its sample', async () => {
    const line = await pipeline();
    try {
      const unit = 'LS1-Marsh Lane';
      const own = fleet.filter((e) => e.unit === unit);
      const late = own[6]!;
      await line.send(fleet.filter((e) => e !== late));
      const ref = { unit, component: 'gearbox' };
      expect((await line.storage.component(ref))!.samples).toBe(19);
      await line.send([late]);
      expect((await line.storage.component(ref))!.samples).toBe(20);
      // Folded again from before it: the latest checkpoint still stands after the last sample, and covers all 20.
      const input = (await line.storage.evaluationInput(ref))!;
      expect(input.latest).toMatchObject({ count: 20, position: { sampleId: own.at(-1)!.sampleId } });
      expect(input.dirtyFrom).toBeUndefined();

      // A sample well below the iron caution level of 45 ppm, so that its own limit finding is the revision's doing.
      const target = own.slice(8, 16).find((e) => Number(e.readings.Fe) < 30)!;
      const findingsAt = async (sampleId: string) => (await line.storage.findings(ref)).find((s) => s.sampleId === sampleId)?.findings ?? [];
      expect((await findingsAt(target.sampleId)).some((f) => f.rule === 'limit' && f.measurand === 'Fe')).toBe(false);
      const corrected: ResultEvent = { ...target, revision: 1, readings: { ...target.readings, Fe: 95 } };
      await line.send([corrected]);
      const revisions = (await line.storage.revisions(ref)).filter((s) => s.sample.sampleId === target.sampleId);
      expect(revisions.map((r) => r.sample.revision).sort()).toEqual([0, 1]);
      const after = await findingsAt(target.sampleId);
      // FLEET_CONFIG: Fe alarm at 70 ppm.
      expect(after.find((f) => f.rule === 'limit' && f.measurand === 'Fe')).toMatchObject({ severity: 'alarm', value: 95, threshold: 70 });
      // The original revision arriving again afterwards is history only.
      await line.send([target]);
      expect((await findingsAt(target.sampleId)).some((f) => f.rule === 'limit' && f.measurand === 'Fe')).toBe(true);
    } finally {
      await line.close();
    }
  });

  it('a burst of results for one component is judged in order, one evaluation at a time, up to its last result', async () => {
    const line = await pipeline();
    try {
      const own = fleet.filter((e) => e.unit === 'LS4-Marsh Lane');
      await line.send(own);
      const ref = { unit: 'LS4-Marsh Lane', component: 'gearbox' };
      const input = (await line.storage.evaluationInput(ref))!;
      expect(input.latest).toMatchObject({ count: own.length, position: { sampleId: own.at(-1)!.sampleId } });
      expect(input.dirtyFrom).toBeUndefined();
      // Nothing is left waiting: a result that found the component busy left at most a job that found nothing to do.
      expect(await line.queues[1]!.getFailedCount()).toBe(0);
    } finally {
      await line.close();
    }
  });

  it('a history sent as history jobs, in order or shuffled, reaches the state of one job per result', async () => {
    const heard = { single: [] as LiveEvent[], inOrder: [] as LiveEvent[] };
    const single = await pipeline(0, (e) => heard.single.push(e));
    const inOrder = await pipeline(0, (e) => heard.inOrder.push(e));
    const shuffled = await pipeline();
    try {
      await single.send(fleet);
      // Four jobs in sampling-time order; then jobs of shuffled results (each job is put in order, the jobs are not).
      const byTime = [...fleet].sort((a, b) => Date.parse(a.sampledAt) - Date.parse(b.sampledAt));
      await inOrder.sendHistory(byTime, 20);
      await shuffled.sendHistory([...fleet].sort((a, b) => hash(a.sampleId) - hash(b.sampleId)), 30);
      const expected = await storedState(single);
      expect(expected.incidents.length).toBeGreaterThan(0);
      expect(await storedState(inOrder)).toEqual(expected);
      expect(await storedState(shuffled)).toEqual(expected);
      // Completed history jobs are removed (their data is the whole batch); none failed.
      expect(await inOrder.history.getJobCounts('completed', 'failed')).toEqual({ completed: 0, failed: 0 });
      // The boards hear of every live result, but of a history job's results once per component (its latest).
      const results = (events: LiveEvent[]) => events.filter((e): e is Extract<LiveEvent, { type: 'result' }> => e.type === 'result');
      expect(results(heard.single)).toHaveLength(fleet.length);
      const jobs = Math.ceil(byTime.length / 20);
      const perJob = Array.from({ length: jobs }, (_, j) => new Set(byTime.slice(j * 20, (j + 1) * 20).map((e) => e.unit)).size);
      expect(results(heard.inOrder)).toHaveLength(perJob.reduce((a, b) => a + b, 0));
      for (const unit of new Set(fleet.map((e) => e.unit))) {
        expect(results(heard.inOrder).filter((e) => e.unit === unit).at(-1)?.sampleId).toBe(byTime.filter((e) => e.unit === unit).at(-1)!.sampleId);
      }
    } finally {
      await single.close();
      await inOrder.close();
      await shuffled.close();
    }
  });

  it('revisions inside history jobs (of a sample a month before, or of one in the same month) reach the state of one job per result', async () => {
    const single = await pipeline();
    const history = await pipeline();
    try {
      // Revised readings of three samples of each unit: one early, one in the middle, one near the end.
      const byTime = [...fleet].sort((a, b) => Date.parse(a.sampledAt) - Date.parse(b.sampledAt));
      const revised = (e: ResultEvent): ResultEvent => ({ ...e, revision: 1, readings: { ...e.readings, Fe: Number(e.readings.Fe ?? 0) + 60 } });
      const targets = new Set(['0', '9', '17'].flatMap((n) => [...new Set(fleet.map((e) => e.unit))].map((u) => fleet.filter((e) => e.unit === u)[Number(n)]!.sampleId)));
      const corrections = byTime.filter((e) => targets.has(e.sampleId)).map(revised);
      // As one job per result: the originals in order, each correction after the sample two months later.
      const stream: ResultEvent[] = [];
      for (const e of byTime) {
        stream.push(e);
        for (const c of corrections) {
          if (Date.parse(c.sampledAt) + 60 * 86_400_000 <= Date.parse(e.sampledAt) && !stream.includes(c)) stream.push(c);
        }
      }
      for (const c of corrections) if (!stream.includes(c)) stream.push(c);
      await single.send(stream);
      // As history jobs: the same stream in jobs of 40 (a job puts its results in history order, so a correction lands
      // beside its original when both are in one job, and months after the run has folded it when not).
      await history.sendHistory(stream, 40);
      const expected = await storedState(single);
      expect(expected.incidents.length).toBeGreaterThan(0);
      expect(expected.perComponent.flatMap((c) => c.revisions).filter((r) => r.endsWith('#1'))).toHaveLength(corrections.length);
      expect(await storedState(history)).toEqual(expected);
      expect(await history.history.getJobCounts('completed', 'failed')).toEqual({ completed: 0, failed: 0 });
    } finally {
      await single.close();
      await history.close();
    }
  });

  it('a history job whose run has folded past a result of a later month (an earlier job held later samples, a revision moved a sample) gives way to an evaluation that goes back', async () => {
    // One unit alone in its group: no other unit's shares mark it for evaluation again.
    const own = inventedFleet({ units: 1, samplesPerUnit: 24 }).sort((a, b) => Date.parse(a.sampledAt) - Date.parse(b.sampledAt));
    // A corrected sampling date: revision 1 of the fourth sample, dated a month after the seventh, with more iron.
    const moved: ResultEvent = { ...own[3]!, revision: 1, sampledAt: new Date(Date.parse(own[6]!.sampledAt) + 30 * 86_400_000).toISOString(), readings: { ...own[3]!.readings, Fe: Number(own[3]!.readings.Fe ?? 0) + 80 } };
    const cases: Array<{ what: string; single: ResultEvent[]; jobs: ResultEvent[][] }> = [
      // The later half first, then the earlier half: the second job's run folds the stored later half at its first
      // month, and then meets results before what it folded.
      { what: 'an earlier job held later samples', single: [...own.slice(12), ...own.slice(0, 12)], jobs: [own.slice(12), own.slice(0, 12)] },
      // All in one job in order, the correction with them: at the correction's month the run has folded the sample it
      // replaces.
      { what: 'a revision moved a sample', single: [...own, moved], jobs: [[...own, moved]] },
    ];
    for (const c of cases) {
      const single = await pipeline();
      const history = await pipeline();
      try {
        await single.send(c.single);
        for (const job of c.jobs) await history.sendHistory(job, job.length);
        const expected = await storedState(single);
        expect(expected.perComponent[0]!.findings.length, c.what).toBeGreaterThan(0);
        expect(await storedState(history), c.what).toEqual(expected);
      } finally {
        await single.close();
        await history.close();
      }
    }
  });

  it('history jobs evaluated on history threads reach the state of one job per result', async () => {
    const single = await pipeline();
    const threaded = await pipeline(2);
    try {
      await single.send(fleet);
      // Jobs of shuffled results: each month's components are evaluated on two threads with connections of their own.
      await threaded.sendHistory([...fleet].sort((a, b) => hash(a.sampleId) - hash(b.sampleId)), 30);
      const expected = await storedState(single);
      expect(expected.incidents.length).toBeGreaterThan(0);
      expect(await storedState(threaded)).toEqual(expected);
      expect(await threaded.history.getJobCounts('completed', 'failed')).toEqual({ completed: 0, failed: 0 });
    } finally {
      await single.close();
      await threaded.close();
    }
  });

  it('a history job stores and evaluates what it can take and fails naming each record it cannot', async () => {
    const line = await pipeline();
    try {
      const own = fleet.filter((e) => e.unit === fleet[0]!.unit);
      const bad = { ...own[3]!, sampleId: 'BAD-1', readings: { Fe: 'lots' } };
      await line.history.add(HISTORY_JOB, { records: [...own.slice(0, 3), bad, ...own.slice(3)] }, { attempts: 5 });
      await drained(line.queues);
      const failed = await line.history.getFailed();
      expect(failed).toHaveLength(1);
      expect(failed[0]!.attemptsMade).toBe(1);
      expect(failed[0]!.failedReason).toMatch(/1 of 21 results .*record 4 \(sampleId BAD-1\).*readings\.Fe: expected a number/);
      const ref = { unit: own[0]!.unit, component: own[0]!.component };
      expect((await line.storage.component(ref))?.samples).toBe(own.length);
      // Evaluated up to its last result.
      expect((await line.storage.evaluationInput(ref))?.latest?.position?.sampleId).toBe(own.at(-1)!.sampleId);
    } finally {
      await line.close();
    }
  });

  it('a job with bad data fails unrecoverably with field and reason; the worker goes on', async () => {
    const line = await pipeline();
    try {
      const results = line.queues[0]!;
      await results.add('result', { ...fleet[0], readings: { Fe: 'lots' } }, { attempts: 5 });
      await results.add('result', fleet[1]);
      await drained(line.queues);
      const failed = await results.getFailed();
      expect(failed).toHaveLength(1);
      expect(failed[0]!.attemptsMade).toBe(1);
      expect(failed[0]!.failedReason).toMatch(/readings\.Fe: expected a number/);
      expect((await line.storage.components()).map((c) => c.samples)).toEqual([1]);
    } finally {
      await line.close();
    }
  });
});

function hash(s: string): number {
  let h = 2166136261;
  for (const ch of s) h = Math.imul(h ^ ch.charCodeAt(0), 16777619) >>> 0;
  return h;
}
