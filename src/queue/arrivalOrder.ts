/**
 * Arrival order across worker processes: a results job's BullMQ id counts up as results arrive on its partition's
 * queue (the queue numbers the jobs it is given), so the active jobs other processes hold tell a batch which results
 * arrived before its own and are not judged yet (resultBatches.ts). A results job stays active until the batch that
 * judged it has committed, so a job that has left the active list holds a result judged (or refused).
 */
import { componentKey } from '../domain/event.ts';
import type { RedisConnection } from '../redis/connection.ts';

/** A results job active in some process: its arrival order, and the component and sampling month of its result. */
export interface ActiveJob {
  readonly order: number;
  /** `componentKey` of the result; undefined when its data does not name one (it is refused when taken). */
  readonly component: string | undefined;
  /** The first instant (epoch ms, UTC) of the result's sampling month; -Infinity when its data has no sampling time. */
  readonly month: number;
  /** Waiting to be taken (at the head of the wait list), not held by any worker. */
  readonly queued: boolean;
}

/** The results jobs active on a partition's queue, in any process, but those of `skip` (this process's own). */
export type ActiveJobs = (skip: (order: number) => boolean) => Promise<readonly ActiveJob[]>;

/** The first instant (epoch ms, UTC) of the month of `time`. */
export function monthStart(time: number): number {
  const d = new Date(time);
  return Date.UTC(d.getUTCFullYear(), d.getUTCMonth(), 1);
}

/** The number of a results job's id, or undefined for an id of its own (no arrival order). */
export function arrivalOf(jobId: string | undefined): number | undefined {
  if (jobId === undefined) return undefined;
  const n = Number(jobId);
  return Number.isSafeInteger(n) ? n : undefined;
}

/**
 * Jobs at the head of the wait list looked at besides the active ones: a job taken back from a worker that died (its
 * lock lapsed, and a stall check put it back at the head of the line) arrived before the results that others hold, and
 * is waited for until another worker has taken and judged it. In the normal course every waiting job arrived after
 * every active one, and none of them holds anything up.
 */
export const WAIT_HEAD_LOOKED_AT = 100;

/**
 * The active jobs of the queue whose BullMQ keys start with `queueKey` (`<prefix>:<queue name>`), and those at the
 * head of its wait list (`WAIT_HEAD_LOOKED_AT`): ids from the lists, the component and month of each from its job's
 * data (read once per job; a job's data does not change). Ids that are not numbers (a job added with an id of its own)
 * are left out: they carry no order.
 */
export function activeJobs(redis: RedisConnection, queueKey: string): ActiveJobs {
  const activeKey = `${queueKey}:active`;
  const waitKey = `${queueKey}:wait`;
  const known = new Map<number, Omit<ActiveJob, 'queued'>>();
  return async (skip) => {
    const ids: number[] = [];
    const queued = new Set<number>();
    const [active, head] = ((await redis.pipeline().lrange(activeKey, 0, -1).lrange(waitKey, -WAIT_HEAD_LOOKED_AT, -1).exec()) ?? []).map(([err, list]) => {
      if (err) throw err;
      return list as string[];
    });
    for (const id of active ?? []) {
      const n = arrivalOf(id);
      if (n !== undefined && !skip(n)) ids.push(n);
    }
    for (const id of head ?? []) {
      const n = arrivalOf(id);
      if (n === undefined || skip(n)) continue;
      ids.push(n);
      queued.add(n);
    }
    const unknown = ids.filter((n) => !known.has(n));
    if (unknown.length > 0) {
      const pipeline = redis.pipeline();
      for (const n of unknown) pipeline.hget(`${queueKey}:${n}`, 'data');
      const answers = (await pipeline.exec()) ?? [];
      unknown.forEach((n, i) => known.set(n, describe(n, answers[i]?.[1])));
    }
    // Jobs no longer active (or this process's own now) are forgotten.
    const current = new Set(ids);
    for (const n of known.keys()) if (!current.has(n)) known.delete(n);
    return ids.map((n) => ({ ...known.get(n)!, queued: queued.has(n) }));
  };
}

/** What a job's data says of its result, as far as it can be read (the worker validates it when it takes the job). */
function describe(order: number, data: unknown): Omit<ActiveJob, 'queued'> {
  let component: string | undefined;
  let month = -Infinity;
  if (typeof data === 'string') {
    try {
      const event = JSON.parse(data) as { unit?: unknown; component?: unknown; sampledAt?: unknown };
      if (typeof event.unit === 'string' && typeof event.component === 'string') component = componentKey({ unit: event.unit, component: event.component });
      const time = typeof event.sampledAt === 'string' ? Date.parse(event.sampledAt) : NaN;
      if (Number.isFinite(time)) month = monthStart(time);
    } catch {
      // Not JSON: neither is known, and the job is waited for as one that may touch anything.
    }
  }
  return { order, component, month };
}
