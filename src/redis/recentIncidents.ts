/**
 * The incidents the live alarm figures need, read with a bound: every open incident (oldest first per partition)
 * and those closed since a given time (newest first), at most `max` in all, and how many components are registered.
 * Costs per call: per partition one ZRANGE, one ZREVRANGEBYSCORE, one HLEN and HMGETs in pages of 200.
 */
import type { Incident } from '../incidents/model.ts';
import type { RedisConnection } from './connection.ts';
import { incidentOfRecord } from './incidentRecordValue.ts';
import { partitionKeys, type Partitions } from './keys.ts';

export interface RecentIncidents {
  readonly incidents: readonly Incident[];
  /** Components on record (each partition's registry). */
  readonly components: number;
  /** More incidents qualified than `max`: the figures cover part of them (open ones first). */
  readonly truncated: boolean;
}

const PAGE = 200;

export async function readRecentIncidents(redis: RedisConnection, partitions: Partitions, options: { readonly closedSince: number; readonly max: number }): Promise<RecentIncidents> {
  const perPartition = await Promise.all(
    partitions.all().map(async (n) => {
      const p = partitionKeys(partitions.tag(n));
      const [open, closed, components] = await Promise.all([
        redis.zrange(p.open, 0, options.max),
        redis.zrevrangebyscore(p.closed, '+inf', String(options.closedSince), 'LIMIT', 0, options.max + 1),
        redis.hlen(p.registry),
      ]);
      return { records: p.records, open, closed, components };
    }),
  );
  let budget = options.max;
  let truncated = false;
  const wanted: Array<{ records: string; ids: string[] }> = [];
  // Open incidents first (standing and stale need every one of them), then the recently closed.
  for (const which of ['open', 'closed'] as const) {
    for (const part of perPartition) {
      const ids = part[which];
      const take = ids.slice(0, Math.max(0, budget));
      if (take.length < ids.length) truncated = true;
      budget -= take.length;
      if (take.length > 0) wanted.push({ records: part.records, ids: take });
    }
  }
  const incidents: Incident[] = [];
  for (const { records, ids } of wanted) {
    for (let i = 0; i < ids.length; i += PAGE) {
      const raw = await redis.hmgetBuffer(records, ...ids.slice(i, i + PAGE));
      for (const r of raw) if (r !== null) incidents.push(incidentOfRecord(r));
    }
  }
  return { incidents, components: perPartition.reduce((s, p) => s + p.components, 0), truncated };
}
