/**
 * The queue workers of one process. Any number of processes may run them against one Redis or one Redis Cluster:
 * the store is idempotent, evaluations of one component are serialised by a Redis lock, and BullMQ hands every job
 * to one worker at a time (a worker that dies mid-job leaves a stalled job that another worker picks up). Results
 * and evaluations are consumed from every partition's queue; messages and escalation checks from the shared ones.
 */
import { hostname } from 'node:os';
import { UnrecoverableError, Worker, type Processor, type Queue } from 'bullmq';
import { designConfiguredCharts } from '../analysis/budget.ts';
import type { Config } from '../domain/config.ts';
import type { NotifyEffect } from '../incidents/model.ts';
import { incidentRules } from '../incidents/policy.ts';
import { DEFAULT_BACKOFF, delayBeforeNextAttempt } from '../notify/retryTiming.ts';
import { DEFAULT_CHECKPOINT_EVERY, DEFAULT_LOCK_TTL_MS } from '../pipeline/evaluateStored.ts';
import type { LiveEvent } from '../pipeline/liveEvent.ts';
import type { ComponentStore, GroupLedger } from '../pipeline/ports.ts';
import { Partitions } from '../redis/keys.ts';
import { RedisIncidents } from '../redis/redisIncidents.ts';
import { RedisStore, type RedisConnection } from '../redis/redisStore.ts';
import type { Logger } from '../telemetry/logger.ts';
import type { Metrics } from '../telemetry/metrics.ts';
import type { EvaluationRunnerDeps } from './evaluationRunner.ts';
import { DeliveryRetry } from '../channels/errors.ts';
import type { NotificationChannels } from '../channels/openChannels.ts';
import { configuredChannels } from '../channels/registry.ts';
import { startOutboxRelay, type EscalateJobData } from './outboxRelay.ts';
import { queuedResultTaker, type QueuedResultTaker } from './queuedResultTaker.ts';
import { escalateProcessor } from './processors/escalateProcessor.ts';
import { evaluateProcessor } from './processors/evaluateProcessor.ts';
import { FLOOD_SUMMARY_JOB, notifyProcessor } from './processors/notifyProcessor.ts';
import { DEFAULT_FLOOD_CONTROL } from '../domain/escalationConfig.ts';
import { DeliveryLedger } from '../redis/deliveryLedger.ts';
import { FloodLedger } from '../redis/floodLedger.ts';
import { EvaluationThreadPool } from './evaluationThreadPool.ts';
import { historyProcessor } from './processors/historyProcessor.ts';
import type { RedisTarget } from '../redis/target.ts';
import { resultsProcessor } from './processors/resultsProcessor.ts';
import { groupOf } from '../domain/settings.ts';
import { arrivalLimit } from './arrivalLimit.ts';
import { activeJobs, type GroupOf } from './arrivalOrder.ts';
import { DEFAULT_ARRIVAL_WAIT_MS, ResultBatches } from './resultBatches.ts';
import { DEFAULT_EVALUATE_RETRY_MS, openPartitionedQueues, openSharedQueue, QUEUE_NAMES, resolveQueueSettings, type QueueSettings } from './queues.ts';

