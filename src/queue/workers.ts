/**
 * The queue workers of one process. Any number of processes may run them against one Redis: the store is
 * idempotent, evaluations of one component are serialised by a Redis lock, and BullMQ hands every job to one
 * worker at a time (a worker that dies mid-job leaves a stalled job that another worker picks up).
 */
import { DelayedError, UnrecoverableError, Worker, type Job } from 'bullmq';
import type { Redis } from 'ioredis';
import type { Config } from '../domain/config.ts';
import type { Logger } from '../runtime/logger.ts';
import type { Metrics } from '../runtime/metrics.ts';
import { RedisStorage } from '../storage/redisStorage.ts';
import type { Storage } from '../storage/storage.ts';
import { DEFAULT_LOCK_TTL_MS, evaluateStored, type EvaluationResult } from './evaluateStored.ts';
import type { IncidentFeed } from './incidentFeed.ts';
import { openQueue, QUEUE_NAMES, resolveQueueSettings, scheduleEvaluation, type EvaluateJobData, type QueueSettings } from './queues.ts';
import { InvalidResultError, storeResult } from './storeResult.ts';

export interface WorkerSettings extends QueueSettings {
  /** Results this process stores at once. Default 8 (mostly waiting on Redis). */
  resultsConcurrency?: number;
  /** Components this process evaluates at once. Default 2 (evaluation is CPU work). */
  evaluateConcurrency?: number;
  /** Lifetime of a component's evaluation lock, renewed at a third of it. Default 30 000 ms. */
  lockTtlMs?: number;
  /** Delay before trying again an evaluation whose component another worker is evaluating. Default 500 ms. */
  busyRetryMs?: number;
}

export const WORKER_DEFAULTS = { resultsConcurrency: 8, evaluateConcurrency: 2, lockTtlMs: DEFAULT_LOCK_TTL_MS, busyRetryMs: 500 } as const;

export interface WorkerDeps {
  /** A connection made with `connectRedis(url, 'worker')` (no request retry limit, as BullMQ workers need). */
  readonly connection: Redis;
  readonly config: Config;
  readonly logger: Logger;
  readonly metrics?: Metrics;
  readonly incidents?: IncidentFeed;
  /** Default: Redis storage on `connection` with the same prefix. */
  readonly storage?: Storage;
  /** Processing clock, epoch ms. Default `Date.now`. */
  readonly now?: () => number;
}

export interface RunningWorkers {
  readonly workers: readonly Worker[];
  /** Stops taking jobs, waits for the active ones to finish, closes the queues this process opened. */
  close(): Promise<void>;
}

export function startWorkers(deps: WorkerDeps, settings: WorkerSettings = {}): RunningWorkers {
  const queueSettings = resolveQueueSettings(settings);
  const s = { ...WORKER_DEFAULTS, ...settings };
  const now = deps.now ?? Date.now;
  const storage = deps.storage ?? new RedisStorage(deps.connection, { prefix: queueSettings.prefix });
  const evaluateQueue = openQueue(QUEUE_NAMES.evaluate, deps.connection, queueSettings);
  const { logger, metrics } = deps;
  const workerOptions = { connection: deps.connection, prefix: queueSettings.prefix, removeOnComplete: queueSettings.keepCompleted, removeOnFail: queueSettings.keepFailed };

  const results = new Worker(
    QUEUE_NAMES.results,
    async (job: Job) => {
      let stored;
      try {
        stored = await storeResult(storage, deps.config, job.data, now());
      } catch (e) {
        if (e instanceof InvalidResultError) {
          metrics?.rejected('queue', e.issues);
          throw new UnrecoverableError(e.message);
        }
        throw e;
      }
      metrics?.stored(stored.outcome.status);
      if (stored.outcome.evaluationDue) await scheduleEvaluation(evaluateQueue, stored.sample);
      const { sample } = stored;
      return { sampleId: sample.sampleId, revision: sample.revision, unit: sample.unit, component: sample.component, status: stored.outcome.status };
    },
    { ...workerOptions, concurrency: s.resultsConcurrency },
  );

  const evaluate = new Worker(
    QUEUE_NAMES.evaluate,
    async (job: Job, token?: string) => {
      const ref = evaluateJobData(job.data);
      const result: EvaluationResult = await evaluateStored({ storage, config: deps.config, now, lockTtlMs: s.lockTtlMs, ...(deps.incidents && { incidents: deps.incidents }) }, ref);
      if (result.kind === 'busy' || result.kind === 'lost-lock') {
        // Another worker holds the component: come back shortly and evaluate whatever has arrived by then.
        await job.moveToDelayed(Date.now() + s.busyRetryMs, token);
        throw new DelayedError();
      }
      if (result.kind === 'empty') return { kind: 'empty' };
      metrics?.evaluated(result.durationMs / 1000, 'evaluated');
      metrics?.findings(result.newFindings);
      return {
        kind: 'evaluated',
        fed: result.fed.map((st) => st.sampleId),
        newFindings: result.newFindings.length,
        incidentChanges: result.incidents.changes.length,
        durationMs: Math.round(result.durationMs),
      };
    },
    { ...workerOptions, concurrency: s.evaluateConcurrency },
  );

  for (const w of [results, evaluate]) {
    w.on('failed', (job, err) => {
      const final = err instanceof UnrecoverableError || (job !== undefined && job.attemptsMade >= (job.opts.attempts ?? 1));
      logger[final ? 'error' : 'warn']({ queue: w.name, jobId: job?.id, attempt: job?.attemptsMade, err: err.message }, final ? 'job failed' : 'job failed; will retry');
    });
    w.on('error', (err) => logger.error({ queue: w.name, err: err.message }, 'worker error'));
  }

  return {
    workers: [results, evaluate],
    async close() {
      await Promise.all([results.close(), evaluate.close()]);
      await evaluateQueue.close();
    },
  };
}

function evaluateJobData(data: unknown): EvaluateJobData {
  const d = data as Partial<EvaluateJobData> | null;
  if (typeof d?.unit !== 'string' || typeof d.component !== 'string') {
    throw new UnrecoverableError('evaluate job: data must be {"unit": string, "component": string}');
  }
  return { unit: d.unit, component: d.component };
}
