/**
 * Arrival order across partitions (src/queue/arrivalOrder.ts, src/queue/producer.ts), on a private redis-server with
 * real BullMQ queues: with the keys in three partitions, the producer numbers the results it enqueues in the order
 * given, across all partitions' queues, one count for every call (job ids `r1-…`, `r2-…`, …, each unique), so that
 * each queue hands its results out in that order, and a count set back (a fail-over that lost its last increments)
 * drops no result; with one partition the queue's own ids stay. The view of the queues a batch waits on
 * lists, from every partition, the active jobs and those waiting at the head of each line, with component, sampling
 * month and partition; and when a line's head is full, a stand-in after its latest that holds up every later result.
 */
import { Worker } from 'bullmq';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { componentKey } from '../../src/domain/event.ts';
import { activeJobs, arrivalJobId, arrivalOf, monthStart, WAIT_HEAD_LOOKED_AT } from '../../src/queue/arrivalOrder.ts';
import { createResultProducer } from '../../src/queue/producer.ts';
import { openPartitionedQueues, QUEUE_NAMES, resolveQueueSettings } from '../../src/queue/queues.ts';
import { arrivalCounterKey, Partitions } from '../../src/redis/keys.ts';
import { startRedisServer, type RedisServer } from '../helpers/redisServer.ts';

let server: RedisServer;
let n = 0;

beforeAll(async () => {
  server = await startRedisServer();
});
afterAll(async () => {
  await server?.dispose();
});

/** An invented result: unit `PA-<unit>`, a gearbox, sampled on day `day` of 2026. */
function result(i: number, unit: number, day: number) {
  return { sampleId: `AO-${i}`, unit: `PA-${unit}`, component: 'gearbox', sampledAt: new Date(Date.UTC(2026, 0, day)).toISOString(), oilHours: 100 + day, readings: { Fe: 10 + (i % 7) } };
}

function setup(partitionCount: number) {
  const prefix = `{order${++n}}`;
  const redis = server.client();
  const partitions = new Partitions(prefix, partitionCount);
  const queues = openPartitionedQueues(QUEUE_NAMES.results, redis, resolveQueueSettings({ prefix }), partitions);
  const producer = createResultProducer({ connection: redis, prefix, partitions: partitionCount, now: () => Date.UTC(2026, 11, 1) });
  const queueKeys = partitions.all().map((p) => `${partitions.tag(p)}:${QUEUE_NAMES.results}`);
  /** Every waiting job, by partition, in the order the queue hands them out (`sampleId`, job id). */
  const waiting = async () =>
    Promise.all(queues.map(async (q) => (await q.getWaiting(0, -1)).map((job) => ({ sampleId: (job.data as { sampleId: string }).sampleId, id: job.id! }))));
  return { prefix, redis, partitions, queues, producer, queueKeys, waiting, close: async () => Promise.all([producer.close(), ...queues.map((q) => q.close())]) };
}

