/**
 * Arrival order across worker processes. With one partition, a results job's BullMQ id counts up as results arrive on
 * the queue (the queue numbers the jobs it is given). With the keys in several partitions, each partition has a
 * results queue of its own, whose ids say nothing of another's: the producer then numbers the results itself, across
 * all partitions, from one counter under the shared tag (`arrivalJobId`), and a result's job id is its place in that
 * order. Either way the active jobs other processes hold, and those waiting at the head of each queue, tell a batch
 * which results arrived before its own and are not judged yet (resultBatches.ts). A results job stays active until the
 * batch that judged it has committed, so a job that has left the active list holds a result judged (or refused).
 */
import { componentKey } from '../domain/event.ts';
import type { RedisConnection } from '../redis/connection.ts';

/** A results job active in some process: its arrival order, and the component, group and sampling month of its result. */
export interface ActiveJob {
  readonly order: number;
  /** `componentKey` of the result; undefined when its data does not name one (it is refused when taken). */
  readonly component: string | undefined;
  /** The like-for-like group of its component (`GroupOf`); undefined when its data does not name a component. */
  readonly group: string | undefined;
  /** The first instant (epoch ms, UTC) of the result's sampling month; -Infinity when its data has no sampling time. */
  readonly month: number;
  /** Waiting to be taken (at the head of the wait list), not held by any worker. */
  readonly queued: boolean;
  /** The partition whose results queue holds it. */
  readonly partition: number;
}

/**
 * The like-for-like group a result's component is judged with (domain/settings.ts `groupOf` under the configuration):
 * a result's verdicts depend on its own component's results and its group's statistics only, so results of other
 * groups need not come before it.
 */
export type GroupOf = (c: { readonly unit: string; readonly component: string; readonly group?: string }) => string;

/** Without a `GroupOf`: every component in one group, so that any earlier result of an earlier month comes first. */
export const ONE_GROUP: GroupOf = () => '';

/** The results jobs active on the partitions' queues, in any process, but those of `skip` (this process's own). */
export type ActiveJobs = (skip: (order: number) => boolean) => Promise<readonly ActiveJob[]>;

/** The first instant (epoch ms, UTC) of the month of `time`. */
export function monthStart(time: number): number {
  const d = new Date(time);
  return Date.UTC(d.getUTCFullYear(), d.getUTCMonth(), 1);
}

/**
 * The job id the producer gives a result when the keys are partitioned: `r`, its place in the arrival order across all
 * partitions, and after a dash `unique`, a text of digits and lower-case letters no other job of the producer's has
 * (BullMQ refuses an id of its own that is a whole number, and adds no job whose id another job on the queue has: were
 * the counter ever set back, by a fail-over that lost its last increments, a result must still not be dropped).
 */
export function arrivalJobId(order: number, unique: string): string {
  return `r${order}-${unique}`;
}

/** The arrival order of a results job's id (BullMQ's number, or `arrivalJobId`'s), or undefined for another id. */
export function arrivalOf(jobId: string | undefined): number | undefined {
  const m = jobId === undefined ? null : /^(?:(\d{1,15})|r(\d{1,15})-[0-9a-z]+)$/.exec(jobId);
  return m === null ? undefined : Number(m[1] ?? m[2]);
}

/**
 * Jobs at the head of the wait list looked at besides the active ones: a job taken back from a worker that died (its
 * lock lapsed, and a stall check put it back at the head of the line) arrived before the results that others hold, and
 * is waited for until another worker has taken and judged it. In the normal course every job waiting on a queue arrived
 * after every active one of the same queue: with one partition none of them holds anything up; with several, a queue
 * whose workers are behind the others' holds up the results of theirs that arrived after its head.
 */
export const WAIT_HEAD_LOOKED_AT = 100;

/**
 * The active jobs of the results queues whose BullMQ keys start with `queueKeys` (`<partition tag>:results`, by
 * partition), and those at the head of each wait list (`WAIT_HEAD_LOOKED_AT`): ids from the lists, the component and
 * month of each from its job's data (read once per job; a job's data does not change). Ids without an arrival order (a
 * job added with an id of its own) are left out. Each queue is read with one pipeline of its own (its keys share a
 * slot on a Redis Cluster), its wait list before its active list: a job moved from one to the other in between is
 * seen, in one or both.
 *
 * With several partitions, a queue's wait list may hold, beyond the head looked at, results that arrived before some
 * that other queues have handed out already (its workers are behind). When the head looked at is full, a stand-in
 * for those follows the latest of it (order half a step after it, any component, any month, waiting to be taken):
 * every result that arrived after it waits until that queue's line has moved on.
 */
