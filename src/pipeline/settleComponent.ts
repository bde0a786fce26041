/**
 * Evaluates a component until nothing is due, then every component its commits marked for evaluation again (the
 * group's cascade), in order, until the whole group is settled. For in-process runs (replay, backtest, tests);
 * the live worker schedules the same evaluations as queue jobs instead.
 */
import { componentKey } from '../domain/event.ts';
import { evaluateStored, type EvaluationDeps, type EvaluationResult } from './evaluateStored.ts';
import type { ComponentRef } from './ports.ts';

export async function settleComponent(deps: EvaluationDeps, ref: ComponentRef, onEvaluated?: (r: Extract<EvaluationResult, { kind: 'evaluated' }>, ref: ComponentRef) => void): Promise<number> {
  const queue: ComponentRef[] = [ref];
  const queued = new Set([componentKey(ref)]);
  let evaluations = 0;
  while (queue.length > 0) {
    const next = queue.shift()!;
    queued.delete(componentKey(next));
    for (;;) {
      const result = await evaluateStored(deps, next);
      if (result.kind === 'retry') continue;
      if (result.kind === 'busy' || result.kind === 'lost-lock') throw new Error(`${componentKey(next)}: the component is held by another evaluation`);
      if (result.kind !== 'evaluated') break;
      evaluations += 1;
      onEvaluated?.(result, next);
      await deps.store.markDirty(result.cascade);
      for (const c of result.cascade) {
        if (!queued.has(componentKey(c.ref))) {
          queued.add(componentKey(c.ref));
          queue.push(c.ref);
        }
      }
      if (result.settled) break;
    }
  }
  return evaluations;
}
