/**
 * Evaluate jobs in arrival order (src/queue/arrivalLimit.ts), on a private redis-server. An evaluate job (a component
 * another worker held, a group's cascade, a responder's mark) used to fold every stored sample of its component: with
 * two worker processes, a later result one process had stored was judged while the earlier one, taken by the other
 * process and not stored yet, was missing. In the invented fleet of the multi-process tests, gearbox LS4's fourth
 * sample is an oil change and its fifth reads 517 oil hours: judged without the fourth, the fifth reads as oil hours
 * gone back from the third's 870 and opens a sampling incident, withdrawn once the fourth is judged (the incident seen
 * once in the 4-partition rounds of tests/integration/processes-arrival-order.test.ts). Now the evaluate job leaves the
 * results a results job still holds (and later months of its group) to the batches that judge them, comes back
 * shortly, and folds everything once it is older than the batches' longest wait. So does a batch's component judged on
 * its own after a commit that was refused (here a store whose first commit is refused, as when a responder acted on an
 * incident meanwhile).
 */
import { DelayedError, Worker, type Job } from 'bullmq';
import { describe, expect, it } from 'vitest';
import { parseConfig } from '../../src/domain/configFile.ts';
import { componentKey, type Sample } from '../../src/domain/event.ts';
import { groupOf } from '../../src/domain/settings.ts';
import { validateResult } from '../../src/intake/validate.ts';
import { storeSample } from '../../src/pipeline/storeResult.ts';
import { arrivalLimit } from '../../src/queue/arrivalLimit.ts';
import { activeJobs, arrivalOf, type GroupOf } from '../../src/queue/arrivalOrder.ts';
import { runEvaluation } from '../../src/queue/evaluationRunner.ts';
import { ResultBatches } from '../../src/queue/resultBatches.ts';
import { evaluateProcessor, HELD_RETRY_MAX_MS } from '../../src/queue/processors/evaluateProcessor.ts';
import { openPartitionedQueues, QUEUE_NAMES, scheduleEvaluation } from '../../src/queue/queues.ts';
import { RedisIncidents } from '../../src/redis/redisIncidents.ts';
import { RedisStore } from '../../src/redis/redisStore.ts';
import { createMetrics } from '../../src/telemetry/metrics.ts';
import { inventedFleet } from '../helpers/fleetCsv.ts';
import { evaluationSites } from '../helpers/evaluationSites.ts';
import { storedVerdictRows } from '../helpers/incidentVerdict.ts';
import { liftGearboxJudging, POPULATION_FLEET } from '../helpers/populationFleet.ts';

const config = parseConfig(liftGearboxJudging(true));
const NOW = Date.parse('2026-12-01T00:00:00Z');
const events = inventedFleet(POPULATION_FLEET);
const sampleOf = (event: unknown): Sample => {
  const parsed = validateResult(event, { now: NOW });
  if (!parsed.ok) throw new Error(JSON.stringify(parsed.issues));
  return parsed.sample;
};
/** The first five results of gearbox LS4, in sampling order: the fourth reports an oil change. */
const ls4 = events.filter((e) => e.unit.startsWith('LS4')).slice(0, 5);
const LS4 = { unit: ls4[0]!.unit, component: 'gearbox' };
const groups: GroupOf = (c) => groupOf(config, c);

const sites = evaluationSites(config, 'ev');

/** A store, its evaluation deps (clock `now`), its results and evaluate queues and the arrival limit, on a fresh prefix. */
function site(now: () => number = () => NOW) {
  const metrics = createMetrics({ defaultMetrics: false });
  const { prefix, connection, partitions, settings, evaluateQueues, deps } = sites.site({ now, metrics });
  const [results] = openPartitionedQueues(QUEUE_NAMES.results, connection, settings, partitions);
  const resultsKey = `${partitions.tag(0)}:${QUEUE_NAMES.results}`;
  const limit = arrivalLimit(activeJobs(connection, [resultsKey], groups));
  const incidents = new RedisIncidents(connection, { rules: deps.rules, prefix });
  // A worker that takes jobs only when asked, as another process holding them.
  const taker = (queue: string) => {
    const worker = new Worker(queue, null, { connection, prefix: partitions.tag(0), autorun: false });
    sites.closeAfter(() => worker.close());
    return worker;
  };
  sites.closeAfter(() => results!.close());
  return {
    connection,
    resultsKey,
    /** The count of evaluate jobs held for earlier results, from the /metrics text. */
    held: async () => Number(/^wearshift_evaluations_held_total (\d+)$/m.exec(await metrics.registry.metrics())?.[1]),
    deps,
    limit,
    incidents,
    evaluateQueue: evaluateQueues[0]!,
    async store(event: unknown) {
      expect((await storeSample(deps.store, config, sampleOf(event), NOW)).outcome.status).toBe('new');
    },
    /** A results job of `event` taken by another process (active, its result not stored yet). */
    async heldElsewhere(event: unknown): Promise<{ job: Job; token: string }> {
      await results!.add('result', event);
      const token = `elsewhere-${prefix}`;
      const job = (await taker(QUEUE_NAMES.results).getNextJob(token, { block: false })) as Job | undefined;
      expect(job?.data).toEqual(event);
      return { job: job!, token };
    },
    taker,
    rows: () => storedVerdictRows(incidents),
  };
}

