/**
 * The history processor: a job of the `history` queue carries many results, of any partitions (an import of old
 * results). They are put in history order and taken one sampling month at a time: the month's results are stored, then
 * every component they made due is evaluated once, before the next month is stored. A component is evaluated once
 * per month of the job instead of once per result, and no evaluation runs past a month whose results of other units
 * are still to come, so the group's cascade (a commit that changes statistics of a month others have passed) does
 * not arise from the job itself. The verdicts are those of one job per result: the same storing and evaluation.
 *
 * The boards hear of the job's results once per component, when the job ends (its latest result stored), not once per
 * result: a backfill of years of history does not redraw every open board's charts for each of its results.
 *
 * A record the job cannot take (it fails validation with the worker's clock, or its sampleId and revision are
 * stored with other content) does not stop the others: they are stored and evaluated, and the job then fails
 * without retry, naming each such record and the reason (`wearshift failed list`).
 */
import { UnrecoverableError, type Job, type Processor } from 'bullmq';
import { componentKey, type Sample } from '../../domain/event.ts';
import { positionOf, comparePosition } from '../../incidents/verdict.ts';
import { claimedSampleId, describeIssues, validateResult } from '../../intake/validate.ts';
import { monthOf } from '../../pipeline/groupShares.ts';
import type { ComponentRef } from '../../pipeline/ports.ts';
import { storeSamples } from '../../pipeline/storeResult.ts';
import { conflictReason } from '../../redis/revisionConflicts.ts';
import { runEvaluation, type EvaluationRunnerDeps } from '../evaluationRunner.ts';
import { countAccepted } from '../intakePaths.ts';
import { DEFAULT_EVALUATE_RETRY_MS, scheduleEvaluation, type HistoryJobData } from '../queues.ts';

/** Evaluations of one month run this many at a time per evaluating thread (they wait on Redis in turn). */
export const HISTORY_EVALUATIONS_PER_THREAD = 4;

export interface HistoryOutcome {
  readonly results: number;
  readonly months: number;
  readonly evaluations: number;
}

/** `atOnce`: evaluations of one month in flight at a time. Default HISTORY_EVALUATIONS_PER_THREAD. */
export function historyProcessor(deps: EvaluationRunnerDeps, retryMs = DEFAULT_EVALUATE_RETRY_MS, atOnce = HISTORY_EVALUATIONS_PER_THREAD): Processor {
  return (job: Job) => processHistory(deps, job, retryMs, atOnce);
}

async function processHistory(deps: EvaluationRunnerDeps, job: Job, retryMs: number, atOnce: number): Promise<HistoryOutcome> {
  const data = job.data as Partial<HistoryJobData> | null;
  if (!Array.isArray(data?.records)) throw new UnrecoverableError('history job: data must be {"records": [result, ...]}');
  const now = deps.now();
  const refused: string[] = [];
  const samples: Sample[] = [];
  data.records.forEach((record, i) => {
    const parsed = validateResult(record, { now });
    if (parsed.ok) samples.push(parsed.sample);
    else {
      deps.metrics?.rejected('queue', parsed.issues);
      const id = claimedSampleId(record);
      refused.push(`record ${i + 1}${id === undefined ? '' : ` (sampleId ${id})`}: ${describeIssues(parsed.issues)}`);
    }
  });
  countAccepted(deps.metrics, job, samples.length);
  samples.sort((a, b) => comparePosition(positionOf(a), positionOf(b)));
  let months = 0;
  let evaluations = 0;
  // Each component's latest result this job stored (new or a replacement), announced once the job is done with it.
  const announce = new Map<string, Sample>();
  try {
    await processMonths();
  } finally {
    for (const sample of announce.values()) {
      deps.live?.({ type: 'result', unit: sample.unit, component: sample.component, sampleId: sample.sampleId, sampledAt: sample.sampledAt });
    }
  }
  if (refused.length > 0) {
    throw new UnrecoverableError(`${refused.length} of ${data.records.length} results of this history were not stored: ${refused.join('; ')}`);
  }
  return { results: samples.length, months, evaluations };

  async function processMonths(): Promise<void> {
    for (let from = 0; from < samples.length; ) {
      const month = monthOf(samples[from]!.time);
      let to = from;
      while (to < samples.length && monthOf(samples[to]!.time) === month) to++;
      const slice = samples.slice(from, to);
      from = to;
      months += 1;
      const stored = await storeSamples(deps.store, deps.config, slice, now);
      const due = new Map<string, ComponentRef>();
      for (const { sample, outcome } of stored) {
        deps.metrics?.stored(outcome.status);
        if (outcome.status === 'conflict') {
          refused.push(`${sample.unit} / ${sample.component}: ${conflictReason(sample.sampleId, sample.revision, 'stored')}; this result was not stored`);
          continue;
        }
        if (outcome.status === 'new' || outcome.status === 'replacement') announce.set(componentKey(sample), sample);
        if (outcome.evaluationDue) due.set(componentKey(sample), { unit: sample.unit, component: sample.component });
      }
      const refs = [...due.values()];
      evaluations += refs.length;
      let next = 0;
      await Promise.all(
        Array.from({ length: Math.min(atOnce, refs.length) }, async () => {
          while (next < refs.length) {
            const ref = refs[next++]!;
            if ((await runEvaluation(deps, ref)) === 'busy') await scheduleEvaluation(deps.evaluateQueues[deps.partitions.of(ref)]!, ref, retryMs);
          }
        }),
      );
      await job.updateProgress(Math.round((100 * from) / samples.length));
    }
  }
}
