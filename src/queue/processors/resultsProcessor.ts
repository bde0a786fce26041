/**
 * The results processor: stores one lab result and evaluates its component in the same job (one job per result on
 * the hot path). The evaluation goes through the process's result batches (resultBatches.ts): alone and at once when
 * nothing else is being judged, else together with the other components whose results arrived meanwhile. A result
 * whose component another worker is evaluating leaves an evaluate job behind, which usually finds nothing left to
 * do: the holder evaluates again before letting go. Histories (many old results at once) have a queue of their own
 * (historyProcessor.ts).
 */
import { UnrecoverableError, type Job, type Processor } from 'bullmq';
import { conflictReason } from '../../redis/revisionConflicts.ts';
import { claimedSampleId, validateResult } from '../../intake/validate.ts';
import { InvalidResultError, storeSample } from '../../pipeline/storeResult.ts';
import { arrivalOf } from '../arrivalOrder.ts';
import type { EvaluationRunnerDeps } from '../evaluationRunner.ts';
import { countAccepted } from '../intakePaths.ts';
import { DEFAULT_EVALUATE_RETRY_MS } from '../queues.ts';
import { ResultBatches } from '../resultBatches.ts';

export function resultsProcessor(deps: EvaluationRunnerDeps, retryMs = DEFAULT_EVALUATE_RETRY_MS, batches = new ResultBatches(deps, { retryMs })): Processor {
  return async (job: Job) => {
    // This process's own from here on: another process's batches wait for it, this one's only while it is being stored
    // (resultBatches.ts).
    const release = batches.hold(arrivalOf(job.id), batches.about(job.data));
    try {
      return await processResult(deps, batches, job);
    } finally {
      release();
    }
  };
}

/** Validates and stores one result, then hands its component to the batches. */
async function processResult(deps: EvaluationRunnerDeps, batches: ResultBatches, job: Job) {
  const now = deps.now();
  const parsed = validateResult(job.data, { now });
  if (!parsed.ok) {
    deps.metrics?.rejected('queue', parsed.issues);
    throw new UnrecoverableError(new InvalidResultError(parsed.issues, claimedSampleId(job.data)).message);
  }
  // Counted once validation has accepted it, before anything that may fail and be retried.
  countAccepted(deps.metrics, job, 1);
  const stored = await storeSample(deps.store, deps.config, parsed.sample, now);
  deps.metrics?.stored(stored.outcome.status);
  if (stored.outcome.status === 'conflict') {
    // Two different results with one sampleId and revision raced past the intake's check: the first stands, and the
    // second is a failed job that says why (listed by `wearshift failed`), not a silent success.
    throw new UnrecoverableError(`${stored.sample.unit} / ${stored.sample.component}: ${conflictReason(stored.sample.sampleId, stored.sample.revision, 'stored')}; this result was not stored`);
  }
  const { sample } = stored;
  if (stored.outcome.status === 'new' || stored.outcome.status === 'replacement') {
    deps.live?.({ type: 'result', unit: sample.unit, component: sample.component, sampleId: sample.sampleId, sampledAt: sample.sampledAt });
  }
  if (stored.outcome.evaluationDue) await batches.judge(sample, arrivalOf(job.id));
  return { sampleId: sample.sampleId, revision: sample.revision, unit: sample.unit, component: sample.component, status: stored.outcome.status };
}
