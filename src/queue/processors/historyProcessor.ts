/**
 * The history processor: a job of the `history` queue carries many results, of any partitions (an import of old
 * results). They are put in history order and taken one sampling month at a time: the month's results are stored, then
 * every component they made due is judged on them before the next month is stored, so that no component is judged
 * past a month whose results of other units are still to come (the group's cascade, a commit that changes statistics
 * of a month others have passed, does not arise from the job itself).
 *
 * A component is judged by one run (pipeline/componentRun.ts) kept open across the job's months: at each month it
 * folds the month's results and writes only its group shares (what other units are judged with); its checkpoint,
 * findings and incidents are committed once, when the job is done with it. The verdicts are those of one evaluation
 * per result: the same fold, the same statistics. A run gives way to an evaluation of its own (which goes back as far
 * as it needs) when a month brings a revision of a result it folded, or a result before the last one folded; and its
 * commit, not settled when anything else marked the component meanwhile, is followed by such an evaluation. At most
 * MAX_OPEN_RUNS runs are open at a time (the one left alone longest is committed first). A job that fails lets go of
 * its runs uncommitted: their components stay due and are judged again from their last commit.
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
import { ComponentRun } from '../../pipeline/componentRun.ts';
import { summarizeEvaluation } from '../../pipeline/evaluationSummary.ts';
import { claimedSampleId, describeIssues, validateResult } from '../../intake/validate.ts';
import { monthOf } from '../../pipeline/groupShares.ts';
import type { ComponentRef } from '../../pipeline/ports.ts';
import { storeSamples } from '../../pipeline/storeResult.ts';
import { conflictReason } from '../../redis/revisionConflicts.ts';
import { runEvaluation, takeCascade, takeEvaluation, type EvaluationRunnerDeps } from '../evaluationRunner.ts';
import { countAccepted } from '../intakePaths.ts';
import { DEFAULT_EVALUATE_RETRY_MS, scheduleEvaluation, type HistoryJobData } from '../queues.ts';

/**
 * Components of one month judged at a time (each mostly waits on Redis in turn: more at once keep the connection
 * busier). A backfill of 100 000 results over 1 000 components on 2 cores took 65 s with 4, 57 s with 8, 54 s with
 * 16, 50 s with 32 and 49 s with 64 (BENCHMARKS.md, *A history job's components kept open*).
 */
export const HISTORY_JUDGEMENTS_AT_ONCE = 32;

/** Component runs a history job keeps open at most (each holds its component's lock and decoded state). */
export const MAX_OPEN_RUNS = 2000;

/** What a month's storing did to one component. */
interface MonthOfComponent {
  readonly ref: ComponentRef;
  /** Results stored that moved the component's change mark (new, replacement, superseded). */
  changes: number;
  /** Only new results after everything the component's run has folded. */
  inOrder: boolean;
}

export interface HistoryOutcome {
  readonly results: number;
  readonly months: number;
  readonly evaluations: number;
}

/** `atOnce`: components of one month judged at a time. Default HISTORY_JUDGEMENTS_AT_ONCE. */
export function historyProcessor(deps: EvaluationRunnerDeps, retryMs = DEFAULT_EVALUATE_RETRY_MS, atOnce = HISTORY_JUDGEMENTS_AT_ONCE): Processor {
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
  // The open runs, the one advanced longest ago first.
  const runs = new Map<string, ComponentRun>();
  try {
    await processMonths();
    await inTurn([...runs.keys()], async (key) => commitRun(key));
  } finally {
    // Left open only when the job failed: uncommitted, their components stay due.
    await Promise.all([...runs.values()].map((run) => run.abandon().catch(() => undefined)));
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
        const folded = runs.get(key)?.position;
        if (outcome.status === 'replacement' || (outcome.status === 'new' && folded != null && comparePosition(positionOf(sample), folded) <= 0)) seen.inOrder = false;
        if (outcome.evaluationDue || due.has(key)) due.set(key, seen);
      }
      const refs = [...due.values()];
      evaluations += refs.length;
      await inTurn(refs, judgeMonth);
      await job.updateProgress(Math.round((100 * from) / samples.length));
    }
  }

  /** Runs `each` over `items`, `atOnce` at a time. */
  async function inTurn<T>(items: readonly T[], each: (item: T) => Promise<void>): Promise<void> {
    let next = 0;
    await Promise.all(
      Array.from({ length: Math.min(atOnce, items.length) }, async () => {
        while (next < items.length) await each(items[next++]!);
      }),
    );
  }

  /** Judges one component on a month's results: in its open run when it can, else by an evaluation of its own. */
  async function judgeMonth(month: MonthOfComponent): Promise<void> {
    const { ref } = month;
    const key = componentKey(ref);
    let run = runs.get(key);
    if (run !== undefined && !month.inOrder) {
      // A revision or an earlier result: the run commits what it has, and an evaluation goes back as far as needed.
      await commitRun(key);
      run = undefined;
    }
    if (run === undefined && !month.inOrder) return evaluateAlone(ref);
    if (run === undefined) {
      if (runs.size >= MAX_OPEN_RUNS) await commitRun(runs.keys().next().value!);
      const opened = await ComponentRun.open(deps, ref);
      if (!(opened instanceof ComponentRun)) {
        if (opened.kind === 'busy') await scheduleEvaluation(deps.evaluateQueues[deps.partitions.of(ref)]!, ref, retryMs);
        return;
      }
      // Its input was read after this month's results were stored: its change mark covers them.
      run = opened;
    } else {
      run.covers(month.changes);
      runs.delete(key);
    }
    runs.set(key, run);
    try {
      await run.foldStored();
      const shared = await run.share();
      if (!shared.ok) {
        // The lock lapsed: another evaluation judges the component from its last commit.
        runs.delete(key);
        await run.abandon();
        await scheduleEvaluation(deps.evaluateQueues[deps.partitions.of(ref)]!, ref, retryMs);
        return;
      }
      await takeCascade(deps, ref, shared.cascade);
    } catch (e) {
      runs.delete(key);
      await run.abandon().catch(() => undefined);
      throw e;
    }
  }

  /** Commits an open run; when anything else marked the component meanwhile, an evaluation of its own follows. */
  async function commitRun(key: string): Promise<void> {
    const run = runs.get(key);
    if (run === undefined) return;
    runs.delete(key);
    const result = summarizeEvaluation(await run.commit());
    if (result.kind === 'evaluated') {
      await takeEvaluation(deps, run.ref, result);
      if (result.settled) return;
    }
    await evaluateAlone(run.ref);
  }

  async function evaluateAlone(ref: ComponentRef): Promise<void> {
    if ((await runEvaluation(deps, ref)) === 'busy') await scheduleEvaluation(deps.evaluateQueues[deps.partitions.of(ref)]!, ref, retryMs);
  }
}
