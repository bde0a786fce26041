/**
 * The evaluate processor: evaluates a component that a burst left busy or that a late result of another unit of its
 * group re-judges. While another worker holds the component the job comes back shortly; so it does, with arrival
 * order, while results not judged yet must come first (arrivalLimit.ts).
 */
import { DelayedError, UnrecoverableError, type Job, type Processor } from 'bullmq';
import type { ArrivalLimit } from '../arrivalLimit.ts';
import type { EvaluateJobData } from '../queues.ts';
import { runEvaluation, type EvaluationRunnerDeps } from '../evaluationRunner.ts';
import { DEFAULT_EVALUATE_RETRY_MS } from '../queues.ts';

/** Arrival order for evaluate jobs (arrivalLimit.ts): how far one may fold, and for how long the limit holds. */
export interface EvaluateInArrivalOrder {
  readonly limit: ArrivalLimit;
  /** A job older than this (from when it was added, by `deps.now`) folds everything stored (resultBatches.ts `arrivalWaitMs`). */
  readonly waitMs: number;
}

/** Longest delay between the tries of an evaluate job held for earlier results (arrivalLimit.ts). */
export const HELD_RETRY_MAX_MS = 2_000;

export function evaluateProcessor(deps: EvaluationRunnerDeps, retryMs = DEFAULT_EVALUATE_RETRY_MS, arrival?: EvaluateInArrivalOrder): Processor {
  return async (job: Job, token?: string) => {
    const ref = evaluateJobData(job.data);
    const age = deps.now() - job.timestamp;
    const limit = arrival !== undefined && age < arrival.waitMs ? arrival.limit : undefined;
    const outcome = await runEvaluation(deps, ref, limit);
    if (outcome === 'done') return { kind: outcome };
    let delay = retryMs;
    if (outcome === 'held') {
      // Held for earlier results: the longer it has waited, the longer it waits between looks (a quarter of its age,
      // at most HELD_RETRY_MAX_MS), so that a group's many cascaded components do not poll a long backlog.
      deps.metrics?.held();
      delay = Math.max(retryMs, Math.min(HELD_RETRY_MAX_MS, Math.round(age / 4)));
    }
    await job.moveToDelayed(Date.now() + delay, token);
    throw new DelayedError();
  };
}

function evaluateJobData(data: unknown): EvaluateJobData {
  const d = data as Partial<EvaluateJobData> | null;
  if (typeof d?.unit !== 'string' || typeof d.component !== 'string') {
    throw new UnrecoverableError('evaluate job: data must be {"unit": string, "component": string}');
  }
  return { unit: d.unit, component: d.component };
}
