/**
 * `wearshift sample-verdicts give <unit> <component> <sampleId> --verdict … --by …`: a responder's word on a sample
 * from the terminal, as `POST /v1/units/:unit/components/:component/samples/:sampleId/verdict` takes it (the same
 * SampleVerdicts: the same refusals, the same timeline entries, the same evaluation scheduled). The workers judge the
 * component again; the command does not wait for them.
 */
import type { Command } from 'commander';
import type { SampleMark } from '../../analysis/model.ts';
import { ActorNameSchema } from '../../domain/actorName.ts';
import { InputError } from '../../domain/errors.ts';
import { incidentRules } from '../../incidents/policy.ts';
import { openPartitionedQueues, QUEUE_NAMES, resolveQueueSettings } from '../../queue/queues.ts';
import { SampleVerdicts } from '../../queue/sampleVerdicts.ts';
import { refusalText } from '../../pipeline/wordRefusal.ts';
import { Partitions } from '../../redis/keys.ts';
import { RedisIncidents } from '../../redis/redisIncidents.ts';
import { RedisStore } from '../../redis/redisStore.ts';
import { livePublisher } from '../../runtime/liveBridge.ts';
import { createLogger } from '../../telemetry/logger.ts';
import { writeJsonLine } from '../output.ts';
import { withRedis } from '../commandRedis.ts';
import { terminalText } from '../terminalText.ts';

const VERDICTS = ['confirmed', 'rejected', 'usual-rate', 'withdrawn'] as const;

interface GiveOptions {
  verdict: string;
  by: string;
  config?: string;
  json?: boolean;
}

export function registerGive(parent: Command): void {
  parent
    .command('give <unit> <component> <sampleId>')
    .description("a responder's word on a sample, as the API takes it: confirmed or rejected (a sample in doubt), usual-rate (a sample where EWMA or CUSUM signal a rise), withdrawn (takes an earlier word back)")
    .requiredOption('--verdict <verdict>', VERDICTS.join(', '))
    .requiredOption('--by <name>', 'who gives it')
    .option('--config <file>', 'configuration file (default: WEARSHIFT_CONFIG)')
    .option('--json', 'print the word taken as one JSON line')
    .action(async (unit: string, component: string, sampleId: string, opts: GiveOptions) => {
      if (!(VERDICTS as readonly string[]).includes(opts.verdict)) throw new InputError(`--verdict: expected ${VERDICTS.join(', ')}, got "${opts.verdict}"`);
      const by = ActorNameSchema.safeParse(opts.by);
      if (!by.success) throw new InputError(`--by: ${by.error.issues[0]?.message ?? 'not a name'}`);
      await withRedis(opts, async (redis, config) => {
        const { prefix, partitions: count } = config.redis;
        const partitions = new Partitions(prefix, count);
        const evaluateQueues = openPartitionedQueues(QUEUE_NAMES.evaluate, redis, resolveQueueSettings({ prefix }), partitions);
        try {
          const store = new RedisStore(redis, { prefix, partitions: count, config });
          const incidents = new RedisIncidents(redis, { rules: incidentRules(config), prefix, partitions: count });
          // Announced on the live channel as the API announces it, so that every open board shows it at once.
          const live = livePublisher(redis, prefix, createLogger({ level: process.env.LOG_LEVEL ?? 'warn' }));
          const mark: SampleMark | null = opts.verdict === 'withdrawn' ? null : (opts.verdict as SampleMark);
          const outcome = await new SampleVerdicts(store, evaluateQueues, partitions, { incidents, live }).mark({ unit, component }, sampleId, mark, by.data);
          // The publisher sends at the end of this turn of the event loop: one turn later its PUBLISH is on the connection.
          await new Promise((resolve) => setImmediate(resolve));
          if (outcome !== 'taken') throw new InputError(refusalText(outcome, `sample "${sampleId}" of ${unit}/${component}`));
          if (opts.json) writeJsonLine({ unit, component, sampleId, verdict: opts.verdict, by: by.data });
          else process.stdout.write(terminalText(`${unit}/${component} sample ${sampleId}: ${opts.verdict} by ${by.data}; the workers judge the component again from this sample\n`));
        } finally {
          await Promise.all(evaluateQueues.map((q) => q.close()));
        }
      });
    });
}
