/**
 * Arrival order for the evaluations that no results job asks for: an evaluate job (a component another worker held,
 * a group's cascade, a responder's mark on a sample). Such an evaluation folds the component's stored samples; those
 * of a result whose results job is still active, in any process, are not judged yet in arrival order (that job's batch
 * judges them, after the earlier results of its group: resultBatches.ts), and a sample of a later month than a result
 * of its group that is not judged yet would be judged on group statistics that still lack it. Folded now, either
 * could open an incident that is withdrawn once the earlier result is judged: a sample read against the one before
 * the missing one (an oil change not yet known reads as oil hours gone back) or a month's statistics without a result
 * of theirs.
 *
 * The limit: the fold stops at the first instant of the earliest sampling month of the component's own results that
 * results jobs hold or that wait at the head of a results queue (or of any result whose component cannot be read), and
 * at the first instant of the month after the earliest such month of its group. What it leaves stays due; the evaluate
 * job comes back shortly (evaluateProcessor.ts), and judges without the limit once it is older than the batches' own
 * longest wait for earlier results (`arrivalWaitMs`).
 */
import { componentKey } from '../domain/event.ts';
import { monthOf, startOfNextMonth } from '../pipeline/groupShares.ts';
import type { ComponentRef } from '../pipeline/ports.ts';
import type { ActiveJob, ActiveJobs } from './arrivalOrder.ts';

/** How far an evaluate job may fold a component of `group` (epoch ms, exclusive); undefined: everything stored. */
export type ArrivalLimit = (ref: ComponentRef, group: string) => Promise<number | undefined>;

/** The limit from the results jobs active in any process, this one's included, and those at the head of each queue. */
export function arrivalLimit(jobs: ActiveJobs): ArrivalLimit {
  return async (ref, group) => limitOf(await jobs(() => false), ref, group);
}

/** How far a component of `group` may be folded before the results of `jobs` are judged (epoch ms; undefined: no limit). */
export function limitOf(jobs: readonly ActiveJob[], ref: ComponentRef, group: string): number | undefined {
  const key = componentKey(ref);
  let until = Infinity;
  for (const job of jobs) {
    if (job.component === undefined || job.component === key) until = Math.min(until, job.month);
    else if (job.group === group) until = Math.min(until, job.month === -Infinity ? -Infinity : startOfNextMonth(monthOf(job.month)));
  }
  return until === Infinity ? undefined : until;
}
