/**
 * A private redis-server for one test file, and sites on it: a store on a fresh prefix (one partition) with the deps
 * the queue workers evaluate with, for tests that drive the evaluations themselves.
 */
import { afterAll, beforeAll } from 'vitest';
import type { Config } from '../../src/domain/config.ts';
import { incidentRules } from '../../src/incidents/policy.ts';
import type { EvaluationRunnerDeps } from '../../src/queue/evaluationRunner.ts';
import { openPartitionedQueues, QUEUE_NAMES, resolveQueueSettings } from '../../src/queue/queues.ts';
import { Partitions } from '../../src/redis/keys.ts';
import { RedisStore } from '../../src/redis/redisStore.ts';
import { silentLogger } from '../../src/telemetry/logger.ts';
import { startRedisServer, type RedisServer } from './redisServer.ts';

/** Starts the server before the file's tests and stops it after them, with everything given to `closeAfter`. */
export function evaluationSites(config: Config, name: string) {
  let server: RedisServer | undefined;
  let prefixes = 0;
  const closers: Array<() => Promise<unknown>> = [];
  beforeAll(async () => {
    server = await startRedisServer();
  });
  afterAll(async () => {
    for (const close of closers.reverse()) await close();
    await server?.dispose();
  });
  const closeAfter = (close: () => Promise<unknown>) => void closers.push(close);
  return {
    closeAfter,
    /** A store on a fresh prefix `{<name><n>}` and the deps of its evaluations (a silent logger unless given). */
    site(deps: Pick<EvaluationRunnerDeps, 'now'> & Partial<Pick<EvaluationRunnerDeps, 'logger' | 'metrics'>>) {
      const prefix = `{${name}${++prefixes}}`;
      const connection = server!.client();
      const store = new RedisStore(connection, { prefix, config });
      const partitions = new Partitions(prefix, 1);
      const settings = resolveQueueSettings({ prefix });
      const evaluateQueues = openPartitionedQueues(QUEUE_NAMES.evaluate, connection, settings, partitions);
      closeAfter(() => Promise.all(evaluateQueues.map((q) => q.close())));
      const runner: EvaluationRunnerDeps = { store, ledger: store, config, rules: incidentRules(config), partitions, evaluateQueues, logger: silentLogger(), ...deps };
      return { prefix, connection, store, partitions, settings, evaluateQueues, deps: runner };
    },
  };
}
