/**
 * The queues and the options their jobs carry. `results` holds lab results as received; `evaluate` holds
 * at most one job per component waiting and one active (BullMQ deduplication), so a burst of results for
 * one component collapses into one evaluation of its whole history.
 */
import { Queue, type ConnectionOptions, type JobsOptions, type KeepJobs } from 'bullmq';
import { componentKey } from '../domain/event.ts';
import type { ComponentRef } from '../storage/storage.ts';
import { DEFAULT_PREFIX } from '../storage/keys.ts';

export const QUEUE_NAMES = { results: 'results', evaluate: 'evaluate', notify: 'notify', escalate: 'escalate' } as const;
export type QueueName = (typeof QUEUE_NAMES)[keyof typeof QUEUE_NAMES];

export interface EvaluateJobData {
  readonly unit: string;
  readonly component: string;
}

export interface QueueSettings {
  /** BullMQ key prefix, shared with the stored state. Keep a hash tag for Redis Cluster. Default `{wearshift}`. */
  prefix?: string;
  /** Completed jobs kept for inspection. Default: the last 1000, at most one day old. */
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
  keepCompleted: { age: 24 * 3600, count: 1000 },
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

/** Results of one component arriving closer together than this are evaluated together. */
export const DEFAULT_EVALUATE_DEBOUNCE_MS = 250;

/**
 * Schedules an evaluation of the component `debounceMs` from now. A later result of the same component
 * replaces the scheduled job and starts the wait again (debounce), so a burst — an import, a lab sending a
 * batch — is evaluated once, after its last result is stored, and results processed side by side by several
 * workers are all in the history before the incident engine sees any of them. While an evaluation runs, one
 * more is kept to follow it (keepLastIfActive).
 */
export async function scheduleEvaluation(queue: Queue, ref: ComponentRef, debounceMs = DEFAULT_EVALUATE_DEBOUNCE_MS): Promise<void> {
  const data: EvaluateJobData = { unit: ref.unit, component: ref.component };
  await queue.add('evaluate', data, { delay: debounceMs, deduplication: { id: componentKey(ref), keepLastIfActive: true, replace: true } });
}
