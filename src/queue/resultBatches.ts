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
 *
 * Several worker processes judge in arrival order (arrivalOrder.ts): one set of batches takes the results of every
 * partition's queue, and a batch takes only the results that no earlier result another process holds and has not judged
 * yet, or that waits to be taken on a queue behind the others, must precede (one of an earlier month of the same
 * like-for-like group, or of the same component), and waits for those (looking every `ARRIVAL_POLL_MS`, at most
 * `arrivalWaitMs`); the rest waits for the next batch. The process that holds the earliest result not yet judged never
 * waits, so the processes take turns, and a burst spanning months is judged month by month across them as one process
 * judges it: no component is judged past a month whose results of its group another process still holds. Another
 * group's results do not hold it up: a result's verdicts depend on its own component's results and its own group's
 * statistics only (tests/integration/result-batches.test.ts judges one group's whole history before the other's). A
 * batch's commit folds no stored result of a component from the month of its earliest result another process holds
 * (that process's batch judges them).
 */
import { componentKey, type Sample } from '../domain/event.ts';
import { monthOf, startOfNextMonth } from '../pipeline/groupShares.ts';
import type { ComponentRef } from '../pipeline/ports.ts';
import { limitOf, type ArrivalLimit } from './arrivalLimit.ts';
import { monthStart, ONE_GROUP, resultAbout, type ActiveJob, type ActiveJobs, type GroupOf } from './arrivalOrder.ts';
import type { EvaluationRunnerDeps } from './evaluationRunner.ts';
import { MonthlyJudgement } from './monthlyJudgement.ts';
import { DEFAULT_EVALUATE_RETRY_MS } from './queues.ts';

/** One result waiting to be judged. */
interface Pending {
  /** The arrival order of its job (its BullMQ id); undefined: none known, judged in the next batch. */
  readonly order: number | undefined;
  readonly time: number;
  /** The like-for-like group of its component (`groupOf`). */
  readonly group: string;
  readonly resolve: () => void;
  readonly reject: (e: unknown) => void;
}

interface Waiting {
  readonly ref: ComponentRef;
  readonly pending: Pending[];
}

/** A result that arrived before others and is not judged yet: its arrival order, component, group and sampling month. */
type Blocker = Pick<ActiveJob, 'order' | 'component' | 'group' | 'month'>;

/** A batch: what it judges, and where another process holds results of its components. */
interface Taken {
  readonly batch: Batched[];
  /** By `componentKey`: the first instant of the earliest sampling month of its results another process holds. */
  readonly heldFrom: ReadonlyMap<string, number>;
}

/** A component's share of a batch. */
interface Batched {
  readonly ref: ComponentRef;
  /** Sampling months (`YYYY-MM`) of its results in the batch. */
  readonly months: ReadonlySet<string>;
  readonly pending: readonly Pending[];
}

/** How often a batch waiting for results another process holds looks again. */
export const ARRIVAL_POLL_MS = 5;

/**
 * How long an earlier result waiting to be taken is waited for while no worker takes it (every process that could is
 * holding as many results jobs as it takes at once, each waiting in turn); once taken, it is waited for as any other.
 * Counted only while this process waits for earlier results (`takeReady`), not while it judges a batch: the slots that
 * batch holds free when it has committed.
 */
export const QUEUED_GRACE_MS = 5_000;

/**
 * How long an earlier result waits to be taken before this process, finding it blocks results it holds, takes it
 * itself outside its worker slots (`takeQueued`): every slot of every process may be held by results waiting for it.
 */
export const TAKE_QUEUED_AFTER_MS = 500;

/** Default of `arrivalWaitMs`: a batch judges without the earlier results another process holds after this long. */
export const DEFAULT_ARRIVAL_WAIT_MS = 90_000;

export interface ResultBatchesOptions {
  /** Delay of the evaluation scheduled for a component another worker holds. Default 200 ms. */
  readonly retryMs?: number;
  /** Components of one month judged at a time. Default JUDGEMENTS_AT_ONCE (monthlyJudgement.ts). */
  readonly atOnce?: number;
  /**
   * The partition's active results jobs in every process (arrivalOrder.ts `activeJobs`): a result then waits for those
   * that arrived before it, are held by another process, and are of an earlier sampling month of its group (`groupOf`)
   * or of its own component.
   * Default: none (one process).
   */
  readonly activeJobs?: ActiveJobs;
  /**
   * Longest wait of a batch for earlier results another process holds or that wait to be taken (a process that hangs
   * without dying keeps its jobs active; one that dies gives them up once its job lock lapses and a stall check puts
   * them back at the head of the line, within about a minute with BullMQ's defaults): after it, the batch judges
   * without them, and their judgement later judges again what they change (an incident opened meanwhile may be
   * withdrawn). Default DEFAULT_ARRIVAL_WAIT_MS (90 000 ms).
   */
  readonly arrivalWaitMs?: number;
  /**
   * Takes the results job at the head of partition `partition`'s wait list outside the worker's slots and runs it
   * (queuedResultTaker.ts); called for an earlier result waiting to be taken longer than TAKE_QUEUED_AFTER_MS that
   * results held here wait for, once per such result at a time. Without it, such a result is waited for
   * QUEUED_GRACE_MS only.
   */
  readonly takeQueued?: (partition: number) => Promise<void>;
  /**
   * The group each result's component is judged with; the same function `activeJobs` and the results jobs' `hold`
   * describe results with (arrivalOrder.ts `resultAbout`). A result then waits only for earlier results of an earlier
   * month of its own group (or of its own component). Default ONE_GROUP: every earlier result of an earlier month.
   */
  readonly groupOf?: GroupOf;
}

export class ResultBatches {
  private waiting = new Map<string, Waiting>();
  /** When each earlier result waiting to be taken was first seen so (`waitClock`), by arrival order. */
  private queuedSince = new Map<number, number>();
  /** Milliseconds spent waiting for earlier results (in `takeReady`), up to its last look. */
  private waitClock = 0;
  /** Of those, the ones no longer waited for (QUEUED_GRACE_MS), for the log. */
  private givenUp = new Set<number>();
  /**
   * The results jobs this process holds (from `hold` to its release), by arrival order: how many times (a job taken
   * again while its first run ends), and what each says of its result.
   */
  private readonly held = new Map<number, { count: number; readonly about: Omit<Blocker, 'order'> }>();
  private underWay = false;
  /** Jobs being taken outside the worker's slots (`takeQueued`), by partition. */
  private readonly taking = new Map<number, number>();
  private readonly retryMs: number;
  private readonly arrivalWaitMs: number;
  private readonly groupOf: GroupOf;
  /** Batches judged, and components judged in them (for the benchmark's and the tests' view of the coalescing). */
  readonly counts = { batches: 0, components: 0, arrivalWaits: 0, takenOutsideSlots: 0 };

  constructor(
    private readonly deps: EvaluationRunnerDeps,
    private readonly options: ResultBatchesOptions = {},
  ) {
    this.retryMs = options.retryMs ?? DEFAULT_EVALUATE_RETRY_MS;
    this.arrivalWaitMs = options.arrivalWaitMs ?? DEFAULT_ARRIVAL_WAIT_MS;
    this.groupOf = options.groupOf ?? ONE_GROUP;
  }

  /**
   * Counts a results job of arrival order `order` as this process's until the returned release is called (from when
   * its job starts to when it ends), so that a batch does not wait for it as for another process's. `about`: its
   * result's component and sampling month (arrivalOrder.ts `resultAbout`): until the job hands its result to `judge`
   * (while it is being stored), the results that arrived after it wait for it as for another process's, since it may
   * be of an earlier month; unknown, it holds up every later result.
   */
  hold(order: number | undefined, about: Omit<Blocker, 'order'> = { component: undefined, group: undefined, month: -Infinity }): () => void {
    if (order === undefined) return () => undefined;
    const entry = this.held.get(order);
    if (entry === undefined) this.held.set(order, { count: 1, about });
    else entry.count += 1;
    let released = false;
    return () => {
      if (released) return;
      released = true;
      const entry = this.held.get(order)!;
      entry.count -= 1;
      if (entry.count === 0) this.held.delete(order);
    };
  }

  /** What a results job's data says of its result (arrivalOrder.ts `resultAbout`, with this process's `groupOf`), for `hold`. */
  about(event: unknown): Omit<Blocker, 'order'> {
    return resultAbout(event, this.groupOf);
  }

  /** The results jobs this process holds that have not handed their result to `judge` yet (being stored). */
  private beingStored(): Blocker[] {
    const handed = new Set<number>();
    for (const w of this.waiting.values()) for (const p of w.pending) if (p.order !== undefined) handed.add(p.order);
    const out: Blocker[] = [];
    for (const [order, { about }] of this.held) if (!handed.has(order)) out.push({ order, ...about });
    return out;
  }

  /**
   * Resolves when an evaluation covering `sample` (stored before this call) has committed, or has been scheduled.
   * `order`: the arrival order of its job (arrivalOrder.ts `arrivalOf`), when the batches wait for other processes.
   */
  judge(sample: Sample, order?: number): Promise<void> {
    const key = componentKey(sample);
    let entry = this.waiting.get(key);
    if (entry === undefined) {
      entry = { ref: { unit: sample.unit, component: sample.component }, pending: [] };
      this.waiting.set(key, entry);
    }
    const pending = entry.pending;
    const group = this.groupOf(sample);
    const done = new Promise<void>((resolve, reject) => pending.push({ order, time: sample.time, group, resolve, reject }));
    if (!this.underWay) void this.drain();
    return done;
  }

  private async drain(): Promise<void> {
    this.underWay = true;
    try {
      while (this.waiting.size > 0) {
        const { batch, heldFrom } = this.options.activeJobs === undefined ? { batch: this.split([], Infinity), heldFrom: new Map<string, number>() } : await this.takeReady(this.options.activeJobs);
        this.counts.batches += 1;
        this.counts.components += batch.length;
        this.deps.metrics?.batched(batch.length, batch.reduce((n, w) => n + w.pending.length, 0));
        const failures = await this.judgeBatch(batch, heldFrom).catch((e: unknown) => new Map(batch.map((w) => [componentKey(w.ref), e])));
        for (const w of batch) {
          const key = componentKey(w.ref);
          for (const waiter of w.pending) {
            if (failures.has(key)) waiter.reject(failures.get(key));
            else waiter.resolve();
          }
        }
      }
    } finally {
      this.underWay = false;
    }
  }

  /**
   * Takes the waiting results no result held by another process must come before (all of them with one process, or
   * once `arrivalWaitMs` has passed); the others stay waiting, with those arriving meanwhile.
   */
  private async takeReady(activeJobs: ActiveJobs): Promise<Taken> {
    const started = performance.now();
    const clockAtStart = this.waitClock;
    const clock = () => clockAtStart + (performance.now() - started);
    let waited = false;
    try {
      for (;;) {
        const { elsewhere, checked } = await this.heldElsewhere(activeJobs, clock);
        // Results this process holds that are still being stored come first too: they may be of an earlier month.
        const ready = this.split([...elsewhere, ...this.beingStored()], checked);
        if (ready.length > 0) return { batch: ready, heldFrom: heldFrom(elsewhere) };
        // Results that arrived here during the look are looked at again at once.
        if (this.unchecked(checked)) continue;
        if (performance.now() - started >= this.arrivalWaitMs) {
          this.deps.logger.warn({ waitedMs: Math.round(performance.now() - started), results: [...this.waiting.values()].reduce((n, w) => n + w.pending.length, 0) }, 'results judged without earlier ones another worker process still holds');
          return { batch: this.split([], Infinity), heldFrom: heldFrom(elsewhere) };
        }
        if (!waited) this.counts.arrivalWaits += 1;
        waited = true;
        this.takeStuck(elsewhere, checked, clock());
        await new Promise((resolve) => setTimeout(resolve, ARRIVAL_POLL_MS));
      }
    } finally {
      this.waitClock = clock();
    }
  }

  /**
   * The active results jobs another process holds, and the latest arrival order of the results waiting here when they
   * were looked up (`checked`; those handed over during the look arrived later). None, and every result checked, when
   * Redis does not answer. `clock`: the time waited for earlier results (`waitClock`), in milliseconds.
   */
  private async heldElsewhere(activeJobs: ActiveJobs, clock: () => number): Promise<{ readonly elsewhere: readonly ActiveJob[]; readonly checked: number }> {
    let latest = -Infinity;
    const waiting = new Set<number>();
    for (const w of this.waiting.values())
      for (const p of w.pending)
        if (p.order !== undefined) {
          waiting.add(p.order);
          if (p.order > latest) latest = p.order;
        }
    try {
      // Its own results are told apart once the list is in: a job of this process that ended meanwhile has left it.
      const elsewhere = await activeJobs((order) => this.held.has(order) || waiting.has(order));
      // A result waiting to be taken that no worker takes within QUEUED_GRACE_MS is not waited for any longer.
      const now = clock();
      const since = new Map<number, number>();
      const givenUp = new Set<number>();
      const kept = elsewhere.filter((job) => {
        if (!job.queued) return true;
        const first = this.queuedSince.get(job.order) ?? now;
        since.set(job.order, first);
        if (now - first < QUEUED_GRACE_MS) return true;
        givenUp.add(job.order);
        return false;
      });
      this.queuedSince = since;
      // Said only of those that results held here arrived after (others hold nothing up).
      const newly = [...givenUp].filter((order) => !this.givenUp.has(order) && order < latest);
      this.givenUp = givenUp;
      if (newly.length > 0) this.deps.logger.warn({ results: newly.length, firstJob: Math.min(...newly) }, 'earlier results waiting to be taken that no worker takes are not waited for any longer');
      return { elsewhere: kept, checked: latest };
    } catch {
      // Redis does not answer: the batch's own reads fail the same way, and its jobs are retried.
      return { elsewhere: [], checked: Infinity };
    }
  }

  /**
   * Takes, outside the worker's slots, as many results jobs from the head of each partition's wait list as there are
   * earlier results waiting there longer than TAKE_QUEUED_AFTER_MS that results held here arrived after (`latest`: the
   * latest arrival order of those, as the look that found `elsewhere` had them; those taken meanwhile count). `now`:
   * the time waited for earlier results (`waitClock`).
   */
  private takeStuck(elsewhere: readonly ActiveJob[], latest: number, now: number): void {
    const take = this.options.takeQueued;
    if (take === undefined) return;
    const stuck = new Map<number, number>();
    for (const job of elsewhere) if (job.queued && job.order < latest && now - (this.queuedSince.get(job.order) ?? now) >= TAKE_QUEUED_AFTER_MS) stuck.set(job.partition, (stuck.get(job.partition) ?? 0) + 1);
    for (const [partition, n] of stuck) {
      const taking = this.taking.get(partition) ?? 0;
      if (taking >= n) continue;
      this.deps.logger.info({ results: n - taking, partition }, 'earlier results waiting to be taken that results held here wait for: taken outside the worker slots');
      for (let i = taking; i < n; i++) {
        this.taking.set(partition, (this.taking.get(partition) ?? 0) + 1);
        this.counts.takenOutsideSlots += 1;
        void take(partition)
          .catch((e: unknown) => this.deps.logger.warn({ err: (e as Error).message, partition }, 'taking a waiting result outside the worker slots failed'))
          .finally(() => this.taking.set(partition, this.taking.get(partition)! - 1));
      }
    }
  }

  /** Whether a result waiting here arrived after `checked` (handed over while the active jobs were looked up). */
  private unchecked(checked: number): boolean {
    for (const w of this.waiting.values()) for (const p of w.pending) if (p.order !== undefined && p.order > checked) return true;
    return false;
  }

  /**
   * Takes out of the waiting results, by component, those that no result of `elsewhere` must come before: one that
   * arrived earlier must be judged first when it is of an earlier sampling month and of the same group (the group
   * statistics a result is judged with are those of the months before its own) or of the same component. Results
   * without an order are taken; those that arrived after `checked` (the latest order `elsewhere` was looked up for)
   * stay for the next look.
   */
  private split(elsewhere: readonly Blocker[], checked: number): Batched[] {
    const blockers = [...elsewhere].sort((x, y) => x.order - y.order);
    // By group, the blockers' arrival orders and the earliest month among the first i of them; and the earliest order
    // held elsewhere per component (undefined: a result that may be of any component).
    const byGroup = new Map<string, { readonly orders: number[]; readonly earliestMonth: number[] }>();
    const firstOfComponent = new Map<string | undefined, number>();
    for (const b of blockers) {
      if (!firstOfComponent.has(b.component)) firstOfComponent.set(b.component, b.order);
      if (b.group === undefined) continue;
      let g = byGroup.get(b.group);
      if (g === undefined) byGroup.set(b.group, (g = { orders: [], earliestMonth: [Infinity] }));
      g.orders.push(b.order);
      g.earliestMonth.push(Math.min(g.earliestMonth.at(-1)!, b.month));
    }
    const anyComponent = firstOfComponent.get(undefined) ?? Infinity;
    const blocked = (key: string, p: Pending): boolean => {
      if (p.order === undefined) return false;
      const order = p.order;
      if (order > checked) return true;
      if (Math.min(firstOfComponent.get(key) ?? Infinity, anyComponent) < order) return true;
      const g = byGroup.get(p.group);
      if (g === undefined) return false;
      // Blockers of its group that arrived before it: the first `before` of them.
      let lo = 0;
      let hi = g.orders.length;
      while (lo < hi) {
        const mid = (lo + hi) >> 1;
        if (g.orders[mid]! < order) lo = mid + 1;
        else hi = mid;
      }
      return g.earliestMonth[lo]! < monthStart(p.time);
    };
    const batch: Batched[] = [];
    for (const [key, w] of this.waiting) {
      const ready = w.pending.filter((p) => !blocked(key, p));
      if (ready.length === 0) continue;
      batch.push({ ref: w.ref, months: new Set(ready.map((p) => monthOf(p.time))), pending: ready });
      if (ready.length === w.pending.length) this.waiting.delete(key);
      else this.waiting.set(key, { ref: w.ref, pending: w.pending.filter((p) => !ready.includes(p)) });
    }
    return batch;
  }

  /** How far a component may be folded before the results other processes hold, read when asked (arrivalLimit.ts). */
  private elsewhereLimit(activeJobs: ActiveJobs): ArrivalLimit {
    return async (ref, group) => limitOf(await activeJobs((order) => this.held.has(order)), ref, group);
  }

  /** Judges a batch; the components whose judgement failed, with the error. */
  private async judgeBatch(batch: readonly Batched[], heldFrom: ReadonlyMap<string, number>): Promise<Map<string, unknown>> {
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
      // except from the month of the component's results waiting for the next batch, which judges them, or held by
      // another process, whose batch judges them.
      // A component judged on its own (its commit was refused) leaves the results another process holds, and
      // later months of their group, to the batches that judge them (arrivalLimit.ts), as an evaluate job does.
      ...(this.options.activeJobs !== undefined && { limit: this.elsewhereLimit(this.options.activeJobs) }),
      foldUntil: (ref) => {
        const key = componentKey(ref);
        const next = this.waiting.get(key);
        const until = Math.min(next === undefined ? Infinity : Math.min(...next.pending.map((p) => monthStart(p.time))), heldFrom.get(key) ?? Infinity);
        return until === Infinity ? undefined : until;
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

/** By component: the first instant of the earliest sampling month of its results held by another process. */
function heldFrom(elsewhere: readonly ActiveJob[]): Map<string, number> {
  const out = new Map<string, number>();
  for (const job of elsewhere) if (job.component !== undefined && job.month < (out.get(job.component) ?? Infinity)) out.set(job.component, job.month);
  return out;
}
