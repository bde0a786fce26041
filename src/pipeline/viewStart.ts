/**
 * Where a bounded view of a long history starts (charts, series): a stored sparse checkpoint, so that reading and
 * folding cost what the latest samples cost, whatever the length of the history.
 */
import { comparePosition } from '../incidents/verdict.ts';
import type { Checkpoint, ComponentRef, ComponentStore, EvaluationInput } from './ports.ts';

/**
 * The stored checkpoint a bounded view starts from: the latest one at least `latest` samples before the last
 * evaluated one, provided nothing before it waits to be evaluated (a late or revised result there would make it
 * stale). Undefined: start from the first sample.
 */
export async function viewStart(store: ComponentStore, ref: ComponentRef, input: EvaluationInput | undefined, latest: number | undefined): Promise<Checkpoint | undefined> {
  const evaluated = input?.latest?.count ?? 0;
  if (latest === undefined || evaluated <= latest) return undefined;
  const cp = await store.checkpointAtMost(ref, evaluated - latest);
  if (cp === undefined || cp.position === null || cp.count === 0) return undefined;
  if (input?.dirtyFrom !== undefined && comparePosition(input.dirtyFrom, cp.position) <= 0) return undefined;
  return cp;
}
