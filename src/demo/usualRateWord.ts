/**
 * The demo's reliability engineer: GEN-1's engine is healthy, yet a CUSUM watch on its aluminium stands to the end of
 * the feed (its own baseline came out low against the rate it wears since). Knowing the engine, the engineer says on
 * the sample that opened the watch that this rate is its usual one, through the API the board's *This rate is usual
 * for it* button calls (`POST …/samples/:sampleId/verdict` with `usual-rate` and a responder token): the change
 * detectors learn a new own baseline from there on, and the watch returns to normal.
 */
import type { RedisIncidents } from '../redis/redisIncidents.ts';

/** The healthy engine with the standing watch, and who speaks for it (a role, not a person). */
export const USUAL_RATE_UNIT = { unit: 'GEN-1', component: 'engine', by: 'fleet reliability engineer' } as const;

export interface UsualRateWord {
  readonly incidentId: string;
  readonly sampleId: string;
  readonly by: string;
  /** HTTP status of the verdict request: 202 when taken. */
  readonly status: number;
}

/** Gives the word on the open watch of USUAL_RATE_UNIT, if one stands; undefined when none does. */
export async function sayUsualRate(store: Pick<RedisIncidents, 'list'>, apiUrl: string, responderToken: string): Promise<UsualRateWord | undefined> {
  const { unit, component, by } = USUAL_RATE_UNIT;
  const open = await store.list({ state: 'open', unit, limit: 100 });
  const watch = open.find((i) => i.component === component && i.peakSeverity === 'watch' && i.alarm === 'active');
  if (watch === undefined) return undefined;
  const res = await fetch(`${apiUrl}/v1/units/${encodeURIComponent(unit)}/components/${encodeURIComponent(component)}/samples/${encodeURIComponent(watch.openedBySampleId)}/verdict`, {
    method: 'POST',
    headers: { authorization: `Bearer ${responderToken}`, 'content-type': 'application/json' },
    body: JSON.stringify({ verdict: 'usual-rate', by }),
    signal: AbortSignal.timeout(10_000),
  });
  await res.arrayBuffer();
  return { incidentId: watch.id, sampleId: watch.openedBySampleId, by, status: res.status };
}
