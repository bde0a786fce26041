/**
 * A bare BullMQ worker in a process of its own: takes jobs and does nothing with them, the floor any BullMQ
 * pipeline pays per job on this machine and this Redis. Settings from the environment: REDIS_URL, BENCH_PREFIX,
 * BENCH_QUEUE, BENCH_CONCURRENCY. Stops on SIGTERM.
 */
import { Worker } from 'bullmq';
import { connectRedis } from '../src/redis/connection.ts';

const connection = connectRedis(process.env.REDIS_URL ?? '', 'worker');
const worker = new Worker(process.env.BENCH_QUEUE ?? 'bare', async () => undefined, {
  connection,
  prefix: process.env.BENCH_PREFIX ?? '{bench}',
  concurrency: Number(process.env.BENCH_CONCURRENCY ?? 8),
  removeOnComplete: { count: 1000 },
});
process.once('SIGTERM', () => {
  void worker.close().then(() => connection.quit()).finally(() => process.exit(0));
});