describe('arrival order across partitions', () => {
  it('reads the order of both kinds of job id, and nothing from another id', () => {
    expect(arrivalOf('17')).toBe(17);
    expect(arrivalOf(arrivalJobId(17, 'a3f09c'))).toBe(17);
    const others = [undefined, '', 'r', 'r17', 'x17', '17a', 'r-1', '1e3', 'r17-', 'r17-A', '17-a3'];
    expect(others.map(arrivalOf)).toEqual(others.map(() => undefined));
  });

  it('the producer numbers the results across the partitions in the order given, and each queue hands them out in it', async () => {
    const t = setup(3);
    try {
      const first = Array.from({ length: 30 }, (_, i) => result(i, i % 10, 1 + i));
      const second = Array.from({ length: 12 }, (_, i) => result(30 + i, (i * 3) % 10, 40 + i));
      expect((await t.producer.add(first)).every((o) => o.status === 'accepted')).toBe(true);
      expect((await t.producer.add(second)).every((o) => o.status === 'accepted')).toBe(true);
      const lines = await t.waiting();
      // Every partition holds some of them.
      expect(lines.map((l) => l.length > 0)).toEqual([true, true, true]);
      // The ids, read back as arrival order, give the order the results were given in, over all queues and both calls.
      const all = lines.flat().map((j) => ({ sampleId: j.sampleId, order: arrivalOf(j.id) }));
      expect(all.every((j) => j.order !== undefined && j.sampleId.length > 0)).toBe(true);
      expect([...all].sort((x, y) => x.order! - y.order!).map((j) => j.sampleId)).toEqual([...first, ...second].map((r) => r.sampleId));
      expect(new Set(all.map((j) => j.order)).size).toBe(42);
      // Each queue hands out its results in that order.
      for (const line of lines) {
        const orders = line.map((j) => arrivalOf(j.id)!);
        expect(orders).toEqual([...orders].sort((x, y) => x - y));
      }
    } finally {
      await t.close();
    }
  });

  it('a count set back drops no result: the ids stay unique', async () => {
    const t = setup(2);
    try {
      await t.producer.add([result(1, 1, 1), result(2, 2, 2)]);
      // As after a fail-over that lost the counter's increments.
      await t.redis.del(arrivalCounterKey(t.partitions));
      await t.producer.add([result(3, 1, 3), result(4, 2, 4)]);
      const lines = await t.waiting();
      expect(lines.flat().map((j) => j.sampleId).sort()).toEqual(['AO-1', 'AO-2', 'AO-3', 'AO-4']);
      expect(lines.flat().map((j) => arrivalOf(j.id)).sort()).toEqual([1, 1, 2, 2]);
    } finally {
      await t.close();
    }
  });

  it('with one partition, the queue numbers the results itself', async () => {
    const t = setup(1);
    try {
      await t.producer.add([result(1, 1, 1), result(2, 2, 2)]);
      const [line] = await t.waiting();
      expect(line!.map((j) => j.id)).toEqual(['1', '2']);
    } finally {
      await t.close();
    }
  });

  it('the view of the queues lists every partition’s active jobs and the head of each line, with component, group, month and partition', async () => {
    const t = setup(3);
    const taker = new Worker(QUEUE_NAMES.results, null, { connection: t.redis, prefix: t.partitions.tag(1), autorun: false });
    try {
      const events = Array.from({ length: 9 }, (_, i) => result(i, i, 1 + 10 * i));
      await t.producer.add(events);
      const lines = await t.waiting();
      // Partition 1's first result is taken (active), as a worker would.
      const taken = await taker.getNextJob('view-token', { block: false });
      expect(taken?.id).toBe(lines[1]![0]!.id);
      // A group per unit here: what the function gives for the names the job's data holds.
      const view = activeJobs(t.redis, t.queueKeys, (c) => `group of ${c.unit}`);
      const seen = await view(() => false);
      const expected = lines.flatMap((line, partition) =>
        line.map((j) => {
          const e = events.find((x) => x.sampleId === j.sampleId)!;
          return { order: arrivalOf(j.id)!, component: componentKey(e), group: `group of ${e.unit}`, month: monthStart(Date.parse(e.sampledAt)), queued: j.id !== taken!.id, partition };
        }),
      );
      expect([...seen].sort((x, y) => x.order - y.order)).toEqual(expected.sort((x, y) => x.order - y.order));
      // This process's own are left out.
      const own = arrivalOf(taken!.id)!;
      expect((await view((order) => order === own)).map((j) => j.order)).not.toContain(own);
    } finally {
      await taker.close();
      await t.close();
    }
  });

  it('a line whose head is full is followed by a stand-in that holds up every later result, of any component and month', async () => {
    const t = setup(2);
    try {
      const events = Array.from({ length: 3 * WAIT_HEAD_LOOKED_AT }, (_, i) => result(i, i % 40, 1 + (i % 300)));
      await t.producer.add(events);
      const lines = await t.waiting();
      const seen = await activeJobs(t.redis, t.queueKeys)(() => false);
      for (const [partition, line] of lines.entries()) {
        // The head of the line: its first WAIT_HEAD_LOOKED_AT results, and after the latest of them the stand-in.
        const head = line.slice(0, WAIT_HEAD_LOOKED_AT).map((j) => arrivalOf(j.id)!);
        const listed = seen.filter((j) => j.partition === partition);
        expect(listed.filter((j) => j.component !== undefined).map((j) => j.order).sort((x, y) => x - y)).toEqual(head);
        expect(listed.filter((j) => j.component === undefined)).toEqual([{ order: Math.max(...head) + 0.5, component: undefined, group: undefined, month: -Infinity, queued: true, partition }]);
      }
    } finally {
      await t.close();
    }
  });
});
