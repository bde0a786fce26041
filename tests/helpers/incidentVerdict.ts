/** What the results decide of an incident, for tests that compare ways of judging the same results. */
import { describeState, type Incident } from '../../src/incidents/model.ts';
import type { RedisIncidents } from '../../src/redis/redisIncidents.ts';

/** The verdict of an incident: everything but what was told to whom. */
export function verdict(i: Incident) {
  const { announced: _a, eventSeq: _e, escalation: _s, told: _t, notifications: _n, ...rest } = i;
  return rest;
}

/** An incident as `wearshift replay --json` states it on a verdict line, and as the store holds it. */
export interface VerdictRow {
  incidentId: string;
  state: string;
  peakSeverity: string;
  openedAt: string;
  lastSampledAt: string;
  closed: string | null;
}

const byId = (a: VerdictRow, b: VerdictRow) => (a.incidentId < b.incidentId ? -1 : 1);

/** The verdict lines of `wearshift replay --json` output, by incident id. */
export function replayVerdictRows(stdout: string): VerdictRow[] {
  return stdout
    .trim()
    .split('\n')
    .map((l) => JSON.parse(l) as { type: string })
    .filter((l): l is VerdictRow & { type: 'verdict' } => l.type === 'verdict')
    .map(({ incidentId, state, peakSeverity, openedAt, lastSampledAt, closed }) => ({ incidentId, state, peakSeverity, openedAt, lastSampledAt, closed }))
    .sort(byId);
}

/** The stored incidents as verdict rows, by incident id (without those withdrawn, with `withoutWithdrawn`). */
export async function storedVerdictRows(store: Pick<RedisIncidents, 'list' | 'get'>, options: { withoutWithdrawn?: boolean } = {}): Promise<VerdictRow[]> {
  const rows: VerdictRow[] = [];
  for (const summary of await store.list({ state: 'all', limit: 10_000 })) {
    const i = (await store.get(summary.id))!;
    if (options.withoutWithdrawn === true && i.closed?.how === 'withdrawn') continue;
    rows.push({ incidentId: i.id, state: describeState(i), peakSeverity: i.peakSeverity, openedAt: i.openedAt, lastSampledAt: i.lastSampledAt, closed: i.closed?.how ?? null });
  }
  return rows.sort(byId);
}
