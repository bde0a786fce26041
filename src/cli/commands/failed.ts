/** `wearshift failed list|retry`: failed jobs with their reasons, and retrying them once the cause is fixed. */
import type { Command } from 'commander';
import type { Config } from '../../domain/config.ts';
import { loadConfig } from '../../runtime/loadConfig.ts';
import { InputError } from '../../domain/errors.ts';
import { ALL_QUEUES, isQueueName, listFailedJobs, retryAllFailedJobs, retryFailedJob } from '../../queue/failedJobs.ts';
import type { QueueName } from '../../queue/queues.ts';
import { closeQuietly, connectForCommand, redisTarget, type RedisConnection as Redis } from '../../redis/connection.ts';
import { formatTable, writeJsonLine, redisChoice } from '../output.ts';
import { terminalText } from '../terminalText.ts';

interface FailedOptions {
  config?: string;
  json?: boolean;
  queue?: string;
  all?: boolean;
}

async function withRedis<T>(opts: FailedOptions, work: (redis: Redis, config: Config) => Promise<T>): Promise<T> {
  const config = loadConfig(opts.config ?? process.env.WEARSHIFT_CONFIG);
  process.stderr.write(`wearshift: ${redisChoice(config)}\n`);
  const redis = await connectForCommand(redisTarget(config));
  try {
    return await work(redis, config);
  } finally {
    await closeQuietly(redis);
  }
}

function queuesOf(opts: FailedOptions): QueueName[] {
  if (opts.queue === undefined) return [...ALL_QUEUES];
  if (!isQueueName(opts.queue)) throw new InputError(`--queue: expected one of ${ALL_QUEUES.join(', ')}, got "${opts.queue}"`);
  return [opts.queue];
}

export function registerFailed(program: Command): void {
  const failed = program.command('failed');
  failed
    .command('list')
    .description('list failed jobs (newest first per queue)')
    .option('--config <file>', 'configuration file (default: WEARSHIFT_CONFIG)')
    .option('--queue <name>', `only this queue: ${ALL_QUEUES.join(', ')}`)
    .option('--json', 'one JSON object per job')
    .action((opts: FailedOptions) =>
      withRedis(opts, async (redis, config) => {
        const jobs = await listFailedJobs(redis, config.redis.prefix, queuesOf(opts), 1000, config.redis.partitions);
        if (opts.json) return jobs.forEach((j) => writeJsonLine(j));
        if (jobs.length === 0) return void process.stdout.write('no failed jobs\n');
        const rows = jobs.map((j) => [j.ref, j.subject ?? '', j.failedAt?.slice(0, 19).replace('T', ' ') ?? '', j.attempts, j.reason]);
        // What a job is about and why it failed can quote what a producer sent: shown escaped, never acting on the terminal.
        process.stdout.write(terminalText(formatTable(['job', 'about', 'failed at', 'attempts', 'reason'], rows)));
      }),
    );
  failed
    .command('retry')
    .description('retry one failed job (QUEUE/ID as listed, or ID of the results queue) or all of them')
    .argument('[job]', 'QUEUE/ID as `failed list` shows it')
    .option('--all', 'retry every failed job (of --queue, or of every queue)')
    .option('--queue <name>', `with --all: only this queue: ${ALL_QUEUES.join(', ')}`)
    .option('--config <file>', 'configuration file (default: WEARSHIFT_CONFIG)')
    .option('--json', 'a JSON summary')
    .action((job: string | undefined, opts: FailedOptions) =>
      withRedis(opts, async (redis, config) => {
        if (opts.all) {
          const n = await retryAllFailedJobs(redis, config.redis.prefix, queuesOf(opts), config.redis.partitions);
          if (opts.json) writeJsonLine({ retried: n });
          else process.stdout.write(`${n} failed job${n === 1 ? '' : 's'} back on the queue\n`);
          return;
        }
        if (job === undefined) throw new InputError('name a job (QUEUE/ID as `failed list` shows it) or give --all');
        const [label, id] = job.includes('/') ? [job.slice(0, job.indexOf('/')), job.slice(job.indexOf('/') + 1)] : ['results', job];
        const [queue, part] = label.split('.');
        if (queue === undefined || !isQueueName(queue)) throw new InputError(`${job}: unknown queue "${label}"; expected one of ${ALL_QUEUES.join(', ')}`);
        const partition = part === undefined ? undefined : Number(part);
        if (!(await retryFailedJob(redis, config.redis.prefix, queue, id, config.redis.partitions, partition))) throw new InputError(`${job}: no such failed job`);
        if (opts.json) writeJsonLine({ retried: 1, job });
        else process.stdout.write(`${job} back on the queue\n`);
      }),
    );
}
