/**
 * Evaluates a component until nothing is due, as the results and evaluate processors both do: when another worker
 * holds the component it says so (the caller schedules a later try, which the holder usually makes unnecessary: it
 * evaluates again before letting go whenever more results arrived meanwhile). Every component the group's cascade
 * marks is scheduled on its partition's evaluate queue.
 */
import type { Queue } from 'bullmq';
import { componentKey } from '../domain/event.ts';
import { evaluateStored, type EvaluationDeps } from '../pipeline/evaluateStored.ts';
import { summarizeEvaluation, type EvaluationSummary } from '../pipeline/evaluationSummary.ts';
import { incidentEvent, type LiveEvent } from '../pipeline/liveEvent.ts';
import type { ComponentRef } from '../pipeline/ports.ts';
import type { Partitions } from '../redis/keys.ts';
import type { Logger } from '../telemetry/logger.ts';
import type { Metrics } from '../telemetry/metrics.ts';
import type { ArrivalLimit } from './arrivalLimit.ts';
import { scheduleEvaluation, scheduleEvaluations } from './queues.ts';

export interface EvaluationRunnerDeps extends EvaluationDeps {
  readonly partitions: Partitions;
  /** The evaluate queue of each partition. */
  readonly evaluateQueues: readonly Queue[];
  readonly logger: Logger;
  readonly metrics?: Metrics;
  readonly live?: (event: LiveEvent) => void;
  /** Told when an evaluation produced messages or escalation checks (the outbox relay drains then). */
  readonly onEffects?: () => void;
  /** Where an evaluation runs. Default: `evaluateStored` on this thread (an EvaluationThreadPool runs it on others). */
  readonly evaluator?: (ref: ComponentRef) => Promise<EvaluationSummary>;
}

/** `busy`: another worker holds the component; `held`: the arrival limit left stored samples due (try again later). */
export type RunOutcome = 'done' | 'busy' | 'held';

/**
 * What follows a committed evaluation on the calling thread: metrics, live events, the outbox relay woken for its
 * messages, and the group's cascade marked and scheduled.
 */
export async function takeEvaluation(deps: EvaluationRunnerDeps, ref: ComponentRef, result: Extract<EvaluationSummary, { kind: 'evaluated' }>): Promise<void> {
  deps.metrics?.evaluated(result.durationMs / 1000, 'evaluated');
  deps.metrics?.findings(result.findings);
  for (const change of result.changes) deps.live?.(incidentEvent(change));
  if (result.effects.length > 0) deps.onEffects?.();
  await takeCascade(deps, ref, result.cascade);
}

/** Marks the other units a commit's group shares changed the past of, and schedules their evaluation. */
export async function takeCascade(deps: EvaluationRunnerDeps, ref: ComponentRef, cascade: Extract<EvaluationSummary, { kind: 'evaluated' }>['cascade']): Promise<void> {
  if (cascade.length === 0) return;
  await deps.store.markDirty(cascade);
  await scheduleEvaluations(deps.evaluateQueues, deps.partitions, cascade.map((c) => c.ref));
  deps.logger.debug({ component: componentKey(ref), cascade: cascade.length }, 'group statistics changed: later samples of other units judged again');
}

/** Evaluations of one component in a row before it lets others have a turn (a flood of one component's results). */
const MAX_ROUNDS = 50;

/**
 * Evaluates the component until nothing is due. `limit` (an evaluate job's, arrivalLimit.ts; on this thread only):
 * how far each evaluation may fold; when it leaves stored samples due, the outcome is `held` (try again later).
 */
export async function runEvaluation(deps: EvaluationRunnerDeps, ref: ComponentRef, limit?: ArrivalLimit): Promise<RunOutcome> {
  let limited = false;
  const until =
    limit === undefined || deps.evaluator !== undefined
      ? undefined
      : async (group: string) => {
          const at = await limit(ref, group);
          limited = at !== undefined;
          return at;
        };
  for (let round = 0; round < MAX_ROUNDS; round++) {
    const result = deps.evaluator !== undefined ? await deps.evaluator(ref) : summarizeEvaluation(await evaluateStored(deps, ref, until));
    switch (result.kind) {
      case 'busy':
      case 'lost-lock':
        return 'busy';
      case 'retry':
        continue;
      case 'empty':
        return 'done';
      case 'unchanged':
        return result.leftDue === true ? 'held' : 'done';
      case 'evaluated': {
        await takeEvaluation(deps, ref, result);
        if (result.settled) return 'done';
        // What the limit left stays due for a later try (evaluating again at once would stop at the same place).
        if (limited) return 'held';
      }
    }
  }
  // Still more due: leave the rest to a scheduled evaluation so other components get their turn.
  await scheduleEvaluation(deps.evaluateQueues[deps.partitions.of(ref)]!, ref);
  return 'done';
}