export interface WorkerSettings extends QueueSettings {
  /** Key partitions, as configured (`redis.partitions`). Default 1. */
  partitions?: number;
  /**
   * Results jobs this process takes at once, per partition: each is stored at once, and their evaluations are judged
   * together in batches (resultBatches.ts), so that a backlog costs about one commit per component and batch. A
   * job is done when its batch has committed. Default 1000 (BENCHMARKS.md, *Live results judged in batches*).
   */
  resultsConcurrency?: number;
  /**
   * Several worker processes judge the results in the order they arrived, across partitions (resultBatches.ts,
   * arrivalOrder.ts; off with `wearshift worker --no-arrival-order`). Default true; with one process and one partition
   * it changes nothing but a read of the queue's active jobs per batch (README, *Several worker processes judge in arrival order*).
   */
  arrivalOrder?: boolean;
  /**
   * Longest wait of a batch of results for results that arrived before it and that another worker process holds
   * (resultBatches.ts): processes judge the results in arrival order, so that a burst spanning sampling
   * months gives the verdicts of one process. After the wait a batch judges without them. Default 90 000 ms (a dead
   * worker's jobs come back within about a minute: `jobLockMs` plus up to two stall checks).
   */
  arrivalWaitMs?: number;
  /** Components this process evaluates at once from the evaluate queue, per partition. Default 2. */
  evaluateConcurrency?: number;
  /** Lifetime of a component's evaluation lock, renewed at a third of it. Default 30 000 ms. */
  lockTtlMs?: number;
  /** Delay before trying again an evaluation whose component another worker is evaluating. Default 200 ms. */
  busyRetryMs?: number;
  /** A sparse checkpoint every this many samples of a component. Default 50. */
  checkpointEvery?: number;
  /**
   * Notifications of one channel kind (e-mail, webhook, MQTT) this process delivers at once; each configured kind has
   * this many slots of its own, so that a receiver that hangs holds only its own kind's (notifyProcessor.ts,
   * `channelSlots`). Also the escalation checks run at once. Default 4.
   */
  notifyConcurrency?: number;
  /** Delivery attempts of one notification (backoff from 5 s, doubling, at most an hour apart). Default 20. */
  notifyAttempts?: number;
  /** How often the incident outbox is looked at besides after each evaluation. Default 1000 ms. */
  outboxIntervalMs?: number;
  /**
   * Threads that evaluate the components of a history job's month in place of this one (evaluationThreadPool.ts),
   * each with its own Redis connection: a history import then uses more than one core. 0: the worker's own thread
   * evaluates them. Needs `WorkerDeps.target` and the Redis store. Default 0 here; `wearshift worker` and `serve`
   * default to the machine's cores, at most 4 (runService.ts). Threads start at the first history evaluation and end
   * after a minute without one.
   */
  historyThreads?: number;
  /**
   * How often a job may be taken over from a worker that stopped renewing its lock (the process died or was killed
   * mid-job, or its event loop stood still longer than `jobLockMs`) before it is failed with "job stalled more than
   * allowable limit", which `wearshift failed list` shows and the worker logs as a final failure. A take-over is no
   * failed attempt and spends none of the job's attempts; BullMQ's default of 1 would fail a notification whose
   * workers die twice during its delivery with most of its attempts left. Default: the queue's attempt budget,
   * `notifyAttempts` (20) for notify and `attempts` (5) for results, history, evaluate and escalate; still a limit,
   * so that a job that brings down every worker taking it ends in the failed list instead of going round for ever.
   */
  maxStalledCount?: number;
  /**
   * How long a job's lock lasts unless its worker renews it (every half of it): a worker that died leaves its jobs to
   * the others this long after its last renewal, at most `stalledCheckMs` later. Default 30 000 ms (BullMQ's).
   */
  jobLockMs?: number;
  /** How often a worker looks for jobs whose lock has lapsed, to hand them to the next worker. Default 30 000 ms (BullMQ's). */
  stalledCheckMs?: number;
}

export const WORKER_DEFAULTS = {
  partitions: 1,
  resultsConcurrency: 1000,
  arrivalOrder: true,
  arrivalWaitMs: DEFAULT_ARRIVAL_WAIT_MS,
  evaluateConcurrency: 2,
  lockTtlMs: DEFAULT_LOCK_TTL_MS,
  busyRetryMs: DEFAULT_EVALUATE_RETRY_MS,
  checkpointEvery: DEFAULT_CHECKPOINT_EVERY,
  notifyConcurrency: 4,
  notifyAttempts: 20,
  outboxIntervalMs: 1000,
  historyThreads: 0,
  jobLockMs: 30_000,
  stalledCheckMs: 30_000,
} as const;

export interface WorkerDeps {
  /** A connection made with `connectRedis(url, 'worker')` (no request retry limit, as BullMQ workers need), or a Cluster. */
  readonly connection: RedisConnection;
  readonly config: Config;
  readonly logger: Logger;
  readonly metrics?: Metrics;
  /** Channels for the notify queue; without them this process delivers no notifications. */
  readonly channels?: NotificationChannels;
  /** Public address of the HTTP API, for the incident links in messages. */
  readonly apiBaseUrl?: string;
  /** Told about stored results and incident changes, for live views. */
  readonly live?: (event: LiveEvent) => void;
  /** Processing clock, epoch ms. Default `Date.now`. */
  readonly now?: () => number;
  /** The store and group ledger. Default: the Redis store on `connection` with the same prefix and partitions. */
  readonly store?: ComponentStore & GroupLedger;
  /** The Redis or Redis Cluster `connection` talks to, for the connections of evaluation threads (`historyThreads`). */
  readonly target?: RedisTarget;
}

