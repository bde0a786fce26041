/**
 * The Redis-backed parts an HTTP API test builds its server from, wired as `wearshift api` wires them (one partition):
 * the histories (store and group ledger) and the sample verdicts with their evaluate queues; and an alarm incident to
 * act on, opened by a fixed-limit finding on one gearbox.
 */
import type { Queue } from 'bullmq';
import type { Step } from '../../src/analysis/model.ts';
import { ConfigSchema } from '../../src/domain/config.ts';
import { openPartitionedQueues, QUEUE_NAMES, resolveQueueSettings } from '../../src/queue/queues.ts';
import { SampleVerdicts } from '../../src/queue/sampleVerdicts.ts';
import type { RedisConnection } from '../../src/redis/connection.ts';
import { Partitions } from '../../src/redis/keys.ts';
import type { RedisIncidents } from '../../src/redis/redisIncidents.ts';
import { RedisStore } from '../../src/redis/redisStore.ts';

/** The histories and sample verdicts of `buildServer`, and the evaluate queues to close at the end. */
export function historyParts(request: RedisConnection, prefix: string) {
  const store = new RedisStore(request, { prefix });
  const partitions = new Partitions(prefix, 1);
  const evaluateQueues: Queue[] = openPartitionedQueues(QUEUE_NAMES.evaluate, request, resolveQueueSettings({ prefix }), partitions);
  return {
    evaluateQueues,
    server: { histories: { store, ledger: store, config: ConfigSchema.parse({}) }, sampleVerdicts: new SampleVerdicts(store, evaluateQueues, partitions) },
  };
}

/** A fixed-limit alarm on Fe of `unit`/`component`, sampled a day before `now`, seen live: an open incident. */
export function alarmStep(unit: string, component: string, sampleId: string, now: Date): Step {
  const sampledAt = new Date(now.getTime() - 86_400_000).toISOString();
  return {
    sampleId,
    sampledAt,
    findings: [{ unit, component, group: 'gearboxes', measurand: 'Fe', rule: 'limit', disposition: 'incident', severity: 'alarm', value: 90, threshold: 60, basis: 'limit', direction: 'up', sampleId, sampledAt, explanation: 'Fe above the alarm level' }],
  };
}

/** Opens the alarm incident of `alarmStep` in `incidents`. */
export async function openAlarmIncident(incidents: RedisIncidents, unit: string, component: string, sampleId: string, now: Date): Promise<void> {
  await incidents.applySteps({ unit, component }, [alarmStep(unit, component, sampleId, now)], { group: 'gearboxes', now, quietBefore: new Date(0) });
}
