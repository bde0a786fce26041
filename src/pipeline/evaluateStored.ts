/**
 * The evaluation of one stored component, shared by the live worker, replay and backtest: a component run
 * (componentRun.ts) opened, folded over every stored sample after its starting checkpoint, and committed — checkpoint,
 * findings, group shares, incidents and their messages in one atomic write. A result in order starts from the latest
 * checkpoint, so its cost does not grow with the history; a late, revised or re-judged one from the latest sparse
 * checkpoint before it.
 *
 * A commit that changes the group's statistics of a month before others were evaluated up to marks them for
 * evaluation again from the month after (`cascade`), so that every verdict ends up depending on the set of results
 * only, whatever the order they arrived in.
 */
import { ComponentRun } from './componentRun.ts';
import type { EvaluationDeps, EvaluationResult } from './evaluationResult.ts';
import type { ComponentRef, StoredSample } from './ports.ts';

export { DEFAULT_CHECKPOINT_EVERY, DEFAULT_LOCK_TTL_MS, emptyCheckpoint, type EvaluationDeps, type EvaluationResult } from './evaluationResult.ts';

/**
 * How far the evaluation may fold, asked once the component's lock is held: the first instant (epoch ms) of the samples
 * to leave due, given the component's like-for-like group; undefined: every stored sample. The stored samples from it
 * on stay due after the commit (queue/arrivalLimit.ts: results other workers have not judged yet come first).
 */
export type FoldUntil = (group: string) => Promise<number | undefined>;

export async function evaluateStored(deps: EvaluationDeps, ref: ComponentRef, until?: FoldUntil): Promise<EvaluationResult> {
  const run = await ComponentRun.open(deps, ref);
  if (!(run instanceof ComponentRun)) return run;
  let folded: number;
  try {
    folded = await run.foldStored(until === undefined ? undefined : await until(run.group));
  } catch (e) {
    await run.abandon().catch(() => undefined);
    throw e;
  }
  if (folded === 0 && run.incremental) {
    const leftDue = run.leftDue;
    await run.abandon();
    return leftDue ? { kind: 'unchanged', leftDue } : { kind: 'unchanged' };
  }
  return run.commit();
}

export type { StoredSample };
