/**
 * Many components judged together, one sampling month at a time: every component with results of a month is judged
 * on them (with its group's statistics as of that month) before any is judged on the next month, so that no
 * component is judged past a month whose results of other units are still to be folded (the group's cascade, a
 * commit that changes statistics of a month others have passed, does not arise among them). A history job
 * (processors/historyProcessor.ts) stores each month's results and then judges them; a batch of live results
 * (resultBatches.ts) was stored before and is judged the same way.
 *
 * A component is judged by one run (pipeline/componentRun.ts) kept open across the months: at each month it folds the
 * month's stored results and writes only its group shares (what other units are judged with); its checkpoint,
 * findings and incidents are committed once, by `commitAll` (or earlier, when too many runs are open). A run gives
 * way to an evaluation of its own (which goes back as far as it needs) when a month brings a revision of a result it
 * folded, or a result before the last one folded; and its commit, not settled when anything else marked the
 * component meanwhile, is followed by such an evaluation. Runs not committed (`abandonAll`) leave their components
 * due: they are judged again from their last commit.
 */
import { componentKey } from '../domain/event.ts';
import type { StepPosition } from '../incidents/model.ts';
import { ComponentRun } from '../pipeline/componentRun.ts';
import { summarizeEvaluation } from '../pipeline/evaluationSummary.ts';
import type { ComponentRef } from '../pipeline/ports.ts';
import type { ArrivalLimit } from './arrivalLimit.ts';
import { runEvaluation, takeCascade, takeEvaluation, type EvaluationRunnerDeps } from './evaluationRunner.ts';
import { DEFAULT_EVALUATE_RETRY_MS, scheduleEvaluation } from './queues.ts';

/**
 * Components of one month judged at a time (each mostly waits on Redis in turn: more at once keep the connection
 * busier). A backfill of 100 000 results over 1 000 components on 2 cores took 65 s with 4, 57 s with 8, 54 s with
 * 16, 50 s with 32 and 49 s with 64 (BENCHMARKS.md, *A history job's components kept open*).
 */
export const JUDGEMENTS_AT_ONCE = 32;

/** Component runs open at most (each holds its component's lock and decoded state). */
export const MAX_OPEN_RUNS = 2000;

/** What a month brought one component. */
export interface ComponentMonth {
  readonly ref: ComponentRef;
  /** Results stored after its run opened that moved the component's change mark (new, replacement, superseded). */
  readonly changes: number;
  /** Only new results after everything the component's run has folded. */
  readonly inOrder: boolean;
}

export interface MonthlyJudgementOptions {
  /** Components of one month judged at a time. Default JUDGEMENTS_AT_ONCE (32). */
  readonly atOnce?: number;
  /** Runs open at most; the one left alone longest is committed first. Default MAX_OPEN_RUNS (2 000). */
  readonly maxOpenRuns?: number;
  /** Delay of the evaluation scheduled for a component another worker holds. Default 200 ms. */
  readonly retryMs?: number;
  /**
   * Told of a component whose judgement failed; its run is let go uncommitted (the component stays due) and the
   * others go on. Without it, the first failure ends the judgement (the caller's job fails).
   */
  readonly onFailure?: (ref: ComponentRef, error: unknown) => void;
  /**
   * A commit left unsettled by changes after its run's read is not followed by an evaluation of its own: every such
   * change has a judgement of its own coming (live results: their batch; cascades and responders' marks: their
   * scheduled evaluation). Default false (a history job evaluates such a component before it ends).
   */
  readonly unsettledJudgedElsewhere?: boolean;
  /**
   * Before its commit, a run folds what is left of its read: everything, or what was sampled before the time this
   * gives (epoch ms; results of the component waiting to be judged next, from whose month on the rest stays due).
   * Default: everything.
   */
  readonly foldUntil?: (ref: ComponentRef) => number | undefined;
  /**
   * How far the evaluation of a component on its own (after its commit was refused: its incidents changed meanwhile,
   * or its lock lapsed) may fold (arrivalLimit.ts); what it leaves is judged by a scheduled evaluation. Default:
   * everything.
   */
  readonly limit?: ArrivalLimit;
}

export class MonthlyJudgement {
  /** The open runs, the one advanced longest ago first. */
  private readonly runs = new Map<string, ComponentRun>();
  private readonly failed = new Set<string>();
  /** Components `openAll` found held by another worker or with nothing to do: not judged by this judgement. */
  private readonly closed = new Set<string>();
  private readonly atOnce: number;
  private readonly maxOpenRuns: number;
  private readonly retryMs: number;
  /** Component-months judged. */
  judged = 0;
  /**
   * Other components its shares and commits marked to be judged again (the group's cascade), by `componentKey`: judged
   * past a month whose group statistics this judgement changed, as live results judged beside a history import are.
   */
  readonly rejudged = new Set<string>();

  constructor(
    private readonly deps: EvaluationRunnerDeps,
    private readonly options: MonthlyJudgementOptions = {},
  ) {
    this.atOnce = options.atOnce ?? JUDGEMENTS_AT_ONCE;
    this.maxOpenRuns = options.maxOpenRuns ?? MAX_OPEN_RUNS;
    this.retryMs = options.retryMs ?? DEFAULT_EVALUATE_RETRY_MS;
  }

  /** The position the component's open run has folded to; undefined without an open run. */
  folded(ref: ComponentRef): StepPosition | null | undefined {
    return this.runs.get(componentKey(ref))?.position;
  }

