/**
 * The evaluate processor: evaluates a component that a burst left busy or that a late result of another unit of its
 * group re-judges. While another worker holds the component the job comes back shortly.
 */
import { DelayedError, UnrecoverableError, type Job, type Processor } from 'bullmq';
import type { EvaluateJobData } from '../queues.ts';
import { runEvaluation, type EvaluationRunnerDeps } from '../evaluationRunner.ts';
import { DEFAULT_EVALUATE_RETRY_MS } from '../queues.ts';

export function evaluateProcessor(deps: EvaluationRunnerDeps, retryMs = DEFAULT_EVALUATE_RETRY_MS): Processor {
  return async (job: Job, token?: string) => {
    const ref = evaluateJobData(job.data);
    const outcome = await runEvaluation(deps, ref);
    if (outcome === 'busy') {
      await job.moveToDelayed(Date.now() + retryMs, token);
      throw new DelayedError();
    }
    return { kind: outcome };
  };
}

function evaluateJobData(data: unknown): EvaluateJobData {
  const d = data as Partial<EvaluateJobData> | null;
  if (typeof d?.unit !== 'string' || typeof d.component !== 'string') {
    throw new UnrecoverableError('evaluate job: data must be {"unit": string, "component": string}');
  }
  return { unit: d.unit, component: d.component };
}
