/**
 * A bare BullMQ worker in a process of its own: takes jobs and does nothing with them, the floor any BullMQ
 * pipeline pays per job on this machine and this Redis. Settings from the environment: REDIS_URL, BENCH_PREFIX,
 * BENCH_QUEUE, BENCH_CONCURRENCY. Stops on SIGTERM.
 *
 * Its connection is a plain ioredis client with the options BullMQ asks of a worker's, as a BullMQ user would open
 * it, not the product's (src/redis/connection.ts, whose writes are coalesced): the baseline is BullMQ as it comes.
 */
import { Worker } from 'bullmq';
import { Redis } from 'ioredis';

const connection = new Redis(process.env.REDIS_URL ?? '', { maxRetriesPerRequest: null });
const worker = new Worker(process.env.BENCH_QUEUE ?? 'bare', async () => undefined, {
  connection,
  prefix: process.env.BENCH_PREFIX ?? '{bench}',
  concurrency: Number(process.env.BENCH_CONCURRENCY ?? 8),
  removeOnComplete: { count: 1000 },
});
process.once('SIGTERM', () => {
  void worker.close().then(() => connection.quit()).finally(() => process.exit(0));
});
