/**
 * Failed jobs, for the operator: what failed and why, and a retry once the cause is fixed (a corrected
 * configuration, a receiver back online). A failed result job keeps its record, so nothing accepted is lost.
 */
import type { Job } from 'bullmq';
import type { RedisConnection as Redis } from '../redis/connection.ts';
import { Partitions } from '../redis/keys.ts';
import { openQueue, QUEUE_NAMES, resolveQueueSettings, type QueueName } from './queues.ts';

export interface FailedJob {
  /** `queue/id` (`queue.partition/id` with several partitions), the form `wearshift failed retry` takes. */
  readonly ref: string;
  readonly queue: QueueName;
  readonly id: string;
  readonly name: string;
  readonly failedAt?: string;
  readonly attempts: number;
  readonly reason: string;
  /** What the job was about: the sampleId, the component or the incident. */
  readonly subject?: string;
}

export const ALL_QUEUES: readonly QueueName[] = Object.values(QUEUE_NAMES);

export function isQueueName(name: string): name is QueueName {
  return (ALL_QUEUES as readonly string[]).includes(name);
}

function subjectOf(queue: QueueName, data: unknown): string | undefined {
  const d = (data ?? {}) as Record<string, unknown>;
  const text = (v: unknown) => (typeof v === 'string' ? v : undefined);
  if (queue === QUEUE_NAMES.results) return text(d.sampleId);
  if (queue === QUEUE_NAMES.history) return Array.isArray(d.records) ? `${d.records.length} results` : undefined;
  if (queue === QUEUE_NAMES.evaluate) return typeof d.unit === 'string' && typeof d.component === 'string' ? `${d.unit}/${d.component}` : undefined;
  return text(d.incidentId);
}

/** Where the jobs of a queue live: every partition's queue for results and evaluate, the shared one for the others. */
export function queueLocations(name: QueueName, prefix: string, partitionCount: number): Array<{ label: string; prefix: string }> {
  const partitions = new Partitions(prefix, partitionCount);
  if (name === QUEUE_NAMES.history || name === QUEUE_NAMES.notify || name === QUEUE_NAMES.escalate) return [{ label: name, prefix: partitions.sharedTag() }];
  return partitions.all().map((p) => ({ label: partitionCount === 1 ? name : `${name}.${p}`, prefix: partitions.tag(p) }));
}

function describe(queue: QueueName, label: string, job: Job): FailedJob {
  const subject = subjectOf(queue, job.data);
  return {
    ref: `${label}/${job.id}`,
    queue,
    id: String(job.id),
    name: job.name,
    ...(job.finishedOn !== undefined && { failedAt: new Date(job.finishedOn).toISOString() }),
    attempts: job.attemptsMade,
    reason: job.failedReason ?? '',
    ...(subject !== undefined && { subject }),
  };
}

export async function listFailedJobs(connection: Redis, prefix: string, queues: readonly QueueName[] = ALL_QUEUES, limit = 1000, partitions = 1): Promise<FailedJob[]> {
  const out: FailedJob[] = [];
  for (const name of queues) {
    for (const at of queueLocations(name, prefix, partitions)) {
      const queue = openQueue(name, connection, resolveQueueSettings({ prefix: at.prefix }));
      try {
        for (const job of await queue.getFailed(0, limit - 1)) if (job !== undefined) out.push(describe(name, at.label, job));
      } finally {
        await queue.close();
      }
    }
  }
  return out;
}

/** Retries one failed job (`queue/id`, or `queue.partition/id`); resolves false when no such failed job exists. */
export async function retryFailedJob(connection: Redis, prefix: string, queueName: QueueName, id: string, partitions = 1, partition?: number): Promise<boolean> {
  const locations = queueLocations(queueName, prefix, partitions).filter((_, i) => partition === undefined || i === partition);
  for (const at of locations) {
    const queue = openQueue(queueName, connection, resolveQueueSettings({ prefix: at.prefix }));
    try {
      const job = await queue.getJob(id);
      if (job === undefined || !(await job.isFailed())) continue;
      await job.retry('failed');
      return true;
    } finally {
      await queue.close();
    }
  }
  return false;
}

/** Retries every failed job of the queues; resolves with how many there were. */
export async function retryAllFailedJobs(connection: Redis, prefix: string, queues: readonly QueueName[] = ALL_QUEUES, partitions = 1): Promise<number> {
  let total = 0;
  for (const name of queues) {
    for (const at of queueLocations(name, prefix, partitions)) {
      const queue = openQueue(name, connection, resolveQueueSettings({ prefix: at.prefix }));
      try {
        const count = await queue.getFailedCount();
        if (count > 0) await queue.retryJobs({ state: 'failed', count: 1000 });
        total += count;
      } finally {
        await queue.close();
      }
    }
  }
  return total;
}