  /**
   * Judges each component on its stored results sampled before `until` (the end of the month). `share` false: the
   * month's group shares are left to the commit (the last month before `commitAll`). Default true.
   */
  async month(components: readonly ComponentMonth[], until: number, share = true): Promise<void> {
    this.judged += components.length;
    await this.inTurn(components, (c) => this.isolated(c.ref, () => this.judgeMonth(c, until, share)));
  }

  /**
   * Opens the runs of components whose results are all stored already, and reads their stored samples at once: their
   * commits then cover exactly what was stored before (results stored meanwhile are left due, from their earliest
   * position, for the next evaluation). Components another worker holds are scheduled for later.
   */
  async openAll(refs: readonly ComponentRef[]): Promise<void> {
    await this.inTurn(refs, (ref) =>
      this.isolated(ref, async () => {
        const key = componentKey(ref);
        if (this.runs.has(key)) return;
        const opened = await this.openRun(ref);
        if (opened === undefined) {
          this.closed.add(key);
          return;
        }
        this.runs.set(key, opened);
        await opened.readStored();
      }),
    );
  }

  /** Commits every open run (and evaluates on their own those whose commit was not settled). */
  async commitAll(): Promise<void> {
    await this.inTurn([...this.runs.values()].map((run) => run.ref), (ref) => this.isolated(ref, () => this.commitRun(componentKey(ref))));
  }

  /** Lets go of every open run uncommitted: their components stay due. */
  async abandonAll(): Promise<void> {
    const runs = [...this.runs.values()];
    this.runs.clear();
    await Promise.all(runs.map((run) => run.abandon().catch(() => undefined)));
  }

  /** Whether a component's judgement failed (with `onFailure`). */
  hasFailed(ref: ComponentRef): boolean {
    return this.failed.has(componentKey(ref));
  }

  private async isolated(ref: ComponentRef, judge: () => Promise<void>): Promise<void> {
    const key = componentKey(ref);
    if (this.failed.has(key) || this.closed.has(key)) return;
    try {
      await judge();
    } catch (e) {
      const run = this.runs.get(key);
      this.runs.delete(key);
      await run?.abandon().catch(() => undefined);
      if (this.options.onFailure === undefined) throw e;
      this.failed.add(key);
      this.options.onFailure(ref, e);
    }
  }

  /** Runs `each` over `items`, `atOnce` at a time. */
  private async inTurn<T>(items: readonly T[], each: (item: T) => Promise<void>): Promise<void> {
    let next = 0;
    await Promise.all(
      Array.from({ length: Math.min(this.atOnce, items.length) }, async () => {
        while (next < items.length) await each(items[next++]!);
      }),
    );
  }

  /** Judges one component on a month's results: in its open run when it can, else by an evaluation of its own. */
  private async judgeMonth(month: ComponentMonth, until: number, share: boolean): Promise<void> {
    const { ref } = month;
    const key = componentKey(ref);
    let run = this.runs.get(key);
    if (run !== undefined && !month.inOrder) {
      // A revision or an earlier result: the run commits what it has, and an evaluation goes back as far as needed.
      await this.commitRun(key);
      run = undefined;
    }
    if (run === undefined && !month.inOrder) return this.evaluateAlone(ref);
    if (run === undefined) {
      if (this.runs.size >= this.maxOpenRuns) await this.commitRun(this.runs.keys().next().value!);
      const opened = await this.openRun(ref);
      if (opened === undefined) return;
      // Its input was read after this month's results were stored: its change mark covers them.
      run = opened;
    } else {
      run.covers(month.changes);
      this.runs.delete(key);
    }
    this.runs.set(key, run);
    await run.foldStored(until);
    if (!share) return;
    const shared = await run.share();
    if (!shared.ok) {
      // The lock lapsed: another evaluation judges the component from its last commit.
      this.runs.delete(key);
      await run.abandon();
      await this.scheduleLater(ref);
      return;
    }
    for (const c of shared.cascade) this.rejudged.add(componentKey(c.ref));
    await takeCascade(this.deps, ref, shared.cascade);
  }

  /** Commits an open run; when anything else marked the component meanwhile, an evaluation of its own follows. */
  private async commitRun(key: string): Promise<void> {
    const run = this.runs.get(key);
    if (run === undefined) return;
    this.runs.delete(key);
    try {
      await run.foldStored(this.options.foldUntil?.(run.ref));
    } catch (e) {
      await run.abandon().catch(() => undefined);
      throw e;
    }
    const result = summarizeEvaluation(await run.commit());
    if (result.kind === 'evaluated') {
      for (const c of result.cascade) this.rejudged.add(componentKey(c.ref));
      await takeEvaluation(this.deps, run.ref, result);
      if (result.settled || this.options.unsettledJudgedElsewhere === true) return;
    }
    await this.evaluateAlone(run.ref);
  }

  /** Opens a component's run; undefined when there is nothing to do or another worker holds it (then scheduled for later). */
  private async openRun(ref: ComponentRef): Promise<ComponentRun | undefined> {
    const opened = await ComponentRun.open(this.deps, ref);
    if (opened instanceof ComponentRun) return opened;
    if (opened.kind === 'busy') await this.scheduleLater(ref);
    return undefined;
  }

  private async evaluateAlone(ref: ComponentRef): Promise<void> {
    if ((await runEvaluation(this.deps, ref, this.options.limit)) !== 'done') await this.scheduleLater(ref);
  }

  private async scheduleLater(ref: ComponentRef): Promise<void> {
    await scheduleEvaluation(this.deps.evaluateQueues[this.deps.partitions.of(ref)]!, ref, this.retryMs);
  }
}
