/**
 * The producer: the way in for integrators who feed results from their own Node.js code rather than over
 * HTTP. It validates every record exactly as the HTTP intake and the worker do, enqueues the valid ones on
 * the `results` queue and tells, record by record, what happened.
 */
import { Queue } from 'bullmq';
import type { Redis } from 'ioredis';
import { connectRedis } from '../runtime/redis.ts';
import { openQueue, QUEUE_NAMES, resolveQueueSettings, type QueueSettings } from '../queue/queues.ts';
import { validateBatch, type RecordOutcome, type ValidationOptions } from './validate.ts';

export interface ResultProducerOptions extends Pick<QueueSettings, 'prefix' | 'attempts' | 'backoffMs' | 'keepCompleted' | 'keepFailed'> {
  /** A Redis URL (`redis://host:6379/0`) or an ioredis connection the caller owns (and closes). */
  connection: string | Redis;
  /** The clock for the "not in the future" check. Default `Date.now`. */
  now?: () => number;
  /** How far ahead of the clock a sampledAt may lie. Default one day. */
  maxAheadMs?: ValidationOptions['maxAheadMs'];
}

export interface ResultProducer {
  /**
   * Validates and enqueues one result event or an array of them. Resolves with one outcome per record, in
   * order: `accepted` records are on the queue; `rejected` ones carry `errors: [{ path, reason }]` and were
   * not enqueued. Rejects only when Redis cannot take the accepted records (then none of them was enqueued).
   */
  add(events: unknown): Promise<RecordOutcome[]>;
  /** Closes the queue, and the connection when the producer opened it. */
  close(): Promise<void>;
}

/**
 * Creates a producer of lab results.
 *
 * ```ts
 * import { createResultProducer } from 'wearshift/src/intake/producer.ts';
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
  const ownConnection = typeof options.connection === 'string';
  const redis = typeof options.connection === 'string' ? connectRedis(options.connection, 'request') : options.connection;
  const queue: Queue = openQueue(QUEUE_NAMES.results, redis, resolveQueueSettings(options));
  const now = options.now ?? Date.now;
  return {
    async add(events) {
      const records = Array.isArray(events) ? events : [events];
      const { outcomes, accepted } = validateBatch(records, { now: now(), ...(options.maxAheadMs !== undefined && { maxAheadMs: options.maxAheadMs }) });
      if (accepted.length > 0) await queue.addBulk(accepted.map((r) => ({ name: 'result', data: r.event })));
      return outcomes;
    },
    async close() {
      await queue.close();
      if (ownConnection) await redis.quit().catch(() => redis.disconnect());
    },
  };
}