describe('an evaluate job in arrival order', () => {
  it('leaves a result another process holds to that process, and opens no incident withdrawn later', async () => {
    // Without the limit (as before): the fifth sample judged without the fourth opens a sampling incident, withdrawn
    // once the fourth is judged. This is what the limit prevents; were the fleet to change, the test says so here.
    const before = site();
    for (const e of ls4.slice(0, 3)) await before.store(e);
    expect(await runEvaluation(before.deps, LS4)).toBe('done');
    await before.heldElsewhere(ls4[3]);
    await before.store(ls4[4]);
    expect(await runEvaluation(before.deps, LS4)).toBe('done');
    expect((await before.rows()).map((r) => r.incidentId)).toContain(`${LS4.unit}/gearbox/sampling@${ls4[4]!.sampleId}`);
    await before.store(ls4[3]);
    expect(await runEvaluation(before.deps, LS4)).toBe('done');
    expect((await before.rows()).filter((r) => r.closed === 'withdrawn').map((r) => r.incidentId)).toEqual([`${LS4.unit}/gearbox/sampling@${ls4[4]!.sampleId}`]);

    // The reference: the five results judged in order.
    const reference = site();
    for (const e of ls4) await reference.store(e);
    expect(await runEvaluation(reference.deps, LS4)).toBe('done');
    const expected = await reference.rows();
    expect(expected.some((r) => r.incidentId.includes('sampling'))).toBe(false);

    // With the limit: the fifth waits for the fourth, held by another process; the evaluation comes back later.
    const now = site();
    for (const e of ls4.slice(0, 3)) await now.store(e);
    expect(await runEvaluation(now.deps, LS4, now.limit)).toBe('done');
    const held = await now.heldElsewhere(ls4[3]);
    await now.store(ls4[4]);
    expect(await now.limit(LS4, 'lift-gearboxes')).toBe(Date.UTC(2024, 2, 1));
    expect(await runEvaluation(now.deps, LS4, now.limit)).toBe('held');
    expect(await now.rows()).toEqual([]);
    expect((await now.deps.store.evaluationInput(LS4))?.latest?.count).toBe(3);
    // The other process stores the fourth and its batch judges it (its job done): everything is judged, in order.
    await now.store(ls4[3]);
    await held.job.moveToCompleted('judged', held.token, false);
    expect(await now.limit(LS4, 'lift-gearboxes')).toBeUndefined();
    expect(await runEvaluation(now.deps, LS4, now.limit)).toBe('done');
    expect(await now.rows()).toEqual(expected);
    expect((await now.deps.store.evaluationInput(LS4))?.latest?.count).toBe(5);
  });

  it('judges a later month of a component only once the results of its group from before it are judged', async () => {
    const s = site();
    const inMonth = (prefix: string, month: string) => events.find((e) => e.unit.startsWith(prefix) && e.sampledAt.startsWith(month))!;
    // LS2's March result held by another process; LS1's first March and first April results stored.
    const held = await s.heldElsewhere(inMonth('LS2-', '2024-03'));
    const march = inMonth('LS1-', '2024-03');
    const april = inMonth('LS1-', '2024-04');
    const LS1 = { unit: march.unit, component: 'gearbox' };
    await s.store(march);
    await s.store(april);
    // A month's group statistics are those of the months before it: March is judged, April waits.
    expect(await s.limit(LS1, 'lift-gearboxes')).toBe(Date.UTC(2024, 3, 1));
    expect(await runEvaluation(s.deps, LS1, s.limit)).toBe('held');
    expect((await s.deps.store.evaluationInput(LS1))?.latest?.count).toBe(1);
    // Another group's results hold nothing up.
    expect(await s.limit(LS1, 'another group')).toBeUndefined();
    await held.job.moveToCompleted('judged', held.token, false);
    expect(await runEvaluation(s.deps, LS1, s.limit)).toBe('done');
    expect((await s.deps.store.evaluationInput(LS1))?.latest?.count).toBe(2);
  });

  it('in a batch, judges a component on its own after a commit that could not be made only up to what another process holds', async () => {
    const s = site();
    for (const e of ls4.slice(0, 2)) await s.store(e);
    expect(await runEvaluation(s.deps, LS4)).toBe('done');
    // The third result's job is this process's; the fourth's, which arrived after it, another process's (not stored yet).
    const third = await s.heldElsewhere(ls4[2]);
    const fourth = await s.heldElsewhere(ls4[3]);
    // The batch's commit is refused once (as when a responder acted on an incident meanwhile), after another process
    // stored the fifth result: the component is then judged on its own.
    let refused = 0;
    const store: RedisStore = Object.create(s.deps.store as RedisStore);
    store.commit = async (ref, lease, commit) => {
      if (refused++ === 0) {
        await s.store(ls4[4]);
        return { ok: false, reason: 'incidents-changed' };
      }
      return s.deps.store.commit(ref, lease, commit);
    };
    const batches = new ResultBatches({ ...s.deps, store, ledger: store }, { activeJobs: activeJobs(s.connection, [s.resultsKey], groups), groupOf: groups });
    const release = batches.hold(arrivalOf(third.job.id), batches.about(ls4[2]));
    await s.store(ls4[2]);
    await batches.judge(sampleOf(ls4[2]), arrivalOf(third.job.id));
    release();
    expect(refused).toBeGreaterThanOrEqual(1);
    // Not judged against the third with the fourth missing: nothing opened; left due from March, its evaluation scheduled.
    expect(await s.rows()).toEqual([]);
    expect((await s.deps.store.evaluationInput(LS4))?.latest?.count).toBe(2);
    const scheduled = await s.evaluateQueue.getJobs(['delayed', 'waiting']);
    expect(scheduled.map((j) => j.data)).toEqual([LS4]);
    // The other process stores the fourth and is done with it: the scheduled evaluation judges the rest in order.
    await s.store(ls4[3]);
    await fourth.job.moveToCompleted('judged', fourth.token, false);
    await third.job.moveToCompleted('judged', third.token, false);
    expect(await runEvaluation(s.deps, LS4, s.limit)).toBe('done');
    expect((await s.deps.store.evaluationInput(LS4))?.latest?.count).toBe(5);
    const reference = site();
    for (const e of ls4) await reference.store(e);
    expect(await runEvaluation(reference.deps, LS4)).toBe('done');
    expect(await s.rows()).toEqual(await reference.rows());
    expect(componentKey(scheduled[0]!.data)).toBe(componentKey(LS4));
  });

  it('comes back shortly while held up, and folds everything once older than the longest wait', async () => {
    let clock = NOW;
    const s = site(() => clock);
    for (const e of ls4.slice(0, 3)) await s.store(e);
    await s.heldElsewhere(ls4[3]);
    await s.store(ls4[4]);
    await scheduleEvaluation(s.evaluateQueue, LS4);
    const taker = s.taker(QUEUE_NAMES.evaluate);
    const processor = evaluateProcessor(s.deps, 200, { limit: s.limit, waitMs: 60_000 });
    const job = (await taker.getNextJob('evaluate-1', { block: false })) as Job;
    // Young: judged up to the month of the held result (the first two results; the third is of its month), then back
    // on the queue, delayed.
    clock = job.timestamp + 1_000;
    const delayedBy = async (j: Job, token: string) => {
      const before = Date.now();
      await expect(processor(j, token)).rejects.toBeInstanceOf(DelayedError);
      const after = Date.now();
      expect(await s.evaluateQueue.getDelayedCount()).toBe(1);
      // BullMQ's delayed set scores a job by its time × 4096 (and a counter).
      const until = Math.floor(Number(await s.connection.zscore(`${s.evaluateQueue.qualifiedName}:delayed`, j.id!)) / 4096);
      expect(until).toBeGreaterThanOrEqual(before);
      return { min: until - after, max: until - before };
    };
    // A quarter of its age (1 s), at least the retry delay given (200 ms).
    const first = await delayedBy(job, 'evaluate-1');
    expect(first.min).toBeLessThanOrEqual(250);
    expect(first.max).toBeGreaterThanOrEqual(250);
    expect(ls4.map((e) => e.sampledAt.slice(0, 7))).toEqual(['2024-02', '2024-02', '2024-03', '2024-03', '2024-03']);
    expect((await s.deps.store.evaluationInput(LS4))?.latest?.count).toBe(2);
    // Held 20 s: looks again after HELD_RETRY_MAX_MS, not a quarter of its age.
    clock = job.timestamp + 20_000;
    await s.evaluateQueue.promoteJobs();
    const second = await delayedBy((await taker.getNextJob('evaluate-2', { block: false })) as Job, 'evaluate-2');
    expect(second.min).toBeLessThanOrEqual(HELD_RETRY_MAX_MS);
    expect(second.max).toBeGreaterThanOrEqual(HELD_RETRY_MAX_MS);
    expect((await s.deps.store.evaluationInput(LS4))?.latest?.count).toBe(2);
    // Older than the longest wait (the holder hangs): everything stored is judged.
    clock = job.timestamp + 61_000;
    await s.evaluateQueue.promoteJobs();
    const again = (await taker.getNextJob('evaluate-3', { block: false })) as Job;
    expect(again.id).toBe(job.id);
    expect(await processor(again, 'evaluate-3')).toEqual({ kind: 'done' });
    // Held twice, counted twice (/metrics).
    expect(await s.held()).toBe(2);
    expect((await s.deps.store.evaluationInput(LS4))?.latest?.count).toBe(4);
  });
});
