/**
 * An evaluation thread (see evaluationThreadPool.ts): its own Redis connection and store, evaluating the components
 * the pool sends, one message each, at the processing time the message carries (the thread reads no clock). Replies
 * with the evaluation's summary, or with the error's message.
 */
import { parentPort, workerData } from 'node:worker_threads';
import type { Config } from '../domain/config.ts';
import { incidentRules } from '../incidents/policy.ts';
import { evaluateStored } from '../pipeline/evaluateStored.ts';
import { summarizeEvaluation } from '../pipeline/evaluationSummary.ts';
import type { ComponentRef } from '../pipeline/ports.ts';
import { connectRedis } from '../redis/connection.ts';
import { RedisStore } from '../redis/redisStore.ts';
import type { RedisTarget } from '../redis/target.ts';
import { EVALUATION_THREAD_CONNECTION } from './evaluationThreadPool.ts';

/** What the pool hands a thread at its start. */
export interface EvaluationThreadData {
  readonly target: RedisTarget;
  readonly prefix: string;
  readonly partitions: number;
  readonly config: Config;
  readonly lockTtlMs: number;
  readonly checkpointEvery: number;
}

export type ThreadRequest = { readonly id: number; readonly ref: ComponentRef; readonly now: number } | { readonly close: true };

const port = parentPort;
if (port === null) throw new Error('evaluationThread.ts runs as a worker thread (EvaluationThreadPool)');
const data = workerData as EvaluationThreadData;
const connection = connectRedis(data.target, 'worker', undefined, { name: EVALUATION_THREAD_CONNECTION });
const store = new RedisStore(connection, { prefix: data.prefix, partitions: data.partitions, config: data.config });
const rules = incidentRules(data.config);

port.on('message', (message: ThreadRequest) => {
  if ('close' in message) {
    void connection.quit().finally(() => port.close());
    return;
  }
  const { id, ref, now } = message;
  const deps = { store, ledger: store, config: data.config, rules, now: () => now, lockTtlMs: data.lockTtlMs, checkpointEvery: data.checkpointEvery };
  evaluateStored(deps, ref).then(
    (result) => port.postMessage({ id, summary: summarizeEvaluation(result) }),
    (e: unknown) => port.postMessage({ id, error: e instanceof Error ? e.message : String(e) }),
  );
});
