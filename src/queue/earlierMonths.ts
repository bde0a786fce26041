/**
 * A month is judged only when the group's earlier months are: before a batch (resultBatches.ts) or a history job
 * (processors/historyProcessor.ts) judges its components on a sampling month, it waits while results of earlier months
 * of other components of the same group are stored and not yet judged elsewhere: by another worker process, or by a
 * worker that died holding them (their jobs are taken again once their lock lapses). The group's statistics as of the
 * month (the sum of the months before it) then hold every result stored before, and the verdict is the one replay
 * gives: no incident is opened on statistics that still lack another process's earlier months, only to be withdrawn
 * when those are judged.
 *
 * What is stored and not yet judged is kept in Redis per group (GroupLedger.unjudgedBefore): the store script adds a
 * result, the commit that writes its group share takes it out. Results this process holds for its own next batch are
 * not waited for (the batch under way must end before they are judged); those the group's cascade puts right, as
 * before. A wait lasts at most `maxWaitMs`; results still unjudged then are given up on (not waited for again by this
 * process) and the month is judged without them: what they change is judged again when they are (the group's cascade),
 * and an incident opened meanwhile is withdrawn, as without the wait.
 */
import { componentKey } from '../domain/event.ts';
import type { ComponentRef, GroupLedger, UnjudgedResult } from '../pipeline/ports.ts';

/** Longest wait for the earlier months of other processes, in ms. Default 60 000 (a dead worker's jobs are taken again within about a minute: `jobLockMs` + `stalledCheckMs`). */
export const DEFAULT_EARLIER_MONTHS_WAIT_MS = 60_000;

/** Results given up on that are remembered (the oldest are forgotten first). */
const GIVEN_UP_KEPT = 10_000;

/** Unjudged results read per group and look. */
const READ_AT_MOST = 2000;

export interface EarlierMonthsOptions {
  /** Longest wait, in ms; 0 waits for nothing (the behaviour before: the cascade puts verdicts right). Default 60 000. */
  readonly maxWaitMs?: number;
  /** First pause between looks, in ms, doubling up to `maxPauseMs`. Default 10. */
  readonly firstPauseMs?: number;
  /** Longest pause between looks, in ms. Default 250. */
  readonly maxPauseMs?: number;
  /** Told when a wait ends (for metrics and logs): how long it lasted, and how many results it gave up on. */
  readonly onWait?: (waitedMs: number, givenUp: number) => void;
  /** The clock of the waits. Default Date.now. */
  readonly now?: () => number;
  /** The pause between looks. Default setTimeout. */
  readonly sleep?: (ms: number) => Promise<void>;
}

export class EarlierMonths {
  /** Components whose results wait here for a next batch, with how many batches they wait in. */
  private readonly heldHere = new Map<string, number>();
  /** `component key \u001f sampleId \u001f time` of the results given up on. */
  private readonly givenUp = new Set<string>();
  private readonly maxWaitMs: number;
  private readonly firstPauseMs: number;
  private readonly maxPauseMs: number;
  private readonly now: () => number;
  private readonly sleep: (ms: number) => Promise<void>;
  /** Waits that had to wait, and results given up on (for the tests' and the benchmark's view). */
  readonly counts = { waits: 0, givenUp: 0 };

  constructor(
    private readonly ledger: Pick<GroupLedger, 'unjudgedBefore'>,
    private readonly options: EarlierMonthsOptions = {},
  ) {
    this.maxWaitMs = options.maxWaitMs ?? DEFAULT_EARLIER_MONTHS_WAIT_MS;
    this.firstPauseMs = options.firstPauseMs ?? 10;
    this.maxPauseMs = options.maxPauseMs ?? 250;
    this.now = options.now ?? Date.now;
    this.sleep = options.sleep ?? ((ms) => new Promise((resolve) => setTimeout(resolve, ms)));
  }

  /** A component's results wait in this process for a batch after the one under way (not waited for here). */
  hold(ref: ComponentRef): void {
    const key = componentKey(ref);
    this.heldHere.set(key, (this.heldHere.get(key) ?? 0) + 1);
  }

  /** The batch they waited for has taken them. */
  release(ref: ComponentRef): void {
    const key = componentKey(ref);
    const n = (this.heldHere.get(key) ?? 0) - 1;
    if (n > 0) this.heldHere.set(key, n);
    else this.heldHere.delete(key);
  }

  /**
   * Resolves when no result of the `groups` sampled before `before` (epoch ms) is stored and unjudged, other than those
   * of the components `own` (judged by the caller in month order) and those held here; or when `maxWaitMs` has passed.
   * `clear`: nothing earlier is left unjudged elsewhere; `gave-up`: the wait ran out; `regroup`: a component waited for
   * has meanwhile come to the caller's own next batch (`heldByCaller`; a dead worker's job taken again by this process):
   * the caller may end its batch uncommitted and judge it again together with that component, in month order.
   */
  async wait(groups: Iterable<string>, before: number, own: (key: string) => boolean, heldByCaller?: (key: string) => boolean): Promise<'clear' | 'gave-up' | 'regroup'> {
    if (this.maxWaitMs <= 0) return 'clear';
    const names = [...new Set(groups)];
    if (names.length === 0) return 'clear';
    const started = this.now();
    let pause = this.firstPauseMs;
    const waitedFor = new Set<string>();
    for (;;) {
      const blocking = await this.blocking(names, before, own);
      if (blocking.length === 0) break;
      if (this.now() - started >= this.maxWaitMs) {
        for (const r of blocking) this.giveUp(r);
        this.counts.givenUp += blocking.length;
        this.options.onWait?.(this.now() - started, blocking.length);
        return 'gave-up';
      }
      for (const r of blocking) waitedFor.add(componentKey(r.ref));
      await this.sleep(Math.min(pause, Math.max(1, this.maxWaitMs - (this.now() - started))));
      pause = Math.min(pause * 2, this.maxPauseMs);
    }
    if (waitedFor.size === 0) return 'clear';
    this.counts.waits += 1;
    this.options.onWait?.(this.now() - started, 0);
    return heldByCaller !== undefined && [...waitedFor].some(heldByCaller) ? 'regroup' : 'clear';
  }

  private async blocking(groups: readonly string[], before: number, own: (key: string) => boolean): Promise<UnjudgedResult[]> {
    const lists = await Promise.all(groups.map((g) => this.ledger.unjudgedBefore(g, before, READ_AT_MOST)));
    return lists.flat().filter((r) => {
      const key = componentKey(r.ref);
      return !own(key) && !this.heldHere.has(key) && !this.givenUp.has(givenUpKey(r));
    });
  }

  private giveUp(r: UnjudgedResult): void {
    if (this.givenUp.size >= GIVEN_UP_KEPT) this.givenUp.delete(this.givenUp.values().next().value!);
    this.givenUp.add(givenUpKey(r));
  }
}

function givenUpKey(r: UnjudgedResult): string {
  return `${componentKey(r.ref)}\u001f${r.sampleId}\u001f${r.time}`;
}
