/**
 * When each demo result is sent: the fleet's 18 months of lab reports, in report order, played back in a few
 * seconds. The fleet's dates are moved by whole days so that its last report arrived the day before the run:
 * the intake refuses samples dated in the future, and a fixed calendar would drift into the future.
 */
import type { ResultEvent } from '../domain/event.ts';
import type { DemoResult } from './fleet.ts';

const DAY_MS = 86_400_000;

export interface PlannedResult {
  readonly event: ResultEvent;
  /** Milliseconds after the start of the playback. */
  readonly atMs: number;
}

export interface FeedPlan {
  /** Whole days added to every date of the fleet (negative: moved back). */
  readonly shiftDays: number;
  readonly results: readonly PlannedResult[];
  readonly firstSampledAt: string;
  readonly lastSampledAt: string;
}

export interface FeedPlanOptions {
  /** The run's clock, epoch ms. */
  readonly now: number;
  /** How long the playback of the whole feed takes. */
  readonly durationMs: number;
}

export function planFeed(fleet: readonly DemoResult[], options: FeedPlanOptions): FeedPlan {
  if (fleet.length === 0) throw new RangeError('planFeed: the fleet holds no results');
  const ordered = [...fleet].sort((a, b) => a.reportedAt - b.reportedAt);
  const first = ordered[0]!.reportedAt;
  const last = ordered.at(-1)!.reportedAt;
  const shiftDays = Math.floor((options.now - DAY_MS - last) / DAY_MS);
  const shift = shiftDays * DAY_MS;
  const span = Math.max(1, last - first);
  const results = ordered.map((r) => ({
    event: { ...r.event, sampledAt: new Date(Date.parse(r.event.sampledAt) + shift).toISOString() },
    atMs: Math.round(((r.reportedAt - first) / span) * options.durationMs),
  }));
  const sampled = results.map((r) => r.event.sampledAt).sort();
  return { shiftDays, results, firstSampledAt: sampled[0]!, lastSampledAt: sampled.at(-1)! };
}
