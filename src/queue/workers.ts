/**
 * The queue workers of one process. Any number of processes may run them against one Redis: the store is
 * idempotent, evaluations of one component are serialised by a Redis lock, and BullMQ hands every job to one
 * worker at a time (a worker that dies mid-job leaves a stalled job that another worker picks up).
 */
import { hostname } from 'node:os';
import { DelayedError, UnrecoverableError, Worker, type Job } from 'bullmq';
import type { Redis } from 'ioredis';
import type { Config } from '../domain/config.ts';
import type { Sample } from '../domain/event.ts';
import type { LiveEvent } from '../http/eventHub.ts';
import { incidentEvent } from '../http/eventHub.ts';
import type { NotifyEffect } from '../incidents/model.ts';
import type { RedisIncidentStore } from '../incidents/redisIncidentStore.ts';
import { DEFAULT_BACKOFF, delayBeforeNextAttempt } from '../notify/retryTiming.ts';
import type { Logger } from '../runtime/logger.ts';
import type { Metrics } from '../runtime/metrics.ts';
import { RedisStorage } from '../storage/redisStorage.ts';
import type { Storage } from '../storage/storage.ts';
import { DEFAULT_LOCK_TTL_MS, evaluateStored, type EvaluationResult } from './evaluateStored.ts';
import { incidentChart } from './incidentChart.ts';
import { incidentMessage } from './incidentMessage.ts';
import { DeliveryRetry, type NotificationChannels } from './notificationChannels.ts';
import { startOutboxRelay, type EscalateJobData } from './outboxRelay.ts';
import { DEFAULT_EVALUATE_DEBOUNCE_MS, openQueue, QUEUE_NAMES, resolveQueueSettings, scheduleEvaluation, type EvaluateJobData, type QueueSettings } from './queues.ts';
import { redisIncidentFeed } from './redisIncidentFeed.ts';
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
  /** Wait after a component's latest result before it is evaluated; a further result restarts the wait. Default 250 ms. */
  evaluateDebounceMs?: number;
  /** Notifications this process delivers at once. Default 4. */
  notifyConcurrency?: number;
  /** Delivery attempts of one notification (backoff from 5 s, doubling, at most an hour apart). Default 20. */
  notifyAttempts?: number;
  /** How often the incident outbox is looked at besides after each evaluation. Default 1000 ms. */
  outboxIntervalMs?: number;
}

export const WORKER_DEFAULTS = {
  resultsConcurrency: 8,
  evaluateConcurrency: 2,
  lockTtlMs: DEFAULT_LOCK_TTL_MS,
  busyRetryMs: 500,
  evaluateDebounceMs: DEFAULT_EVALUATE_DEBOUNCE_MS,
  notifyConcurrency: 4,
  notifyAttempts: 20,
  outboxIntervalMs: 1000,
} as const;

