/**
 * `wearshift failed list|retry|webhooks|enable-webhook`: failed jobs with their reasons, retrying them once the cause
 * is fixed, and the webhook endpoints a 410 Gone disabled, which fail every message to them until enabled again.
 */
import type { Command } from 'commander';
import type { Config } from '../../domain/config.ts';
import { InputError } from '../../domain/errors.ts';
import { ALL_QUEUES, isQueueName, listFailedJobs, retryAllFailedJobs, retryFailedJob } from '../../queue/failedJobs.ts';
import type { QueueName } from '../../queue/queues.ts';
import { withRedis } from '../commandRedis.ts';
import { enableEndpoint, listDisabledEndpoints, type DisabledEndpoint } from '../../redis/disabledEndpoints.ts';
import { formatTable, writeJsonLine } from '../output.ts';
import { terminalText } from '../terminalText.ts';
import { formatTime, timeZoneNote } from '../../notify/format.ts';

interface FailedOptions {
  config?: string;
  json?: boolean;
  queue?: string;
  all?: boolean;
}

function queuesOf(opts: FailedOptions): QueueName[] {
  if (opts.queue === undefined) return [...ALL_QUEUES];
  if (!isQueueName(opts.queue)) throw new InputError(`--queue: expected one of ${ALL_QUEUES.join(', ')}, got "${opts.queue}"`);
  return [opts.queue];
}

/** Where a disabled endpoint stands against the configuration: still disabled, or no longer (its URL changed, or it is gone). */
function standing(endpoint: DisabledEndpoint, config: Config): 'disabled' | 'url changed' | 'not configured' {
  const configured = config.channels.webhooks.find((w) => w.name === endpoint.name);
  if (configured === undefined) return 'not configured';
  return endpoint.appliesTo(configured.url) ? 'disabled' : 'url changed';
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
        if (jobs.length === 0) process.stdout.write('no failed jobs\n');
        else {
          const zone = config.display.timeZone;
          // When it failed in the site zone with its offset, as every time the command line shows.
          const rows = jobs.map((j) => [j.ref, j.subject ?? '', j.failedAt === undefined ? '' : formatTime(j.failedAt, zone), j.attempts, j.reason]);
          // What a job is about and why it failed can quote what a producer sent: shown escaped, never acting on the terminal.
          process.stdout.write(terminalText(formatTable(['job', 'about', 'failed at', 'attempts', 'reason'], rows)));
          process.stdout.write(`${timeZoneNote(zone)}\n`);
        }
        const disabled = (await listDisabledEndpoints(redis, config.redis.prefix)).filter((e) => standing(e, config) === 'disabled');
        if (disabled.length > 0) {
          const names = disabled.map((e) => e.name).join(', ');
          process.stdout.write(terminalText(`webhook endpoints disabled by 410 Gone, every message to them fails: ${names} (see \`wearshift failed webhooks\`)\n`));
        }
      }),
    );
  failed
    .command('retry')
    .description('retry one failed job (QUEUE/ID as listed, or ID of the results queue) or all of them')
    .argument('[job]', 'QUEUE/ID as `failed list` shows it')
    .option('--all', 'retry every failed job (of --queue, or of every queue); not with a named job')
    .option('--queue <name>', `with --all only: only this queue: ${ALL_QUEUES.join(', ')}`)
    .option('--config <file>', 'configuration file (default: WEARSHIFT_CONFIG)')
    .option('--json', 'a JSON summary')
    .action((job: string | undefined, opts: FailedOptions) => {
      // Contradictions are refused before Redis is asked: a named job and --all together would retry every failed job,
      // not the one named, and --queue alone would be ignored.
      if (opts.all && job !== undefined) throw new InputError(`name a job or give --all, not both: --all retries every failed job${opts.queue === undefined ? '' : ` of ${opts.queue}`}, not only ${job}`);
      if (opts.all) {
        const queues = queuesOf(opts);
        return withRedis(opts, async (redis, config) => {
          const n = await retryAllFailedJobs(redis, config.redis.prefix, queues, config.redis.partitions);
          if (opts.json) writeJsonLine({ retried: n });
          else process.stdout.write(`${n} failed job${n === 1 ? '' : 's'} back on the queue\n`);
        });
      }
      if (opts.queue !== undefined) throw new InputError(`--queue goes with --all; a named job carries its queue in its name (QUEUE/ID, e.g. ${opts.queue}/ID)`);
      if (job === undefined) throw new InputError('name a job (QUEUE/ID as `failed list` shows it) or give --all');
      const [label, id] = job.includes('/') ? [job.slice(0, job.indexOf('/')), job.slice(job.indexOf('/') + 1)] : ['results', job];
      const [queue, part] = label.split('.');
      if (queue === undefined || !isQueueName(queue)) throw new InputError(`${job}: unknown queue "${label}"; expected one of ${ALL_QUEUES.join(', ')}`);
      const partition = part === undefined ? undefined : Number(part);
      return withRedis(opts, async (redis, config) => {
        if (!(await retryFailedJob(redis, config.redis.prefix, queue, id, config.redis.partitions, partition))) throw new InputError(`${job}: no such failed job`);
        if (opts.json) writeJsonLine({ retried: 1, job });
        else process.stdout.write(`${job} back on the queue\n`);
      });
    });
  failed
    .command('webhooks')
    .description('list the webhook endpoints a 410 Gone disabled: every message to one fails until it is enabled again or its URL changes')
    .option('--config <file>', 'configuration file (default: WEARSHIFT_CONFIG)')
    .option('--json', 'one JSON object per endpoint')
    .action((opts: FailedOptions) =>
      withRedis(opts, async (redis, config) => {
        const endpoints = (await listDisabledEndpoints(redis, config.redis.prefix)).map((e) => ({ name: e.name, url: e.where ?? '', reason: e.reason, state: standing(e, config) }));
        if (opts.json) return endpoints.forEach((e) => writeJsonLine(e));
        if (endpoints.length === 0) return void process.stdout.write('no disabled webhook endpoints\n');
        process.stdout.write(terminalText(formatTable(['webhook', 'url', 'state', 'why'], endpoints.map((e) => [e.name, e.url, e.state, e.reason]))));
      }),
    );
  failed
    .command('enable-webhook')
    .description('enable a webhook endpoint a 410 Gone disabled (then `failed retry` sends the messages that failed meanwhile)')
    .argument('<name>', 'the webhook name in channels.webhooks')
    .option('--config <file>', 'configuration file (default: WEARSHIFT_CONFIG)')
    .option('--json', 'a JSON summary')
    .action((name: string, opts: FailedOptions) =>
      withRedis(opts, async (redis, config) => {
        if (!(await enableEndpoint(redis, config.redis.prefix, name))) throw new InputError(`${name}: no disabled webhook endpoint of that name (\`wearshift failed webhooks\` lists them)`);
        if (opts.json) writeJsonLine({ enabled: name });
        else process.stdout.write(terminalText(`${name} enabled: messages go to it again\n`));
      }),
    );
}
