/**
 * Taking the job at the head of a queue's wait list outside a worker's slots (src/queue/queuedResultTaker.ts), on a
 * private redis-server with real BullMQ queues: the head job (the one BullMQ would hand out next) is run through the
 * processor and completed with its return value; a processor that throws fails the attempt, and the job is retried
 * as its attempts say (then failed for good); an empty queue takes nothing.
 */
import { Queue, type Job } from 'bullmq';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { queuedResultTaker } from '../../src/queue/queuedResultTaker.ts';
import { silentLogger } from '../../src/telemetry/logger.ts';
import { startRedisServer, type RedisServer } from '../helpers/redisServer.ts';

let server: RedisServer;
let n = 0;

beforeAll(async () => {
  server = await startRedisServer();
});
afterAll(async () => {
  await server?.dispose();
});

function setup(processor: (job: Job) => Promise<unknown>) {
  const prefix = `{taker${++n}}`;
  const connection = server.client();
  const queue = new Queue('results', { connection, prefix });
  const seen: string[] = [];
  const taker = queuedResultTaker(
    'results',
    async (job) => {
      seen.push(job.id!);
      return processor(job);
    },
    { connection, prefix, lockDuration: 30_000 },
    silentLogger(),
  );
  return { queue, taker, seen, close: async () => Promise.all([taker.close(), queue.close()]) };
}

describe('a results job taken outside the worker slots', () => {
  it('is the head of the wait list, run and completed with its return value; the next take gets the next job', async () => {
    const t = setup(async (job) => ({ stored: (job.data as { sampleId: string }).sampleId }));
    try {
      const [a, b] = await t.queue.addBulk([
        { name: 'result', data: { sampleId: 'S-1' } },
        { name: 'result', data: { sampleId: 'S-2' } },
      ]);
      // Until its first take the taker holds no worker connection: the process counts as its own worker only.
      expect(await t.queue.getWorkersCount()).toBe(0);
      await t.taker.take();
      expect(t.seen).toEqual([a!.id]);
      expect(await (await t.queue.getJob(a!.id!))!.getState()).toBe('completed');
      expect((await t.queue.getJob(a!.id!))!.returnvalue).toEqual({ stored: 'S-1' });
      expect(await (await t.queue.getJob(b!.id!))!.getState()).toBe('waiting');
      await t.taker.take();
      expect(t.seen).toEqual([a!.id, b!.id]);
      expect(await t.queue.getJobCounts('waiting', 'active', 'completed')).toEqual({ waiting: 0, active: 0, completed: 2 });
    } finally {
      await t.close();
    }
  });

  it('fails an attempt when the processor throws: retried while attempts remain, then failed with the reason', async () => {
    const t = setup(async () => {
      throw new Error('redis went away mid-store');
    });
    try {
      const job = await t.queue.add('result', { sampleId: 'S-3' }, { attempts: 2 });
      await t.taker.take();
      const retried = (await t.queue.getJob(job.id!))!;
      expect(retried.attemptsMade).toBe(1);
      expect(['waiting', 'delayed']).toContain(await retried.getState());
      await t.queue.promoteJobs();
      await t.taker.take();
      const failed = (await t.queue.getJob(job.id!))!;
      expect(await failed.getState()).toBe('failed');
      expect(failed.failedReason).toBe('redis went away mid-store');
    } finally {
      await t.close();
    }
  });

  it('takes nothing from an empty queue', async () => {
    const t = setup(async () => 'never');
    try {
      await t.taker.take();
      expect(t.seen).toEqual([]);
    } finally {
      await t.close();
    }
  });
});
