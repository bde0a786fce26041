/**
 * The evaluations of live results, taken in batches without a fixed wait: a results job stores its result and hands
 * its component here. When no batch is under way, the component is judged at once, alone (one evaluation from its
 * latest checkpoint, as a quiet feed needs for its latency). While a batch is under way, the components whose
 * results arrive meanwhile wait for it to end and are judged together in the next one: each by one run kept open
 * across the batch's sampling months and committed once (monthlyJudgement.ts), so that a backlog of many results of
 * the same components costs about one commit per component and batch instead of one per result. The verdicts are
 * those of one evaluation per result (the same fold, the same statistics as of each sample's month); a results job
 * is done only when the batch that judged its component has committed, so a worker that dies leaves its jobs to be
 * taken again (their components stay due).
 *
 * A component whose judgement fails fails the jobs waiting for it (they are retried); the batch's others go on.
 */
import { componentKey, type Sample } from '../domain/event.ts';
import { monthOf, startOfNextMonth } from '../pipeline/groupShares.ts';
import type { ComponentRef } from '../pipeline/ports.ts';
import type { EvaluationRunnerDeps } from './evaluationRunner.ts';
import { MonthlyJudgement } from './monthlyJudgement.ts';
import { DEFAULT_EVALUATE_RETRY_MS } from './queues.ts';

interface Waiting {
  readonly ref: ComponentRef;
  /** Sampling months (`YYYY-MM`) of the results waiting. */
  readonly months: Set<string>;
  readonly waiters: { resolve(): void; reject(e: unknown): void }[];
}

export interface ResultBatchesOptions {
  /** Delay of the evaluation scheduled for a component another worker holds. Default 200 ms. */
  readonly retryMs?: number;
  /** Components of one month judged at a time. Default JUDGEMENTS_AT_ONCE (monthlyJudgement.ts). */
  readonly atOnce?: number;
}

export class ResultBatches {
  private waiting = new Map<string, Waiting>();
  private underWay = false;
  private readonly retryMs: number;
  /** Batches judged, and components judged in them (for the benchmark's and the tests' view of the coalescing). */
  readonly counts = { batches: 0, components: 0 };

  constructor(
    private readonly deps: EvaluationRunnerDeps,
    private readonly options: ResultBatchesOptions = {},
  ) {
    this.retryMs = options.retryMs ?? DEFAULT_EVALUATE_RETRY_MS;
  }

  /** Resolves when an evaluation covering `sample` (stored before this call) has committed, or has been scheduled. */
  judge(sample: Sample): Promise<void> {
    const key = componentKey(sample);
    let entry = this.waiting.get(key);
    if (entry === undefined) {
      entry = { ref: { unit: sample.unit, component: sample.component }, months: new Set(), waiters: [] };
      this.waiting.set(key, entry);
    }
    entry.months.add(monthOf(sample.time));
    const waiters = entry.waiters;
    const done = new Promise<void>((resolve, reject) => waiters.push({ resolve, reject }));
    if (!this.underWay) void this.drain();
    return done;
  }

  private async drain(): Promise<void> {
    this.underWay = true;
    try {
      while (this.waiting.size > 0) {
        const batch = [...this.waiting.values()];
        this.waiting = new Map();
        this.counts.batches += 1;
        this.counts.components += batch.length;
        this.deps.metrics?.batched(batch.length, batch.reduce((n, w) => n + w.waiters.length, 0));
        const failures = await this.judgeBatch(batch).catch((e: unknown) => new Map(batch.map((w) => [componentKey(w.ref), e])));
        for (const w of batch) {
          const key = componentKey(w.ref);
          for (const waiter of w.waiters) {
            if (failures.has(key)) waiter.reject(failures.get(key));
            else waiter.resolve();
          }
        }
      }
    } finally {
      this.underWay = false;
    }
  }

  /** Judges a batch; the components whose judgement failed, with the error. */
  private async judgeBatch(batch: readonly Waiting[]): Promise<Map<string, unknown>> {
    const failures = new Map<string, unknown>();
    const judgement = new MonthlyJudgement(this.deps, {
      retryMs: this.retryMs,
      ...(this.options.atOnce !== undefined && { atOnce: this.options.atOnce }),
      onFailure: (ref, e) => failures.set(componentKey(ref), e),
      // A commit left unsettled needs no evaluation here: what it read and did not fold waits for the next batch
      // (foldUntil), and every change after its read has a judgement of its own coming (a results job's batch, in this
      // process or another; a scheduled evaluation for a cascade or a responder's mark). An evaluation of everything
      // stored would judge the component past the months of the next batch, whose group shares would judge it again.
      unsettledJudgedElsewhere: true,
      // What a run read beyond the batch's months is folded now (a late result rewound it over results judged before),
      // except from the month of the component's results waiting for the next batch, which judges them.
      foldUntil: (ref) => {
        const next = this.waiting.get(componentKey(ref));
        return next === undefined ? undefined : Math.min(...[...next.months].map((m) => Date.parse(`${m}-01T00:00:00Z`)));
      },
    });
    try {
      await judgement.openAll(batch.map((w) => w.ref));
      const months = [...new Set(batch.flatMap((w) => [...w.months]))].sort();
      for (const [i, month] of months.entries()) {
        // Every result of the batch was stored before its component's run opened and read its stored samples.
        const components = batch.filter((w) => w.months.has(month)).map((w) => ({ ref: w.ref, changes: 0, inOrder: true }));
        await judgement.month(components, startOfNextMonth(month), i < months.length - 1);
      }
      await judgement.commitAll();
    } finally {
      await judgement.abandonAll();
    }
    return failures;
  }
}