export function activeJobs(redis: RedisConnection, queueKeys: readonly string[], groupOf: GroupOf = ONE_GROUP): ActiveJobs {
  // By partition and job id: what its data says (read once per job; a job's data does not change), and the views of
  // it handed out, waiting and active (built once: a batch waiting for others looks every few milliseconds).
  const known = queueKeys.map(() => new Map<string, { readonly about: Omit<ActiveJob, 'queued' | 'partition'>; readonly views: Partial<Record<'queued' | 'active', ActiveJob>> }>());
  const lookAt = async (queueKey: string, partition: number, skip: (order: number) => boolean) => {
    const answers = (await redis.pipeline().lrange(`${queueKey}:wait`, -WAIT_HEAD_LOOKED_AT, -1).lrange(`${queueKey}:active`, 0, -1).exec()) ?? [];
    const [head, active] = answers.map(([err, list]) => {
      if (err) throw err;
      return list as string[];
    });
    const jobs = new Map<string, { order: number; queued: boolean }>();
    let latestQueued = -Infinity;
    for (const id of head ?? []) {
      const order = arrivalOf(id);
      if (order === undefined) continue;
      if (order > latestQueued) latestQueued = order;
      if (!skip(order)) jobs.set(id, { order, queued: true });
    }
    // Active now, whatever the wait list said a moment before.
    for (const id of active ?? []) {
      const order = arrivalOf(id);
      if (order !== undefined && !skip(order)) jobs.set(id, { order, queued: false });
    }
    const seen = known[partition]!;
    const unknown = [...jobs.keys()].filter((id) => !seen.has(id));
    if (unknown.length > 0) {
      const pipeline = redis.pipeline();
      for (const id of unknown) pipeline.hget(`${queueKey}:${id}`, 'data');
      const data = (await pipeline.exec()) ?? [];
      unknown.forEach((id, i) => seen.set(id, { about: describe(jobs.get(id)!.order, data[i]?.[1], groupOf), views: {} }));
    }
    // Jobs no longer active or waiting at the head (or this process's own now) are forgotten.
    for (const id of seen.keys()) if (!jobs.has(id)) seen.delete(id);
    const out: ActiveJob[] = [];
    for (const [id, job] of jobs) {
      const entry = seen.get(id)!;
      const view = job.queued ? 'queued' : 'active';
      out.push((entry.views[view] ??= { ...entry.about, queued: job.queued, partition }));
    }
    if (queueKeys.length > 1 && (head?.length ?? 0) >= WAIT_HEAD_LOOKED_AT && latestQueued > -Infinity) out.push({ order: latestQueued + 0.5, component: undefined, group: undefined, month: -Infinity, queued: true, partition });
    return out;
  };
  return async (skip) => (await Promise.all(queueKeys.map((queueKey, partition) => lookAt(queueKey, partition, skip)))).flat();
}

/** What a job's data says of its result, as far as it can be read (the worker validates it when it takes the job). */
function describe(order: number, data: unknown, groupOf: GroupOf): Omit<ActiveJob, 'queued' | 'partition'> {
  if (typeof data === 'string') {
    try {
      return { order, ...resultAbout(JSON.parse(data), groupOf) };
    } catch {
      // Not JSON: neither is known, and the job is waited for as one that may touch anything.
    }
  }
  return { order, component: undefined, group: undefined, month: -Infinity };
}

/** A name as validation takes it (domain/event.ts: trimmed, then in Unicode normal form NFKC). */
const nameOf = (v: unknown): string | undefined => (typeof v === 'string' ? v.trim().normalize('NFKC') : undefined);

/**
 * The component (`componentKey`), its group (`groupOf`) and the first instant of the sampling month of a result event
 * as far as it can be read before validation: undefined and -Infinity where it cannot (it is then waited for as one
 * that may touch anything).
 */
export function resultAbout(event: unknown, groupOf: GroupOf = ONE_GROUP): { readonly component: string | undefined; readonly group: string | undefined; readonly month: number } {
  const e = (typeof event === 'object' && event !== null ? event : {}) as { unit?: unknown; component?: unknown; group?: unknown; sampledAt?: unknown };
  const unit = nameOf(e.unit);
  const component = nameOf(e.component);
  const group = nameOf(e.group);
  const time = typeof e.sampledAt === 'string' ? Date.parse(e.sampledAt) : NaN;
  const month = Number.isFinite(time) ? monthStart(time) : -Infinity;
  if (unit === undefined || component === undefined) return { component: undefined, group: undefined, month };
  try {
    return { component: componentKey({ unit, component }), group: groupOf({ unit, component, ...(group !== undefined && { group }) }), month };
  } catch {
    // Names its group cannot be found for (validation refuses them): waited for as one that may touch anything.
    return { component: undefined, group: undefined, month };
  }
}
