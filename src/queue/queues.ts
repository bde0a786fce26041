/**
 * The queues and the options their jobs carry. `results` holds lab results as received, and `evaluate` the
 * components to evaluate again (a burst whose results found the component busy, a late result of another unit that
 * re-judges this one), at most one waiting per component (BullMQ deduplication). Both are partitioned like the
 * stored state (src/redis/keys.ts): one queue of each per partition, under the partition's hash tag. `notify` and
 * `escalate` carry messages and escalation checks and are shared.
 */
import { Queue, type ConnectionOptions, type JobsOptions, type KeepJobs } from 'bullmq';
import { componentKey } from '../domain/event.ts';
import type { ComponentRef } from '../pipeline/ports.ts';
import { DEFAULT_PREFIX, Partitions } from '../redis/keys.ts';

export const QUEUE_NAMES = { results: 'results', history: 'history', evaluate: 'evaluate', notify: 'notify', escalate: 'escalate' } as const;
export type QueueName = (typeof QUEUE_NAMES)[keyof typeof QUEUE_NAMES];

export interface EvaluateJobData {
  readonly unit: string;
  readonly component: string;
}

export interface QueueSettings {
  /** BullMQ key prefix, shared with the stored state. Keep a hash tag for Redis Cluster. Default `{wearshift}`. */
  prefix?: string;
  /** Completed jobs kept for inspection. Default: the last 100, at most an hour old (they cost Redis memory per result). */
  keepCompleted?: KeepJobs;
  /** Failed jobs kept for `wearshift failed list|retry`. Default: the last 10 000, at most 14 days old. */
  keepFailed?: KeepJobs;
  /** Attempts of a job whose failure may be transient (Redis away, a bug fixed by a deploy). Default 5. */
  attempts?: number;
  /** First retry delay; doubles at every attempt. Default 1000 ms. */
  backoffMs?: number;
}

export const QUEUE_DEFAULTS = {
  prefix: DEFAULT_PREFIX,
  keepCompleted: { age: 3600, count: 100 },
  keepFailed: { age: 14 * 24 * 3600, count: 10_000 },
  attempts: 5,
  backoffMs: 1000,
} as const satisfies Required<QueueSettings>;

export function resolveQueueSettings(settings: QueueSettings = {}): Required<QueueSettings> {
  return { ...QUEUE_DEFAULTS, ...settings };
}

export function defaultJobOptions(settings: Required<QueueSettings>): JobsOptions {
  return {
    attempts: settings.attempts,
    backoff: { type: 'exponential', delay: settings.backoffMs },
    removeOnComplete: settings.keepCompleted,
    removeOnFail: settings.keepFailed,
  };
}

export function openQueue(name: QueueName, connection: ConnectionOptions, settings: Required<QueueSettings>): Queue {
  const queue = new Queue(name, { connection, prefix: settings.prefix, defaultJobOptions: defaultJobOptions(settings) });
  // Without a listener BullMQ prints every reconnection failure; the connection's owner reports outages once.
  queue.on('error', () => {});
  return queue;
}

/** The partitioned queues of one kind, by partition. */
export function openPartitionedQueues(name: 'results' | 'evaluate', connection: ConnectionOptions, settings: Required<QueueSettings>, partitions: Partitions): Queue[] {
  return partitions.all().map((p) => openQueue(name, connection, { ...settings, prefix: partitions.tag(p) }));
}

/** The shared queues (history, notify, escalate) live under their own tag. */
export function openSharedQueue(name: 'history' | 'notify' | 'escalate', connection: ConnectionOptions, settings: Required<QueueSettings>, partitions: Partitions): Queue {
  return openQueue(name, connection, { ...settings, prefix: partitions.sharedTag() });
}

/** A component that found its evaluation busy is tried again after this wait unless the holder got to it first. */
export const DEFAULT_EVALUATE_RETRY_MS = 200;

/**
 * A job of the `history` queue: many old results, of components in any partition, stored and evaluated month by
 * month (processors/historyProcessor.ts). The queue is one for all partitions (under the shared tag) and runs one job
 * at a time across all workers (BullMQ's global concurrency), so that histories are evaluated in the order they were
 * sent and no partition's months run ahead of another's (which would make the group's statistics re-judge them).
 */
export const HISTORY_JOB = 'history';
/** Results per history job. */
export const DEFAULT_HISTORY_JOB_SIZE = 10_000;

export interface HistoryJobData {
  readonly records: readonly unknown[];
}

/**
 * Schedules an evaluation of the component. A later request for the same component while one waits changes
 * nothing; while an evaluation runs, one more is kept to follow it (keepLastIfActive).
 */
export async function scheduleEvaluation(queue: Queue, ref: ComponentRef, delayMs = 0): Promise<void> {
  const job = evaluateJob(ref, delayMs);
  await queue.add(job.name, job.data, job.opts);
}

/** The evaluate job of a component: deduplicated by the component's key. */
function evaluateJob(ref: ComponentRef, delayMs = 0): { name: 'evaluate'; data: EvaluateJobData; opts: JobsOptions } {
  return { name: 'evaluate', data: { unit: ref.unit, component: ref.component }, opts: { delay: delayMs, deduplication: { id: componentKey(ref), keepLastIfActive: true } } };
}

/** `scheduleEvaluation` for many components (a group's cascade), one round trip per partition. */
export async function scheduleEvaluations(queues: readonly Queue[], partitions: Partitions, refs: readonly ComponentRef[]): Promise<void> {
  const byPartition = new Map<number, ComponentRef[]>();
  for (const ref of refs) {
    const p = partitions.of(ref);
    (byPartition.get(p) ?? byPartition.set(p, []).get(p)!).push(ref);
  }
  await Promise.all([...byPartition].map(([p, list]) => queues[p]!.addBulk(list.map((ref) => evaluateJob(ref)))));
}