export interface RunningWorkers {
  readonly workers: readonly Worker[];
  /**
   * Stops taking jobs, closes the channels (ending deliveries in flight, which are retried later), waits for the
   * active jobs to finish, closes the queues this process opened.
   */
  close(): Promise<void>;
}

export function startWorkers(deps: WorkerDeps, settings: WorkerSettings = {}): RunningWorkers {
  const queueSettings = resolveQueueSettings(settings);
  const s = { ...WORKER_DEFAULTS, ...settings };
  const now = deps.now ?? Date.now;
  const partitions = new Partitions(queueSettings.prefix, s.partitions);
  const { logger, metrics } = deps;
  designConfiguredCharts(deps.config);
  const store = deps.store ?? new RedisStore(deps.connection, { prefix: queueSettings.prefix, partitions: s.partitions, config: deps.config });
  const incidents = new RedisIncidents(deps.connection, { rules: incidentRules(deps.config), prefix: queueSettings.prefix, partitions: s.partitions });
  const evaluateQueues = openPartitionedQueues(QUEUE_NAMES.evaluate, deps.connection, queueSettings, partitions);
  const notifyQueue = openSharedQueue(QUEUE_NAMES.notify, deps.connection, { ...queueSettings, attempts: s.notifyAttempts }, partitions);
  const escalateQueue = openSharedQueue(QUEUE_NAMES.escalate, deps.connection, queueSettings, partitions);
  const relay = startOutboxRelay(incidents, { notify: notifyQueue, escalate: escalateQueue }, logger, { intervalMs: s.outboxIntervalMs });
  const name = `${hostname()}:${process.pid}`;
  const options = (prefix: string, concurrency: number, attempts: number) => ({
    connection: deps.connection,
    prefix,
    removeOnComplete: queueSettings.keepCompleted,
    removeOnFail: queueSettings.keepFailed,
    // Stored on every job this process handles, so that an operator can tell which process did what.
    name,
    concurrency,
    lockDuration: s.jobLockMs,
    stalledInterval: s.stalledCheckMs,
    maxStalledCount: s.maxStalledCount ?? attempts,
  });
  const runner: EvaluationRunnerDeps = {
    store,
    ledger: store,
    config: deps.config,
    rules: incidentRules(deps.config),
    now,
    lockTtlMs: s.lockTtlMs,
    checkpointEvery: s.checkpointEvery,
    partitions,
    evaluateQueues,
    logger,
    ...(metrics && { metrics }),
    ...(deps.live && { live: deps.live }),
    onEffects: () => relay.kick(),
  };

  let pool: EvaluationThreadPool | undefined;
  if (s.historyThreads > 0) {
    if (deps.target === undefined || deps.store !== undefined) throw new Error('historyThreads: the evaluation threads need the Redis target (WorkerDeps.target) and the Redis store');
    pool = new EvaluationThreadPool({
      threads: s.historyThreads,
      target: deps.target,
      prefix: queueSettings.prefix,
      partitions: s.partitions,
      config: deps.config,
      lockTtlMs: s.lockTtlMs,
      checkpointEvery: s.checkpointEvery,
    });
  }
  const threads = pool;
  const historyRunner: EvaluationRunnerDeps = threads === undefined ? runner : { ...runner, evaluator: (ref) => threads.evaluate(ref, now()) };

  const workers: Worker[] = [];
  // A result given back by a dead worker, or waiting on a partition's queue behind the others, that no slot frees for
  // is taken outside the slots (queuedResultTaker.ts), by partition.
  const takers: QueuedResultTaker[] = [];
  // One set of batches for every partition's results: with arrivalOrder, the results are judged in the order they
  // arrived, across the partitions' queues and across processes (arrivalOrder.ts).
  // A result waits only for earlier results of its own group (or component): the groups as the configuration makes them.
  const groups: GroupOf = (c) => groupOf(deps.config, c);
  const resultsQueueKeys = partitions.all().map((p) => `${partitions.tag(p)}:${QUEUE_NAMES.results}`);
  const batches = new ResultBatches(runner, {
    retryMs: s.busyRetryMs,
    ...(s.arrivalOrder && {
      activeJobs: activeJobs(deps.connection, resultsQueueKeys, groups),
      groupOf: groups,
      takeQueued: (p: number) => takers[p]!.take(),
    }),
    arrivalWaitMs: s.arrivalWaitMs,
  });
  const processor = resultsProcessor(runner, s.busyRetryMs, batches);
  // Evaluate jobs leave the results other processes (or this one) have not judged yet, and later months of their group,
  // to the batches that judge them (arrivalLimit.ts).
  const evaluateInOrder = s.arrivalOrder
    ? {
        limit: arrivalLimit(activeJobs(deps.connection, resultsQueueKeys, groups)),
        waitMs: s.arrivalWaitMs,
      }
    : undefined;
  for (const p of partitions.all()) {
    const prefix = partitions.tag(p);
    const resultsOptions = options(prefix, s.resultsConcurrency, queueSettings.attempts);
    if (s.arrivalOrder) takers.push(queuedResultTaker(QUEUE_NAMES.results, processor, resultsOptions, logger));
    workers.push(new Worker(QUEUE_NAMES.results, processor, resultsOptions));
    workers.push(new Worker(QUEUE_NAMES.evaluate, evaluateProcessor(runner, s.busyRetryMs, evaluateInOrder), options(prefix, s.evaluateConcurrency, queueSettings.attempts)));
  }
  // One history job at a time, for every partition (the producer sets the queue's global concurrency to 1 as well).
  workers.push(new Worker(QUEUE_NAMES.history, historyProcessor(historyRunner, s.busyRetryMs), options(partitions.sharedTag(), 1, queueSettings.attempts)));
  workers.push(new Worker(QUEUE_NAMES.escalate, escalateProcessor(incidents, now, () => relay.kick()) as Processor, options(partitions.sharedTag(), s.notifyConcurrency, queueSettings.attempts)));
  const channels = deps.channels;
  if (channels !== undefined) {
    workers.push(
      new Worker(
        QUEUE_NAMES.notify,
        notifyProcessor({
          store,
          ledger: store,
          config: deps.config,
          channels,
          apiBaseUrl: deps.apiBaseUrl ?? 'http://localhost:8080',
          logger,
          deliveries: new DeliveryLedger(deps.connection, queueSettings.prefix),
          incidents,
          now,
          ...(deps.live && { live: deps.live }),
          channelSlots: { perKind: s.notifyConcurrency },
          flood: {
            settings: deps.config.channels.floodControl ?? DEFAULT_FLOOD_CONTROL,
            ledger: new FloodLedger(deps.connection, queueSettings.prefix),
            now,
            scheduleSummary: async (data, jobId, delay) => {
              await notifyQueue.add(FLOOD_SUMMARY_JOB, data as never, { jobId, delay, backoff: { type: 'delivery' } });
            },
          },
        }) as Processor,
        {
        // Every configured kind's share, so that each may fill its own while another's are stuck; a job of a kind
        // whose share is full is put back at once and frees its slot for the next.
        ...options(partitions.sharedTag(), s.notifyConcurrency * Math.max(1, configuredChannels(deps.config.channels).length), s.notifyAttempts),
        settings: {
          // The receiver's Retry-After wins (held between 5 s and an hour); otherwise exponential backoff with full jitter.
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
      // The workers stop taking jobs at once; the channels then end the deliveries in flight (an e-mail to a server
      // that does not answer would otherwise hold the shutdown up to its deadline), whose jobs fail as retryable and
      // run again later, before the workers wait for their active jobs to finish.
      const stopping = Promise.all([...workers.map((w) => w.close()), ...takers.map((t) => t.close())]);
      await channels?.close();
      await stopping;
      await pool?.close();
      await relay.close();
      await Promise.all([...evaluateQueues, notifyQueue, escalateQueue].map((q: Queue) => q.close()));
    },
  };
}

export type { NotifyEffect, EscalateJobData };
