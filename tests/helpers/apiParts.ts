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
import { connectRedis, type RedisConnection } from '../../src/redis/connection.ts';
import { incidentRules } from '../../src/incidents/policy.ts';
import { Partitions } from '../../src/redis/keys.ts';
import { RedisIncidents } from '../../src/redis/redisIncidents.ts';
import { RedisStore } from '../../src/redis/redisStore.ts';
import type { ResultProducer } from '../../src/queue/producer.ts';
import { accessTokensFromEnv } from '../../src/runtime/accessTokensFromEnv.ts';
import { silentLogger } from '../../src/telemetry/logger.ts';
import { createMetrics } from '../../src/telemetry/metrics.ts';

/** A request connection to `url`, ready, and the incidents over it (built-in rules). */
export async function requestWithIncidents(url: string, prefix: string): Promise<{ request: RedisConnection; incidents: RedisIncidents }> {
  const request = connectRedis(url, 'request');
  await new Promise((resolve) => request.once('ready', resolve));
  return { request, incidents: new RedisIncidents(request, { rules: incidentRules(ConfigSchema.parse({})), prefix }) };
}

/**
 * The histories and sample verdicts of `buildServer`, and the evaluate queues to close at the end. The verdicts go into
 * the timelines of `incidents` (default: the incidents over `request`, built-in rules).
 */
export function historyParts(request: RedisConnection, prefix: string, incidents: RedisIncidents = new RedisIncidents(request, { rules: incidentRules(ConfigSchema.parse({})), prefix })) {
  const store = new RedisStore(request, { prefix });
  const partitions = new Partitions(prefix, 1);
  const evaluateQueues: Queue[] = openPartitionedQueues(QUEUE_NAMES.evaluate, request, resolveQueueSettings({ prefix }), partitions);
  return {
    evaluateQueues,
    server: { histories: { store, ledger: store, config: ConfigSchema.parse({}) }, sampleVerdicts: new SampleVerdicts(store, evaluateQueues, partitions, { incidents }) },
  };
}

/**
 * What every API test's server is built from: the three roles' tokens, a silent logger, its own metrics, the readiness
 * ping, the producer, the incidents and `historyParts`. The evaluate queues are for the caller to close.
 */
export function serverOptions(parts: {
  readonly request: RedisConnection;
  readonly prefix: string;
  readonly tokens: { readonly ingest: string; readonly responder: string; readonly viewer: string };
  readonly producer: ResultProducer;
  readonly incidents: RedisIncidents;
}) {
  const { evaluateQueues, server } = historyParts(parts.request, parts.prefix, parts.incidents);
  return {
    evaluateQueues,
    options: {
      tokens: accessTokensFromEnv({ WEARSHIFT_TOKEN_INGEST: parts.tokens.ingest, WEARSHIFT_TOKEN_RESPONDER: parts.tokens.responder, WEARSHIFT_TOKEN_VIEWER: parts.tokens.viewer }),
      logger: silentLogger(),
      metrics: createMetrics({ defaultMetrics: false }),
      ping: () => parts.request.ping(),
      producer: parts.producer,
      incidents: parts.incidents,
      ...server,
    },
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