export interface WorkerDeps {
  /** A connection made with `connectRedis(url, 'worker')` (no request retry limit, as BullMQ workers need). */
  readonly connection: Redis;
  readonly config: Config;
  readonly logger: Logger;
  readonly metrics?: Metrics;
  /** The incident store: evaluations feed it, escalation checks run against it, its outbox fills the notify queue. */
  readonly incidentStore?: RedisIncidentStore;
  /** Channels for the notify queue; without them this process delivers no notifications. */
  readonly channels?: NotificationChannels;
  /** Public address of the HTTP API, for the incident links in messages. */
  readonly apiBaseUrl?: string;
  /** Told about stored results and incident changes, for live views. */
  readonly live?: (event: LiveEvent) => void;
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
  const { logger, metrics, incidentStore } = deps;
  const workerOptions = {
    connection: deps.connection,
    prefix: queueSettings.prefix,
    removeOnComplete: queueSettings.keepCompleted,
    removeOnFail: queueSettings.keepFailed,
    // Stored on every job this process handles, so that an operator can tell which process did what.
    name: `${hostname()}:${process.pid}`,
  };
  const incidents = incidentStore && redisIncidentFeed(incidentStore);
  const notifyQueue = incidentStore && openQueue(QUEUE_NAMES.notify, deps.connection, { ...queueSettings, attempts: s.notifyAttempts });
  const escalateQueue = incidentStore && openQueue(QUEUE_NAMES.escalate, deps.connection, queueSettings);
  const relay = incidentStore && startOutboxRelay(incidentStore, { notify: notifyQueue!, escalate: escalateQueue! }, logger, { intervalMs: s.outboxIntervalMs });

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
      if (stored.outcome.evaluationDue) await scheduleEvaluation(evaluateQueue, stored.sample, s.evaluateDebounceMs);
      const { sample } = stored;
      if (stored.outcome.status === 'new' || stored.outcome.status === 'replacement') {
        deps.live?.({ type: 'result', unit: sample.unit, component: sample.component, sampleId: sample.sampleId, sampledAt: sample.sampledAt });
      }
      return { sampleId: sample.sampleId, revision: sample.revision, unit: sample.unit, component: sample.component, status: stored.outcome.status };
    },
    { ...workerOptions, concurrency: s.resultsConcurrency },
  );

  const evaluate = new Worker(
    QUEUE_NAMES.evaluate,
    async (job: Job, token?: string) => {
      const ref = evaluateJobData(job.data);
      const result: EvaluationResult = await evaluateStored({ storage, config: deps.config, now, lockTtlMs: s.lockTtlMs, ...(incidents && { incidents }) }, ref);
      if (result.kind === 'busy' || result.kind === 'lost-lock') {
        // Another worker holds the component: come back shortly and evaluate whatever has arrived by then.
        await job.moveToDelayed(Date.now() + s.busyRetryMs, token);
        throw new DelayedError();
      }
      if (result.kind === 'empty') return { kind: 'empty' };
      metrics?.evaluated(result.durationMs / 1000, 'evaluated');
      metrics?.findings(result.newFindings);
      for (const change of result.incidents.changes) deps.live?.(incidentEvent(change));
      if (result.incidents.effects.length > 0) relay?.kick();
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

  const workers: Worker[] = [results, evaluate] as Worker[];

  if (incidentStore !== undefined) {
    workers.push(
      new Worker(
        QUEUE_NAMES.escalate,
        async (job: Job<EscalateJobData>) => {
          const { effects } = await incidentStore.applyEscalationCheck({ incidentId: job.data.incidentId, now: new Date(now()) });
          if (effects.length > 0) relay!.kick();
          return { effects: effects.length };
        },
        { ...workerOptions, concurrency: s.notifyConcurrency },
      ),
    );
  }

  const channels = deps.channels;
  // The chart is a help, not the message: a history it cannot draw sends the mail without it.
  const emailChart = async (effect: NotifyEffect, revisions: readonly Sample[]) => {
    try {
      return await incidentChart(storage, deps.config, effect, revisions);
    } catch (e) {
      logger.warn({ incidentId: effect.incidentId, err: (e as Error).message }, 'incident e-mail sent without its trend chart');
      return undefined;
    }
  };
  if (incidentStore !== undefined && channels !== undefined) {
    const apiBaseUrl = deps.apiBaseUrl ?? 'http://localhost:8080';
    workers.push(
      new Worker(
        QUEUE_NAMES.notify,
        async (job: Job<NotifyEffect>) => {
          const effect = job.data;
          const revisions = await storage.revisions(effect.incident);
          const chart = effect.channel === 'email' ? await emailChart(effect, revisions) : undefined;
          return channels.deliver(effect, incidentMessage(effect, revisions, apiBaseUrl), job.attemptsMade + 1, chart);
        },
        {
          ...workerOptions,
          concurrency: s.notifyConcurrency,
          settings: {
            // The receiver's Retry-After wins; otherwise exponential backoff with full jitter.
            backoffStrategy: (attemptsMade: number, _type?: string, err?: Error) =>
              delayBeforeNextAttempt({ attempt: Math.max(1, attemptsMade), ...(err instanceof DeliveryRetry && err.retryAfterMs !== undefined && { retryAfterMs: err.retryAfterMs }) }, DEFAULT_BACKOFF, Math.random),
          },
        },
      ),
    );
  }

  for (const w of workers) {
    w.on('failed', (job, err) => {
      const final = err instanceof UnrecoverableError || (job !== undefined && job.attemptsMade >= (job.opts.attempts ?? 1));
      logger[final ? 'error' : 'warn']({ queue: w.name, jobId: job?.id, attempt: job?.attemptsMade, err: err.message }, final ? 'job failed' : 'job failed; will retry');
    });
    // A Redis outage makes every reconnection attempt an error: one line per message and minute is enough.
    const lastLogged = new Map<string, number>();
    w.on('error', (err) => {
      const t = Date.now();
      if (t - (lastLogged.get(err.message) ?? -Infinity) < 60_000) return;
      lastLogged.set(err.message, t);
      logger.error({ queue: w.name, err: err.message }, 'worker error');
    });
  }

  return {
    workers,
    async close() {
      await Promise.all(workers.map((w) => w.close()));
      await relay?.close();
      await Promise.all([evaluateQueue.close(), notifyQueue?.close(), escalateQueue?.close()]);
      await channels?.close();
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
