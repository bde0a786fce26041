/**
 * Takes the results job at the head of a partition's wait list outside the worker's own slots, and runs it through
 * the same processor. For arrival order across worker processes (resultBatches.ts): a job given back by a worker that
 * died (its lock lapsed, and a stall check put it back at the head of the line) arrived before results that every
 * process holds; when each process's slots are all held by results waiting for it, no slot frees for it to be taken.
 * The process that finds so takes it here: the job is fetched with a token of its own, its lock kept renewed while it
 * runs, and it is completed or failed as the worker would (attempts and backoff are the job's).
 */
import { Worker, type Job, type Processor, type WorkerOptions } from 'bullmq';
import type { Logger } from '../telemetry/logger.ts';

export interface QueuedResultTaker {
  /** Takes and runs the job at the head of the wait list, if any; resolves once it has completed or failed. */
  take(): Promise<void>;
  close(): Promise<void>;
}

export function queuedResultTaker(queueName: string, processor: Processor, options: WorkerOptions, logger: Logger): QueuedResultTaker {
  // A worker that runs nothing by itself, only what `take` fetches; made at the first take (after a worker died), so
  // that until then the process holds no connection for it and counts as one worker of the queue.
  let manual: Worker | undefined;
  let closed = false;
  const worker = (): Worker => {
    if (manual === undefined) {
      manual = new Worker(queueName, null, { ...options, autorun: false });
      manual.on('error', (err) => logger.warn({ queue: queueName, err: err.message }, 'taking a waiting result outside the worker slots failed'));
    }
    return manual;
  };
  const lockMs = options.lockDuration ?? 30_000;
  let taken = 0;
  return {
    async take() {
      if (closed) return;
      const manual = worker();
      const token = `${manual.id}:waiting-${++taken}`;
      const job = (await manual.getNextJob(token, { block: false })) as Job | undefined;
      if (job === undefined) return;
      const renew = setInterval(() => void job.extendLock(token, lockMs).catch(() => undefined), Math.max(1000, Math.floor(lockMs / 2)));
      try {
        let value: unknown;
        try {
          value = await processor(job, token);
        } catch (e) {
          await job.moveToFailed(e as Error, token, false);
          return;
        }
        await job.moveToCompleted(value, token, false);
      } finally {
        clearInterval(renew);
      }
    },
    async close() {
      closed = true;
      await manual?.close();
    },
  };
}
