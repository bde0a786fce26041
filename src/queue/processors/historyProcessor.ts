/**
 * The history processor: a job of the `history` queue carries many results, of any partitions (an import of old
 * results). They are put in history order and taken one sampling month at a time: the month's results are stored, then
 * every component they made due is judged on them before the next month is stored, so that no component is judged
 * past a month whose results of other units are still to come (the group's cascade, a commit that changes statistics
 * of a month others have passed, does not arise from the job itself).
 *
 * Each component is judged by one run kept open across the job's months, committed once when the job is done with it
 * (monthlyJudgement.ts): the verdicts are those of one evaluation per result, the same fold, the same statistics. A
 * job that fails lets go of its runs uncommitted: their components stay due and are judged again from their last
 * commit.
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
import { monthOf, startOfNextMonth } from '../../pipeline/groupShares.ts';
import { storeSamples } from '../../pipeline/storeResult.ts';
import { conflictReason } from '../../redis/revisionConflicts.ts';
import type { EvaluationRunnerDeps } from '../evaluationRunner.ts';
import { countAccepted } from '../intakePaths.ts';
import { JUDGEMENTS_AT_ONCE, MonthlyJudgement, type ComponentMonth } from '../monthlyJudgement.ts';
import { DEFAULT_EVALUATE_RETRY_MS, type HistoryJobData } from '../queues.ts';

/** What a month's storing did to one component, as it is counted up. */
type MonthOfComponent = { -readonly [K in keyof ComponentMonth]: ComponentMonth[K] };

export interface HistoryOutcome {
  readonly results: number;
  readonly months: number;
  readonly evaluations: number;
  /** Other components judged again because the job changed group statistics of months they had been judged past. */
  readonly rejudged: number;
}

/** `atOnce`: components of one month judged at a time. Default JUDGEMENTS_AT_ONCE (monthlyJudgement.ts). */
export function historyProcessor(deps: EvaluationRunnerDeps, retryMs = DEFAULT_EVALUATE_RETRY_MS, atOnce = JUDGEMENTS_AT_ONCE): Processor {
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
  // Each component's latest result this job stored (new or a replacement), announced once the job is done with it.
  const announce = new Map<string, Sample>();
  const judgement = new MonthlyJudgement(deps, { atOnce, retryMs });
  try {
    await processMonths();
    await judgement.commitAll();
  } finally {
    // Left open only when the job failed: uncommitted, their components stay due.
    await judgement.abandonAll();
    for (const sample of announce.values()) {
      deps.live?.({ type: 'result', unit: sample.unit, component: sample.component, sampleId: sample.sampleId, sampledAt: sample.sampledAt });
    }
  }
  if (refused.length > 0) {
    throw new UnrecoverableError(`${refused.length} of ${data.records.length} results of this history were not stored: ${refused.join('; ')}`);
  }
  if (judgement.rejudged.size > 0) {
    // Components judged past the job's months before it came (live results of its groups): judged again now, and an
    // incident one of them opened meanwhile may be withdrawn (README, Known limit).
    deps.logger.warn(
      { job: job.id, components: judgement.rejudged.size },
      "a history import changed group statistics of months other components had been judged past: they are judged again, and an incident opened meanwhile may be withdrawn; load a group's history before its live feed",
    );
  }
  return { results: samples.length, months, evaluations: judgement.judged, rejudged: judgement.rejudged.size };

  async function processMonths(): Promise<void> {
    for (let from = 0; from < samples.length; ) {
      const month = monthOf(samples[from]!.time);
      let to = from;
      while (to < samples.length && monthOf(samples[to]!.time) === month) to++;
      const slice = samples.slice(from, to);
      from = to;
      months += 1;
      const stored = await storeSamples(deps.store, deps.config, slice, now);
      const due = new Map<string, MonthOfComponent>();
      for (const { sample, outcome } of stored) {
        deps.metrics?.stored(outcome.status);
        if (outcome.status === 'conflict') {
          refused.push(`${sample.unit} / ${sample.component}: ${conflictReason(sample.sampleId, sample.revision, 'stored')}; this result was not stored`);
          continue;
        }
        if (outcome.status === 'new' || outcome.status === 'replacement') announce.set(componentKey(sample), sample);
        const key = componentKey(sample);
        const seen = due.get(key) ?? { ref: { unit: sample.unit, component: sample.component }, changes: 0, inOrder: true };
        if (outcome.status !== 'duplicate') seen.changes += 1;
        const folded = judgement.folded(sample);
        if (outcome.status === 'replacement' || (outcome.status === 'new' && folded != null && comparePosition(positionOf(sample), folded) <= 0)) seen.inOrder = false;
        if (outcome.evaluationDue || due.has(key)) due.set(key, seen);
      }
      await judgement.month([...due.values()], startOfNextMonth(month));
      await job.updateProgress(Math.round((100 * from) / samples.length));
    }
  }
}
