/**
 * The producer: the way in for integrators who feed results from their own Node.js code rather than over
 * HTTP. It validates every record exactly as the HTTP intake and the worker do, enqueues the valid ones on
 * the `results` queue and tells, record by record, what happened.
 */
import { randomBytes } from 'node:crypto';
import type { Queue } from 'bullmq';
import { connectRedis, type RedisConnection, type RedisTarget } from '../redis/connection.ts';
import { arrivalCounterKey, Partitions } from '../redis/keys.ts';
import { arrivalJobId } from './arrivalOrder.ts';
import { DEFAULT_HISTORY_JOB_SIZE, HISTORY_JOB, openPartitionedQueues, openSharedQueue, QUEUE_NAMES, resolveQueueSettings, type HistoryJobData, type QueueSettings } from './queues.ts';
import { validateBatch, type RecordOutcome, type ValidatedRecord, type ValidationOptions } from '../intake/validate.ts';
import { intakeJobName, type IntakePath } from './intakePaths.ts';
import { revisionConflicts } from '../redis/revisionConflicts.ts';

export interface ResultProducerOptions extends Pick<QueueSettings, 'prefix' | 'attempts' | 'backoffMs' | 'keepCompleted' | 'keepFailed'> {
  /** A Redis URL (`redis://host:6379/0`), a cluster's seed nodes, or an ioredis connection the caller owns (and closes). */
  connection: string | RedisTarget | RedisConnection;
  /** Key partitions, as the workers use them (configuration `redis.partitions`). Default 1. */
  partitions?: number;
  /** The clock for the "not in the future" check. Default `Date.now`. */
  now?: () => number;
  /** How far ahead of the clock a sampledAt may lie. Default one day. */
  maxAheadMs?: ValidationOptions['maxAheadMs'];
  /**
   * With a URL or seed nodes: how long one Redis command may wait for its answer before `add` rejects (a Redis that
   * holds the socket open but does not answer). Default 2 000 ms (`REQUEST_COMMAND_TIMEOUT_MS`). A connection the
   * caller hands over keeps its own settings.
   */
  commandTimeoutMs?: number;
  /**
   * The way the results come in, carried by every job this producer enqueues: the worker counts the records of
   * `import` and `producer` jobs in `wearshift_results_accepted_total{path}` (the API counts its own, `http`, as it
   * accepts them). Default `producer`.
   */
  origin?: IntakePath;
}

export interface ResultProducer {
  /**
   * Validates and enqueues one result event or an array of them. Resolves with one outcome per record, in
   * order: `accepted` records are on the queue; `rejected` ones carry `errors: [{ path, reason }]` and were
   * not enqueued. Rejects only when Redis cannot take the accepted records or does not answer within the command
   * timeout; a large batch is written in parts (`WRITE_PART_RECORDS`), so some of its records may be on the queue by
   * then, and after a timeout the part at hand may yet arrive: adding the batch again is harmless, a result enqueued
   * twice is stored once.
   */
  add(events: unknown): Promise<RecordOutcome[]>;
  /**
   * Enqueues records that `validateBatch` (or `validateResult`) already accepted, without validating them again:
   * for a caller that reports validation in its own terms (the import command names the line, or the lab
   * file's row and column). Resolves with one outcome per record, in order: `accepted`, or `rejected` with
   * `conflict: true` when its sampleId and revision are already stored with other content. The workers still
   * validate every job they take.
   */
  enqueue(records: readonly ValidatedRecord[]): Promise<RecordOutcome[]>;
  /**
   * `enqueue` for a history (years of old results, an import): the records go in jobs of up to `perJob` results
   * (default 10 000; one `history` queue for all partitions, in the order given), which a worker stores and evaluates one sampling month at a time, each component
   * once per month of the job rather than once per result. Best in sampling-time order, as a lab export lists them;
   * any order gives the same verdicts. Live results go one job each (`add`, `enqueue`).
   */
  enqueueHistory(records: readonly ValidatedRecord[], perJob?: number): Promise<RecordOutcome[]>;
  /** Closes the queue, and the connection when the producer opened it. */
  close(): Promise<void>;
}

/**
 * Most results written to Redis by one command (a part's bulk add, one transaction per partition): a batch of any size
 * (5 000 records in one HTTP request, a whole file from `enqueue`) is written in parts of at most this many, one after
 * the other. Each command then costs what a small request costs, far within the command timeout of a request
 * connection (`REQUEST_COMMAND_TIMEOUT_MS`, 2 s) however large the batch, and a timeout still means a Redis that does
 * not answer, not a batch that is merely long. A history job holds more results and is written by itself.
 */
export const WRITE_PART_RECORDS = 250;

/** Consecutive parts of `items` holding at most `WRITE_PART_RECORDS` results each; an item over that is a part of its own. */
function writeParts<T>(items: readonly T[], results: (item: T) => number): T[][] {
  const parts: T[][] = [];
  let part: T[] = [];
  let size = 0;
  for (const item of items) {
    const n = results(item);
    if (part.length > 0 && size + n > WRITE_PART_RECORDS) {
      parts.push(part);
      part = [];
      size = 0;
    }
    part.push(item);
    size += n;
  }
  if (part.length > 0) parts.push(part);
  return parts;
}

/**
 * Creates a producer of lab results.
 *
 * ```ts
 * import { createResultProducer } from 'wearshift';
 *
 * const producer = createResultProducer({ connection: process.env.REDIS_URL!, prefix: '{wearshift}' });
 * const outcomes = await producer.add({
 *   sampleId: 'LAB-000123', unit: 'PS2-P3', component: 'gearbox', sampledAt: '2026-03-01T08:00:00Z',
 *   oilHours: 250, readings: { Fe: 12, Cu: 3, Si: '<1' },
 * });
 * // [{ index: 0, sampleId: 'LAB-000123', status: 'accepted' }]
 * await producer.close();
 * ```
 *
 * Use the same `prefix` as the workers (configuration `redis.prefix`, default `{wearshift}`). Delivery is
 * at least once: adding a result twice is harmless, the store keeps one copy per sampleId and revision.
 */
export function createResultProducer(options: ResultProducerOptions): ResultProducer {
  const given = options.connection;
  const ownConnection = typeof given === 'string' || (typeof given === 'object' && 'kind' in given);
  const redis = ownConnection
    ? connectRedis(given as string | RedisTarget, 'request', undefined, { ...(options.commandTimeoutMs !== undefined && { commandTimeoutMs: options.commandTimeoutMs }) })
    : (given as RedisConnection);
  const settings = resolveQueueSettings(options);
  const partitions = new Partitions(settings.prefix, options.partitions ?? 1);
  const queues: Queue[] = openPartitionedQueues(QUEUE_NAMES.results, redis, settings, partitions);
  const historyQueue = openSharedQueue(QUEUE_NAMES.history, redis, settings, partitions);
  // Set once per producer, before its first history job: one history job at a time across all workers.
  let historyReady: Promise<unknown> | undefined;
  const now = options.now ?? Date.now;
  const origin = options.origin ?? 'producer';
  // The unique part of the job ids of results numbered across partitions (`arrivalJobId`): this producer's own tag and
  // a count of its jobs.
  const producerTag = randomBytes(5).toString('hex');
  let jobsNumbered = 0;
  const enqueue = async (records: readonly ValidatedRecord[], perJob?: number): Promise<Map<number, RecordOutcome>> => {
    // A sampleId and revision already stored (or earlier in the request) with other content is refused, not lost silently.
    // Once the connection is ready, as the queue waits for it: a request connection has no offline queue.
    if (records.length === 0) return new Map();
    await queues[0]!.waitUntilReady();
    const conflicts = await revisionConflicts(redis, partitions, records);
    const accepted = records.filter((r) => !conflicts.has(r.index));
    // Written part by part, one after the other, so that no Redis command grows with the batch (see WRITE_PART_RECORDS).
    // When a part fails, the parts before it stay on the queue: the caller sends the batch again, and a result that
    // arrives twice is stored once.
    if (perJob !== undefined) {
      // History jobs, in the order given, whatever the partitions: one queue for all of them. A completed history job
      // is removed at once: its data is the whole batch of results, stored by then.
      const jobs: Array<{ name: string; data: HistoryJobData; opts: { removeOnComplete: true } }> = [];
      for (let i = 0; i < accepted.length; i += perJob) jobs.push({ name: intakeJobName(HISTORY_JOB, origin), data: { records: accepted.slice(i, i + perJob).map((r) => r.event) }, opts: { removeOnComplete: true } });
      for (const part of writeParts(jobs, (job) => job.data.records.length)) await historyQueue.addBulk(part);
    } else {
      for (const part of writeParts(accepted, () => 1)) {
        // With several partitions, the part's results are numbered in the order given, across all partitions' queues,
        // and that number is each one's job id: the workers judge the results in that order (arrivalOrder.ts). With
        // one, the queue's own job ids are that order.
        const first = partitions.count > 1 ? (await redis.incrby(arrivalCounterKey(partitions), part.length)) - part.length + 1 : undefined;
        // Each result goes to its component's partition (one bulk add per partition).
        const byPartition = new Map<number, Array<{ name: string; data: unknown; opts?: { jobId: string } }>>();
        part.forEach((r, i) => {
          const p = partitions.of(r.sample);
          const job = { name: intakeJobName('result', origin), data: r.event, ...(first !== undefined && { opts: { jobId: arrivalJobId(first + i, `${producerTag}${(jobsNumbered++).toString(36)}`) } }) };
          const list = byPartition.get(p);
          if (list === undefined) byPartition.set(p, [job]);
          else list.push(job);
        });
        await Promise.all([...byPartition].map(([p, list]) => queues[p]!.addBulk(list)));
      }
    }
    const issues = new Map<number, RecordOutcome>();
    for (const [index, issue] of conflicts) {
      const sampleId = records.find((r) => r.index === index)?.sample.sampleId;
      issues.set(index, { index, ...(sampleId !== undefined && { sampleId }), status: 'rejected', conflict: true, errors: [issue] });
    }
    return issues;
  };
  return {
    async add(events) {
      const records = Array.isArray(events) ? events : [events];
      const validated = validateBatch(records, { now: now(), ...(options.maxAheadMs !== undefined && { maxAheadMs: options.maxAheadMs }) });
      const conflicts = await enqueue(validated.accepted);
      return validated.outcomes.map((o) => conflicts.get(o.index) ?? o);
    },
    async enqueue(records) {
      const conflicts = await enqueue(records);
      return records.map((r) => conflicts.get(r.index) ?? { index: r.index, sampleId: r.sample.sampleId, status: 'accepted' });
    },
    async enqueueHistory(records, perJob = DEFAULT_HISTORY_JOB_SIZE) {
      if (!(Number.isInteger(perJob) && perJob >= 1)) throw new RangeError(`results per history job must be a whole number from 1, got ${perJob}`);
      historyReady ??= historyQueue.setGlobalConcurrency(1);
      await historyReady;
      const conflicts = await enqueue(records, perJob);
      return records.map((r) => conflicts.get(r.index) ?? { index: r.index, sampleId: r.sample.sampleId, status: 'accepted' });
    },
    async close() {
      await Promise.all([...queues, historyQueue].map((q) => q.close()));
      if (ownConnection) await redis.quit().catch(() => redis.disconnect());
    },
  };
}
